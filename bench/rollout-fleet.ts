// Child process of the rollout bench: N lightweight device agents in one process, each on its own real MQTT
// connection to the embedded broker. An agent verifies every release it receives (key id, Ed25519 over the
// canonical JSON, device class: the real agent's checks, with the public key parsed once instead of per
// message and without the full schema check), then reports it applied: a release-applied event and a
// retained state naming it. A report-state command is answered with the retained state alone: that is the bare publish-and-reply the
// bench compares with. Weights are not downloaded (the real agent's HTTP step is left out of both sides).
// Settings: the JSON file named by argv[2]; talks to the parent in JSON lines on stdout.
import { readFileSync } from 'node:fs';
import mqtt, { type MqttClient } from 'mqtt';
import { createPublicKey, verify, type KeyObject } from 'node:crypto';
import { PROTOCOL_VERSION, canonicalJson, deviceTopic, keyIdOf, type StateMessage } from '../src/protocol/index.js';

export interface RolloutFleetSettings {
  brokerUrl: string;
  publicKeyPem: string;
  deviceClassId: string;
  password: string;
  deviceIds: string[];
  /** Connections opened at once while starting. */
  connectConcurrency: number;
}

/** The client library's own trace logger, off: 5,000 simulated devices share one process, real ones would not. */
const quiet = () => {};

const say = (message: Record<string, unknown>) => process.stdout.write(`${JSON.stringify(message)}\n`);

interface LightAgent {
  client: MqttClient;
  releaseId: string | null;
  releaseVersion: number | null;
  seq: number;
}

function state(a: LightAgent): StateMessage {
  return {
    v: PROTOCOL_VERSION, online: true, agentVersion: 'bench-light-0', ts: new Date().toISOString(),
    releaseId: a.releaseId, releaseVersion: a.releaseVersion, activeTask: null, profileId: null, profileRevision: null,
    moving: false, pending: null, refused: null, lastSeq: a.seq,
  };
}

interface Trust {
  key: KeyObject;
  keyId: string;
  deviceClassId: string;
}

type Verdict = { ok: true; id: string; version: number } | { ok: false; id: string | null; reason: string };

function check(raw: { release?: { id?: string; version?: number; deviceClassId?: string }; signature?: string; keyId?: string }, trust: Trust): Verdict {
  const id = typeof raw.release?.id === 'string' ? raw.release.id : null;
  if (!raw.release || typeof raw.signature !== 'string') return { ok: false, id, reason: 'wrong-schema' };
  if (raw.keyId !== trust.keyId) return { ok: false, id, reason: `unknown-key: signed with ${raw.keyId}` };
  if (!verify(null, Buffer.from(canonicalJson(raw.release), 'utf8'), trust.key, Buffer.from(raw.signature, 'base64'))) {
    return { ok: false, id, reason: 'bad-signature' };
  }
  if (raw.release.deviceClassId !== trust.deviceClassId) return { ok: false, id, reason: `wrong-device-class: ${raw.release.deviceClassId}` };
  return { ok: true, id: id!, version: Number(raw.release.version) };
}

async function startAgent(id: string, s: RolloutFleetSettings, trust: Trust): Promise<LightAgent> {
  const client = await mqtt.connectAsync(s.brokerUrl, { clientId: id, username: id, password: s.password, clean: true, reconnectPeriod: 0, keepalive: 600, log: quiet });
  const a: LightAgent = { client, releaseId: null, releaseVersion: null, seq: 0 };
  const publishState = () => client.publish(deviceTopic(id, 'state'), JSON.stringify(state(a)), { qos: 1, retain: true });
  client.on('message', (topic, payload) => {
    if (topic.endsWith('/cmd')) return void publishState();
    if (!topic.endsWith('/release') || payload.length === 0) return;
    const verdict = check(JSON.parse(payload.toString('utf8')), trust);
    a.seq += 1;
    const ts = new Date().toISOString();
    const event = verdict.ok
      ? { seq: a.seq, ts, type: 'release-applied', releaseId: verdict.id, version: verdict.version }
      : { seq: a.seq, ts, type: 'release-refused', releaseId: verdict.id, reason: verdict.reason };
    if (verdict.ok) {
      a.releaseId = verdict.id;
      a.releaseVersion = verdict.version;
    }
    client.publish(deviceTopic(id, 'events'), JSON.stringify({ v: PROTOCOL_VERSION, events: [event] }), { qos: 1 });
    publishState();
  });
  await client.subscribeAsync([deviceTopic(id, 'release'), deviceTopic(id, 'cmd')], { qos: 1 });
  publishState();
  return a;
}

async function main(): Promise<void> {
  const settings = JSON.parse(readFileSync(process.argv[2]!, 'utf8')) as RolloutFleetSettings;
  const trust: Trust = { key: createPublicKey(settings.publicKeyPem), keyId: keyIdOf(settings.publicKeyPem), deviceClassId: settings.deviceClassId };
  const agents: LightAgent[] = [];
  const ids = settings.deviceIds;
  for (let i = 0; i < ids.length; i += settings.connectConcurrency) {
    agents.push(...(await Promise.all(ids.slice(i, i + settings.connectConcurrency).map((id) => startAgent(id, settings, trust)))));
  }
  say({ phase: 'connected', agents: agents.length });
  process.stdin.resume();
  process.stdin.on('end', () => {
    void Promise.all(agents.map((a) => a.client.endAsync(true))).then(() => process.exit(0));
  });
}

main().catch((e: unknown) => {
  process.stderr.write(`rollout fleet: ${e instanceof Error ? (e.stack ?? e.message) : String(e)}\n`);
  process.exit(1);
});
