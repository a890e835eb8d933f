/**
 * A batch the database refuses: its events come again from the devices (they were not acked), but a state
 * message is sent once, so the bridge must keep the batch's states and connection changes and store them on
 * the next try, in the order they arrived. (Demo data: a greenhouse scout.)
 */
import mqtt from 'mqtt';
import { describe, expect, it } from 'vitest';
import { createBridge } from '../../src/bus/bridge.js';
import { startEmbeddedBroker } from '../../src/bus/broker.js';
import { createInlineEventWriter, type EventWriter } from '../../src/bus/event-writer.js';
import { PROTOCOL_VERSION, deviceTopic, type StateMessage } from '../../src/protocol/index.js';
import { openStore } from '../../src/store/index.js';
import { tempDir, waitFor } from '../support/agent-fixtures.js';

function state(online: boolean): StateMessage {
  return {
    v: PROTOCOL_VERSION, online, agentVersion: 'test', ts: new Date().toISOString(), releaseId: 'gh-scout-a-v1', releaseVersion: 1,
    activeTask: 'fruit-counting', profileId: null, profileRevision: null, moving: false, pending: null, refused: null, lastSeq: 0,
    ...(online ? {} : { offlineReason: 'connection-lost' as const }),
  };
}

describe('bridge: a batch the database refuses', () => {
  it('keeps its states and connection changes and stores them, in order, on the next try', async () => {
    const dir = tempDir('bridge-retry');
    const store = openStore(dir.path);
    const serverUser = { username: 'test-server', password: 'test-server-secret' };
    const broker = await startEmbeddedBroker({ port: 0, serverUser, authenticate: (id, pw) => store.devices.verifyCredentialsAsync(id, pw) });
    const inline = createInlineEventWriter(store);
    let refusals = 0;
    // The first two writes fail as a full disk or a lost database connection would.
    const flaky: EventWriter = {
      kind: 'inline',
      write: async (batch) => {
        if (refusals < 2) {
          refusals += 1;
          throw new Error('disk I/O error (test)');
        }
        return inline.write(batch);
      },
      close: () => inline.close(),
    };
    const lines: string[] = [];
    const server = await mqtt.connectAsync(broker.url, { ...serverUser, reconnectPeriod: 0 });
    const bridge = createBridge({ mqttClient: server, store, clock: { now: () => new Date() }, eventWriter: flaky, retryMs: 5, log: (l) => lines.push(l) });
    const id = 'gh-retry-01';
    const { password } = store.devices.enrol({ id, deviceClassId: 'gh-scout-a', tags: [], actor: 'test', at: new Date().toISOString() })!;
    try {
      await bridge.subscribed();
      const device = await mqtt.connectAsync(broker.url, { username: id, password, clientId: id, reconnectPeriod: 0 });
      await device.publishAsync(deviceTopic(id, 'state'), JSON.stringify(state(true)), { qos: 1, retain: true });
      await waitFor(() => refusals >= 1, 'the first write refused', 10_000);
      await device.publishAsync(deviceTopic(id, 'state'), JSON.stringify(state(false)), { qos: 1, retain: true });
      await waitFor(() => store.deviceConnections.latest(id, 10).length === 2, 'both connection changes stored', 10_000);
      expect(refusals).toBe(2);
      const changes = store.deviceConnections.latest(id, 10).reverse();
      expect(changes.map((c) => [c.online, c.cause])).toEqual([[true, 'connected'], [false, 'last-will']]);
      expect(store.deviceStates.get(id)?.online).toBe(false);
      expect(lines.some((l) => l.includes('its states are kept to try again'))).toBe(true);
      await device.endAsync();
    } finally {
      await bridge.close();
      await server.endAsync();
      await broker.close();
      store.close();
      dir.remove();
    }
  });
});
