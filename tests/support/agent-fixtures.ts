/**
 * Shared fixtures for the bus and agent tests: a demo device class (demo data, invented figures for a
 * greenhouse robot's camera), releases signed with a throwaway key, temporary folders, and a probe
 * for the system Mosquitto on 127.0.0.1:1883.
 */
import { createHash, randomBytes } from 'node:crypto';
import { mkdtempSync, rmSync } from 'node:fs';
import { connect } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { generateSigningKeyPair, signRelease, LEGACY_RELEASE_FORMAT, RELEASE_FORMAT, type Release, type ReleaseTask, type SignedRelease } from '../../src/protocol/index.js';
import { deviceClassSchema, type DeviceClass } from '../../src/schema/device-class.js';

export const keys = generateSigningKeyPair();

/** Demo data: a row-inspection camera of a greenhouse robot. */
export const demoDeviceClass: DeviceClass = deviceClassSchema.parse({
  id: 'gh-rowcam-a',
  name: 'Greenhouse row camera A (demo data)',
  demoData: true,
  lens: { focalLengthMm: 6, fNumberStops: [1.8, 2.8, 4, 5.6, 8], nearestFocusM: 0.1, focusSettleMsPerDioptre: 4, apertureStepMs: 10 },
  sensor: {
    widthPx: 1920, heightPx: 1080, pixelPitchUm: 3, quantumEfficiency: 0.6, fullWellE: 10000, darkNoiseE: 3,
    gainDnPerE: 0.4, bitDepth: 10, maxAnalogGain: 16, readoutMsPerFrame: 8, readoutEnergyPjPerPixel: 50, designWavelengthNm: 550, shutter: 'global', fillFactor: 1,
  },
  isp: { latencyMsPerFrame: 2, energyPjPerPixel: 20 },
  accelerator: {
    macUnits: 1024, clockMhz: 800, precision: 'int8', sramKib: 2048, dramBandwidthGbPerS: 12,
    energyPjPerMac: 0.3, energyPjPerSramByte: 1, energyPjPerDramByte: 40, staticPowerMw: 300, flashReadMbPerS: 100,
  },
  platform: { powerBudgetW: 10 },
});

/** Demo weights: deterministic bytes, so each test knows the sha256. */
export function demoWeights(label: string, sizeBytes = 64 * 1024): { bytes: Buffer; sha256: string } {
  const bytes = Buffer.alloc(sizeBytes);
  for (let i = 0; i < sizeBytes; i += 32) createHash('sha256').update(`${label}:${i}`).digest().copy(bytes, i);
  return { bytes, sha256: createHash('sha256').update(bytes).digest('hex') };
}

export function demoTask(modelId: string, weights: { bytes: Buffer; sha256: string }, focusDistanceM: number, fNumber: number): ReleaseTask {
  return {
    profileId: `${modelId}-profile`,
    revision: 1,
    camera: { focusDistanceM, fNumber, exposureUs: 2000, analogGain: 2 },
    memory: { weightBufferKib: 1024, activationBufferKib: 512 },
    model: { id: modelId, version: '1', sha256: weights.sha256, sizeBytes: weights.bytes.length, weightsPath: `/api/v1/models/${modelId}/weights?sha256=${weights.sha256}` },
    frameRateHz: 10,
    predicted: { inferenceMs: 12, inferenceMj: 30, frameLatencyMs: 25, frameEnergyMj: 45 },
  };
}

export function demoRelease(id: string, version: number, tasks: Record<string, ReleaseTask>, extra: Partial<Release> = {}): Release {
  return {
    format: RELEASE_FORMAT,
    id,
    version,
    deviceClassId: demoDeviceClass.id,
    deviceClass: demoDeviceClass,
    createdAt: '2025-01-01T00:00:00.000Z',
    createdBy: 'test (demo data)',
    audience: { deviceClassId: extra.deviceClassId ?? demoDeviceClass.id },
    expiresAt: '2099-01-01T00:00:00.000Z',
    applyPolicy: 'immediate',
    defaultTask: Object.keys(tasks)[0]!,
    tasks,
    ...extra,
  };
}

/** A release as the server made them before format 2: no audience, no expiry, weights named by the model's latest URL. */
export function legacyRelease(id: string, version: number, tasks: Record<string, ReleaseTask>): Release {
  const { audience: _a, expiresAt: _e, ...rest } = demoRelease(id, version, tasks);
  const legacyTasks = Object.fromEntries(
    Object.entries(tasks).map(([n, t]) => [n, { ...t, model: { ...t.model, weightsPath: `/api/v1/models/${t.model.id}/weights` } }]),
  );
  return { ...rest, format: LEGACY_RELEASE_FORMAT, tasks: legacyTasks };
}

export function sign(release: Release): SignedRelease {
  return signRelease(release, keys.privateKeyPem, keys.publicKeyPem);
}

export function tempDir(label: string): { path: string; remove(): void } {
  const path = mkdtempSync(join(tmpdir(), `ocellus-${label}-`));
  return { path, remove: () => rmSync(path, { recursive: true, force: true }) };
}

/** A device id no other run uses, so tests can share the system Mosquitto. */
export function uniqueDeviceId(label: string): string {
  return `t-${label}-${randomBytes(4).toString('hex')}`;
}

/** True when something accepts TCP connections on 127.0.0.1:port within the timeout. */
export function portOpen(port: number, host = '127.0.0.1', timeoutMs = 500): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = connect({ port, host });
    const done = (ok: boolean) => {
      socket.destroy();
      resolve(ok);
    };
    socket.setTimeout(timeoutMs, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

export const MOSQUITTO_URL = 'mqtt://127.0.0.1:1883';
export const mosquittoUp = await portOpen(1883);
export const MOSQUITTO_SKIP_NOTE = 'skipped: no MQTT broker (Mosquitto) listening on 127.0.0.1:1883';

/** Waits until `check` returns a truthy value, polling; fails with the message after the deadline. */
export async function waitFor<T>(check: () => T | Promise<T>, message: string, timeoutMs = 15_000, everyMs = 20): Promise<NonNullable<T>> {
  const deadline = Date.now() + timeoutMs;
  for (;;) {
    const value = await check();
    if (value) return value as NonNullable<T>;
    if (Date.now() > deadline) throw new Error(`timed out waiting for: ${message}`);
    await new Promise((r) => setTimeout(r, everyMs));
  }
}
