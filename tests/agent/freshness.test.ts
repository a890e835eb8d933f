import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { createAgent } from '../../device-agent/agent.js';
import type { AgentClock } from '../../device-agent/clock.js';
import { createSimDriver } from '../../device-agent/sim-driver.js';
import {
  FRESHNESS_FORMAT, generateSigningKeyPair, signFreshness, signKeyRotation, signatureDigest, type FreshnessStatement, type SignedRelease, type StateMessage,
} from '../../src/protocol/index.js';
import { sqliteHandle } from '../../src/store/sqlite-handle.js';
import { demoDeviceClass, demoRelease, demoTask, demoWeights, keys, sign, tempDir, uniqueDeviceId, waitFor } from '../support/agent-fixtures.js';
import { agentConfig, startBusRig, startWeightsServer, type BusRig, type WeightsServer } from '../support/agent-rig.js';

// The server's periodically re-signed freshness statement (after the timestamp role of the open update-security
// specifications) as the agent reads it: it says when the device is behind, or when the word has gone stale, and
// never applies anything itself. Demo data throughout.

const rows = demoWeights('rows-net f1');
const tasks = { rows: demoTask('rows-net', rows, 0.5, 4) };
const HOUR_MS = 3600_000;

let bus: BusRig;
let web: WeightsServer;
const stops: Array<() => unknown> = [];

beforeAll(async () => {
  bus = await startBusRig();
  web = await startWeightsServer();
  web.files.set('/api/v1/models/rows-net/weights', rows.bytes);
});
// The statement is retained on the class's topic: each test starts without one.
afterEach(async () => bus.bridge.publishFreshness(demoDeviceClass.id, ''));
afterAll(async () => {
  for (const s of stops.reverse()) await s();
  await web.close();
  await bus.close();
});

/** An agent on a clock the test moves. */
async function newAgent(label: string) {
  const id = uniqueDeviceId(label);
  const dir = tempDir(label);
  let offsetMs = 0;
  const clock: AgentClock = { now: () => Date.now() + offsetMs, monotonicMs: () => performance.now() };
  const logs: string[] = [];
  const agent = createAgent({ config: agentConfig(id, bus.enrol(id), bus.brokerUrl, web.url, dir.path), driver: createSimDriver({ clock, timeScale: 0, seed: 7 }), clock, log: (l) => logs.push(l) });
  await agent.start();
  stops.push(async () => {
    await agent.stop();
    dir.remove();
  });
  await waitFor(() => agent.connected(), 'agent connected');
  return { id, agent, logs, advance: (ms: number) => (offsetMs += ms) };
}

function statement(latest: SignedRelease | null, issuedMs: number, lifetimeMs = 24 * HOUR_MS): FreshnessStatement {
  return {
    format: FRESHNESS_FORMAT,
    deviceClassId: demoDeviceClass.id,
    latest: latest ? { releaseId: latest.release.id, version: latest.release.version, digest: signatureDigest(latest.signature) } : null,
    issuedAt: new Date(issuedMs).toISOString(),
    expiresAt: new Date(issuedMs + lifetimeMs).toISOString(),
  };
}

const publish = (s: FreshnessStatement, signer = keys, chain?: Parameters<typeof signFreshness>[3]) =>
  bus.bridge.publishFreshness(demoDeviceClass.id, JSON.stringify(signFreshness(s, signer.privateKeyPem, signer.publicKeyPem, chain)));
const storedFreshness = (id: string) =>
  (sqliteHandle(bus.store).prepare("SELECT event FROM device_events WHERE device_id = ? AND type = 'freshness' ORDER BY seq").pluck().all(id) as string[]).map(
    (e) => JSON.parse(e) as { stale: boolean; expired: boolean; latestReleaseId: string | null },
  );

