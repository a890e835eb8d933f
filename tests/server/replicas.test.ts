/**
 * Several server replicas behind one MQTT 5 broker (a private Mosquitto 2 with its own config) and one store,
 * on each backend: a SQLite file two replicas' connections share (replicas on one machine), and PostgreSQL on
 * 127.0.0.1:5432 (a database of this file's own, dropped afterwards; skipped, saying so, when it is not running).
 * Devices are simulated MQTT clients speaking the device protocol (tests/support/replica-rig.ts). Demo data.
 */
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createApiClient } from '../../src/api-client/api-client.js';
import { busForServer, startBus, type Bus } from '../../src/bus/start-bus.js';
import { startServer, type RunningServer } from '../../src/server/start-server.js';
import { openStore, type Store } from '../../src/store/index.js';
import { portOpen, waitFor } from '../support/agent-fixtures.js';
import { postgresUrlFor } from '../support/store-backend.js';
import { MOSQUITTO_BINARY_SKIP_NOTE, mosquittoBinary, startPrivateMosquitto, type PrivateMosquitto } from '../support/bus-mosquitto-rig.js';
import { connectSimDevice, type SimDevice } from '../support/replica-rig.js';

if (!mosquittoBinary) console.warn(`replicas: ${MOSQUITTO_BINARY_SKIP_NOTE}`);
const postgresUp = await portOpen(5432);
if (!postgresUp) console.warn('replicas: PostgreSQL is not listening on 127.0.0.1:5432, so the PostgreSQL runs are skipped');
const BACKENDS = ['sqlite', ...(postgresUp ? ['postgres' as const] : [])] as const;
/** The store options of a data folder on a backend: PostgreSQL gets a schema of its own per folder. */
const storeOn = (backend: string, dataDir: string) => (backend === 'postgres' ? { databaseUrl: postgresUrlFor(dataDir) } : {});
const GROUP = 'replica-test-servers';
const ADMIN_TOKEN = 'replica-test-admin-token-demo-data-01';

for (const backend of BACKENDS) {
describe.skipIf(!mosquittoBinary)(`${backend}: two replicas sharing device messages (MQTT 5 shared subscriptions)`, () => {
  let dir: string;
  let broker: PrivateMosquitto;
  const stores: Store[] = [];
  const buses: Bus[] = [];
  const devices: SimDevice[] = [];

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'ocellus-replicas-ingest-'));
    broker = await startPrivateMosquitto(dir);
    for (const replicaId of ['rep-a', 'rep-b']) {
      const store = openStore(join(dir, 'data'), storeOn(backend, join(dir, 'data')));
      stores.push(store);
      buses.push(await startBus({ store, external: { url: broker.url, username: 'ocellus-server', password: '' }, replicas: { group: GROUP, replicaId } }));
    }
  }, 30_000);

  afterAll(async () => {
    await Promise.all(devices.map((d) => d.close()));
    for (const b of buses) await b.close();
    for (const s of stores) s.close();
    await broker?.stop();
    rmSync(dir, { recursive: true, force: true });
  });

  it('50 devices streaming: every acknowledged event is stored exactly once, and each replica stored a share', async () => {
    const store = stores[0]!;
    const ids = Array.from({ length: 50 }, (_, i) => `gh-share-${String(i + 1).padStart(2, '0')}`);
    for (const id of ids) store.devices.enrol({ id, deviceClassId: 'gh-scout-a', tags: ['replica-test'], actor: 'test', at: new Date().toISOString() });
    devices.push(...(await Promise.all(ids.map((id) => connectSimDevice(broker.url, id)))));
    // Ten batches of five events per device, sent one after another without waiting for acks: consecutive
    // batches of one device reach both replicas, so each ack must come from what the database holds.
    const BATCHES = 10;
    const PER_BATCH = 5;
    await Promise.all(devices.map(async (d) => {
      for (let b = 0; b < BATCHES; b++) await d.sendEvents(1 + b * PER_BATCH, PER_BATCH);
    }));
    const total = BATCHES * PER_BATCH;
    await waitFor(() => devices.every((d) => d.maxAck() === total), `every device acknowledged up to ${total}`, 45_000, 50);

    for (const d of devices) {
      expect(store.deviceEvents.count(d.id), d.id).toBe(total);
      expect(store.deviceEvents.contiguousSeq(d.id), d.id).toBe(total);
      // An ack never runs ahead of what is stored (a device drops what is acked).
      expect(Math.max(...d.acks)).toBeLessThanOrEqual(store.deviceEvents.count(d.id));
    }
    const [a, b] = buses.map((bus) => bus.bridge.stats());
    expect(a!.eventsStored + b!.eventsStored).toBe(ids.length * total);
    expect(a!.eventsDuplicate + b!.eventsDuplicate).toBe(0);
    expect(a!.eventsStored).toBeGreaterThan(0);
    expect(b!.eventsStored).toBeGreaterThan(0);
    // Devices' states are stored by whichever replica got them and read by both from the database.
    expect(stores[1]!.deviceStates.countOnline()).toBe(ids.length);
  }, 60_000);
});

describe.skipIf(!mosquittoBinary)(`${backend}: two replicas: changes made on one reach the other`, () => {
  let dir: string;
  let broker: PrivateMosquitto;
  const servers: RunningServer[] = [];

  beforeAll(async () => {
    dir = mkdtempSync(join(tmpdir(), 'ocellus-replicas-feed-'));
    broker = await startPrivateMosquitto(dir);
    // One after the other: the first makes the signing key and the admin token the second then reads.
    for (const replicaId of ['rep-a', 'rep-b']) {
      servers.push(await startServer({
        dataDir: join(dir, 'data'),
        ...storeOn(backend, join(dir, 'data')),
        port: 0,
        adminToken: ADMIN_TOKEN,
        bus: busForServer({ external: { url: broker.url, username: 'ocellus-server', password: '' }, replicas: { group: GROUP, replicaId } }),
        replica: { replicaId, leaderPollMs: 200 },
      }));
    }
  }, 30_000);

  afterAll(async () => {
    for (const s of servers) await s.close();
    await broker?.stop();
    rmSync(dir, { recursive: true, force: true });
  });

  it('runs the fleet engines on exactly one replica', async () => {
    await waitFor(() => servers.filter((s) => s.leading()).length === 1, 'one replica leading', 10_000);
    expect(servers.filter((s) => s.leading())).toHaveLength(1);
  });

  it('a profile saved on replica A appears in replica B\'s live feed', async () => {
    const [a, b] = servers as [RunningServer, RunningServer];
    const seen: Array<{ route?: string; method?: string }> = [];
    const abort = new AbortController();
    const res = await createApiClient(b.url, ADMIN_TOKEN).stream('/events/stream', abort.signal);
    const reader = res.body!.pipeThrough(new TextDecoderStream()).getReader();
    let text = '';
    const reading = (async () => {
      for (;;) {
        const { value, done } = await reader.read().catch(() => ({ value: undefined, done: true }));
        if (done) return;
        text += value;
        for (const m of text.matchAll(/event: change\ndata: (.*)\n/g)) seen.push(JSON.parse(m[1]!) as { route?: string });
        text = text.slice(text.lastIndexOf('\n\n') + 2 || 0);
      }
    })();
    await waitFor(() => res.ok, 'B\'s stream open');
    await new Promise((r) => setTimeout(r, 0));
    const { loadScenario } = await import('../../src/demo/load-scenario.js');
    const { DEMO_CATALOG_DIR } = await import('../../src/demo/scenario.js');
    // The greenhouse demo catalogue, saved through replica A: documents and then profiles.
    await loadScenario(createApiClient(a.url, ADMIN_TOKEN), DEMO_CATALOG_DIR);
    try {
      await waitFor(() => seen.some((c) => c.method === 'PUT' || c.method === 'POST' ? /profiles/.test(c.route ?? '') : false), 'a profile change in B\'s feed', 15_000);
    } finally {
      abort.abort();
      await reading;
    }
    expect(seen.some((c) => /profiles/.test(c.route ?? ''))).toBe(true);
  }, 45_000);
});
}