describe('freshness statements on the agent (embedded broker)', () => {
  it('notices that its retained release is stale, reports it in state and events, and applies nothing until the newer one arrives', async () => {
    const { id, agent } = await newAgent('stale');
    const v1 = sign(demoRelease('rel-fr1', 1, tasks));
    const v2 = sign(demoRelease('rel-fr2', 2, tasks));
    await bus.bridge.publishRelease(id, { raw: JSON.stringify(v1), parsed: v1 });
    await waitFor(() => agent.state().releaseId === 'rel-fr1', 'rel-fr1 applied');
    // The server's word: the class's newest release is rel-fr2, which this device was never sent.
    await publish(statement(v2, Date.now()));
    await waitFor(() => agent.state().freshness?.stale, 'stale noticed');
    expect(agent.state()).toMatchObject({ releaseId: 'rel-fr1', pending: null, freshness: { stale: true, expired: false, latestReleaseId: 'rel-fr2', latestVersion: 2 } });
    await waitFor(() => (bus.bridge.deviceStates.get(id)?.state as StateMessage | null | undefined)?.freshness?.stale, 'server sees the stale flag in state');
    await waitFor(() => storedFreshness(id).length === 1, 'freshness event stored');
    expect(storedFreshness(id)[0]).toMatchObject({ stale: true, expired: false, latestReleaseId: 'rel-fr2' });
    // Only the release itself moves the device; then the flag clears, with an event.
    await bus.bridge.publishRelease(id, { raw: JSON.stringify(v2), parsed: v2 });
    await waitFor(() => agent.state().releaseId === 'rel-fr2', 'rel-fr2 applied');
    await waitFor(() => storedFreshness(id).length === 2, 'cleared flag stored');
    expect(storedFreshness(id)[1]).toMatchObject({ stale: false, expired: false });
    expect(agent.state().freshness).toMatchObject({ stale: false });
  });

  it('notices when the statement itself expired: no fresh word from the server', async () => {
    const { id, agent, advance } = await newAgent('expired');
    const v1 = sign(demoRelease('rel-fx1', 1, tasks));
    await bus.bridge.publishRelease(id, { raw: JSON.stringify(v1), parsed: v1 });
    await waitFor(() => agent.state().releaseId === 'rel-fx1', 'rel-fx1 applied');
    await publish(statement(v1, Date.now(), HOUR_MS));
    await waitFor(() => agent.state().freshness !== null && agent.state().freshness !== undefined, 'statement held');
    expect(agent.state().freshness).toMatchObject({ stale: false, expired: false });
    // Two hours on the agent's clock without a new statement.
    advance(2 * HOUR_MS);
    expect(agent.state().freshness).toMatchObject({ stale: false, expired: true });
    agent.setMotion(true);
    await waitFor(() => storedFreshness(id).some((e) => e.expired), 'expired flag stored as an event');
    await waitFor(() => (bus.bridge.deviceStates.get(id)?.state as StateMessage | null | undefined)?.freshness?.expired, 'server sees the expired flag in state');
  });

  it('refuses a statement signed by a key outside its trust and chain, and follows one signed by a rotated key', async () => {
    const { agent, logs } = await newAgent('keys');
    const v1 = sign(demoRelease('rel-fk1', 1, tasks));
    const stranger = generateSigningKeyPair();
    await publish(statement(v1, Date.now()), stranger);
    await waitFor(() => logs.some((l) => /refused a freshness statement \(unknown-key: /.test(l)), 'stranger refused');
    expect(agent.state().freshness).toBeNull();
    // A key the trusted one vouched for: accepted through the chain the statement carries.
    const next = generateSigningKeyPair();
    const link = signKeyRotation(keys, next.publicKeyPem, '2025-06-01T00:00:00.000Z');
    await publish(statement(v1, Date.now() + 1), next, [link]);
    await waitFor(() => agent.state().freshness, 'statement by the rotated key held');
    expect(agent.state().freshness).toMatchObject({ latestReleaseId: 'rel-fk1', stale: true });
    // A chain link a stranger signed does not help.
    const forged = signKeyRotation(stranger, next.publicKeyPem, '2025-06-01T00:00:00.000Z');
    const before = logs.length;
    await publish(statement(null, Date.now() + 2), next, [{ ...forged, statement: { ...forged.statement, previousKeyId: link.statement.previousKeyId } }]);
    await waitFor(() => logs.slice(before).some((l) => /refused a freshness statement \(unknown-key: .*not signed by the previous key/.test(l)), 'forged chain refused');
    expect(agent.state().freshness).toMatchObject({ latestReleaseId: 'rel-fk1' });
  });

  it('ignores a replayed older statement (lower issuedAt) and keeps the newer word', async () => {
    const { agent, logs } = await newAgent('replay');
    const v1 = sign(demoRelease('rel-fp1', 1, tasks));
    const v2 = sign(demoRelease('rel-fp2', 2, tasks));
    const now = Date.now();
    const older = statement(v1, now - HOUR_MS);
    await publish(statement(v2, now));
    await waitFor(() => agent.state().freshness?.latestReleaseId === 'rel-fp2', 'newer statement held');
    await publish(older);
    await waitFor(() => logs.some((l) => /ignored an older freshness statement/.test(l)), 'replay ignored');
    expect(agent.state().freshness).toMatchObject({ latestReleaseId: 'rel-fp2', issuedAt: new Date(now).toISOString() });
    // Nothing was fetched or applied because of either statement.
    expect(agent.state().releaseId).toBeNull();
  });
});
