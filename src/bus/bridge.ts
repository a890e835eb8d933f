import { randomUUID } from 'node:crypto';
import type { MqttClient } from 'mqtt';
import type { MetricsRegistry } from '../metrics/registry.js';
import { METRIC_NAMES } from '../metrics/registry.js';
import { decodeMessage, encodeMessage } from '../protocol/decode.js';
import { decodeEventsMessage } from '../protocol/decode-events.js';
import { MAX_PAYLOAD_BYTES } from '../protocol/limits.js';
import { PROTOCOL_VERSION, type CommandMessage, type StateMessage } from '../protocol/messages.js';
import type { FreshnessPublisher } from '../protocol/freshness.js';
import type { ReleasePublisher, SignedReleaseText } from '../protocol/release.js';
import { allDevicesFilter, classFreshnessTopic, deviceTopic, parseDeviceTopic, sharedFilter } from '../protocol/topics.js';
import type { DeviceEventColumns } from '../store/device-events.js';
import type { DeviceStateRepository } from '../store/device-state.js';
import type { Store } from '../store/store.js';
import type { ConnectionSighting, KeepaliveNotes } from './connection-notes.js';
import type { IngestBatch, IngestResult } from './event-batch.js';
import { createInlineEventWriter, type EventWriter } from './event-writer.js';
import { createRejectCounter, type BridgeRejectReason } from './rejects.js';

export interface BridgeOptions {
  /** A client logged in as the server's own account; the bridge subscribes on every (re)connect. */
  mqttClient: MqttClient;
  store: Pick<Store, 'deviceStates' | 'deviceEvents' | 'deviceEventEpochs' | 'deviceConnections' | 'devices' | 'transaction'>;
  clock: { now(): Date };
  /** Where batches are stored: by default on this thread through the store's connection; startBus hands in a worker. */
  eventWriter?: EventWriter;
  metrics?: MetricsRegistry;
  /** The embedded broker's notes of devices dropped for missed keep-alives (an external broker gives none). */
  keepaliveNotes?: Pick<KeepaliveNotes, 'takeMissed'>;
  /**
   * Replicas: subscribe to device state and events as this MQTT 5 shared-subscription group
   * (`$share/<group>/…`), so the broker hands each message to one replica of the group. Without it the
   * bridge subscribes alone and receives every message, retained states included.
   */
  shareGroup?: string;
  /** How long after a batch failed to be stored the bridge tries its states and connection changes again (1,000 ms by default). */
  retryMs?: number;
  log?: (line: string) => void;
}

export interface BridgeStats {
  messages: number;
  eventsStored: number;
  eventsDuplicate: number;
  statesStored: number;
  connectionChanges: number;
  acksSent: number;
  rejected: Record<BridgeRejectReason, number>;
}

export interface Bridge extends ReleasePublisher, FreshnessPublisher {
  /** Sends an operator command (QoS 1, not retained) and returns its id. */
  publishCommand(deviceId: string, command: CommandMessage['command'], issuedBy: string): Promise<string>;
  /** Removes the retained release of a device (an empty retained payload), e.g. when it is withdrawn. */
  clearRelease(deviceId: string): Promise<void>;
  readonly deviceStates: DeviceStateRepository;
  /** Calls `listener` with the ids of the devices whose state or events were just stored (e.g. for live pages); returns the unsubscribe. */
  onStored(listener: (deviceIds: string[]) => void): () => void;
  stats(): BridgeStats;
  /** Stores everything received so far and sends the acks; resolves once that is done, or once a write failed (what it held is kept for the retry). */
  flush(): Promise<void>;
  /** Settles once the broker has answered the bridge's first subscription to device state and events. */
  subscribed(): Promise<void>;
  close(): Promise<void>;
}

/** At most this many connection changes wait for a database that keeps failing; the oldest go first. */
const MAX_KEPT_CONNECTIONS = 10_000;

/** Events are gathered per device and event-log epoch (a replay of an older epoch may arrive beside the current one). */
type Pending = { events: Map<string, [deviceId: string, events: DeviceEventColumns]>; states: Map<string, StateMessage>; connections: Array<[string, ConnectionSighting]> };
const emptyPending = (): Pending => ({ events: new Map(), states: new Map(), connections: [] });

/**
 * The server side of the bus: stores every device's state and events and acknowledges events.
 * Messages are decoded with size limits and dropped with a counted reason when bad; the device id
 * is taken from the topic, never from the payload. Work is batched: one transaction (on the event
 * writer, a worker thread under startBus) for everything received while the previous one was being
 * written, then one ack per device once it is committed, so the server keeps up with thousands of
 * devices resending at once instead of becoming the broker's slow subscriber.
 */
export function createBridge(options: BridgeOptions): Bridge {
  const { mqttClient: client, store, clock } = options;
  const log = options.log ?? (() => {});
  const states = store.deviceStates;
  const writer = options.eventWriter ?? createInlineEventWriter(store);
  const rejects = createRejectCounter(options.metrics, log);
  const enrolled = new Set<string>();
  const counts = { messages: 0, eventsStored: 0, eventsDuplicate: 0, statesStored: 0, connectionChanges: 0, acksSent: 0 };
  let pending: Pending = emptyPending();
  let scheduled: NodeJS.Immediate | null = null;
  let writing: Promise<void> | null = null;
  let closed = false;
  let retryTimer: ReturnType<typeof setTimeout> | null = null;
  let failures = 0;
  const retryMs = options.retryMs ?? 1000;
  const storedListeners = new Set<(deviceIds: string[]) => void>();

  options.metrics?.gauge(METRIC_NAMES.devicesOnline, 'Devices whose latest state says online', () => [{ value: states.countOnline() }]);

  function isEnrolled(deviceId: string): boolean {
    if (enrolled.has(deviceId)) return true;
    if (store.devices.get(deviceId) === null) return false;
    enrolled.add(deviceId);
    return true;
  }

  function reject(reason: BridgeRejectReason, topic: string, detail: string) {
    rejects.record(reason, topic, detail);
  }

  function sightingOf(deviceId: string, state: StateMessage, retained: boolean): ConnectionSighting {
    const at = clock.now().toISOString();
    const base = { online: state.online, at, releaseId: state.releaseId, task: state.activeTask };
    if (state.online) return base;
    // A retained offline state delivered on subscribing is old news: the device went while the server was away.
    if (retained) return { ...base, hint: 'retained' };
    if (options.keepaliveNotes?.takeMissed(deviceId)) return { ...base, hint: 'keepalive-missed' };
    return state.offlineReason ? { ...base, hint: state.offlineReason } : base;
  }

  function onMessage(topic: string, payload: Buffer, packet?: { retain?: boolean }) {
    if (closed) return;
    counts.messages += 1;
    const where = parseDeviceTopic(topic);
    if (!where) return reject('unknown-device', topic, 'topic does not name a valid device');
    if (where.channel !== 'state' && where.channel !== 'events') return;
    // An empty retained payload only clears the broker's copy; there is nothing to store.
    if (payload.length === 0) return;
    if (!isEnrolled(where.deviceId)) return reject('unknown-device', topic, `device ${where.deviceId} is not enrolled`);
    if (where.channel === 'state') {
      const decoded = decodeMessage('state', payload);
      if (!decoded.ok) return reject(decoded.reason, topic, decoded.detail);
      pending.states.set(where.deviceId, decoded.value);
      pending.connections.push([where.deviceId, sightingOf(where.deviceId, decoded.value, packet?.retain === true)]);
    } else {
      const decoded = decodeEventsMessage(payload);
      if (!decoded.ok) return reject(decoded.reason, topic, decoded.detail);
      // Rows keep each event's JSON as the device sent it: stored without serialising it again.
      const { events: list, texts, epoch } = decoded.value;
      const key = epoch === undefined ? where.deviceId : `${where.deviceId}/${epoch}`;
      let columns = pending.events.get(key)?.[1];
      if (!columns) {
        columns = epoch === undefined ? { seqs: [], tss: [], types: [], jsons: [] } : { epoch, seqs: [], tss: [], types: [], jsons: [] };
        pending.events.set(key, [where.deviceId, columns]);
      }
      for (let i = 0; i < list.length; i++) {
        const e = list[i]!;
        columns.seqs.push(e.seq);
        columns.tss.push(e.ts);
        columns.types.push(e.type);
        columns.jsons.push(texts[i]!);
      }
    }
    scheduled ??= setImmediate(startWrite);
  }

  /**
   * Hands what was received to the writer, one batch at a time and in order; what arrives meanwhile
   * waits for the next. Acks go out only after the writer has committed.
   */
  function startWrite() {
    if (scheduled) clearImmediate(scheduled);
    scheduled = null;
    if (writing) return;
    const batch = pending;
    pending = emptyPending();
    if (batch.events.size === 0 && batch.states.size === 0) return;
    const ingest: IngestBatch = { at: clock.now().toISOString(), events: [...batch.events.values()], states: [...batch.states], connections: batch.connections };
    writing = writer
      .write(ingest)
      .then(
        (result) => afterCommit(ingest, result),
        (e: unknown) => {
          // Nothing was stored or acked: devices resend their events, but a state message is sent once, so its
          // state and connection change would be lost. They go back ahead of what arrived since, and are tried again.
          failures += 1;
          keepForRetry(batch);
          log(`bus: could not store a batch (${(e as Error).message}); devices will resend its events, its states are kept to try again`);
        },
      )
      .finally(() => {
        writing = null;
        if (retryTimer) return;
        if (pending.events.size > 0 || pending.states.size > 0) scheduled ??= setImmediate(startWrite);
      });
  }

  /** Puts a failed batch's states and connection changes back, older than anything received since it was taken. */
  function keepForRetry(failed: Pending) {
    for (const [deviceId, state] of failed.states) if (!pending.states.has(deviceId)) pending.states.set(deviceId, state);
    pending.connections = [...failed.connections, ...pending.connections].slice(-MAX_KEPT_CONNECTIONS);
    if (closed || retryTimer) return;
    // After a pause: a database that refuses writes is not asked again at once, in a loop.
    retryTimer = setTimeout(() => {
      retryTimer = null;
      scheduled ??= setImmediate(startWrite);
    }, retryMs);
    retryTimer.unref?.();
  }

  function afterCommit(batch: IngestBatch, result: IngestResult) {
    counts.eventsStored += result.eventsStored;
    counts.eventsDuplicate += result.eventsDuplicate;
    counts.statesStored += result.statesStored;
    counts.connectionChanges += result.connectionChanges;
    for (const [deviceId, upTo, epoch] of result.acks) {
      // QoS 0: an ack lost on the way only makes the device resend, and a resend is acked again.
      // No epoch for the legacy one: older agents check acks strictly and know no such field.
      client.publish(deviceTopic(deviceId, 'ack'), encodeMessage(epoch === undefined ? { v: PROTOCOL_VERSION, upTo } : { v: PROTOCOL_VERSION, upTo, epoch }), { qos: 0 });
      counts.acksSent += 1;
    }
    // Listeners (live pages) run after the acks, so they never delay a device's resend window.
    const storedIds = [...new Set([...batch.events.map(([id]) => id), ...batch.states.map(([id]) => id)])];
    for (const listener of storedListeners) {
      try {
        listener(storedIds);
      } catch (e) {
        log(`bus: a stored-change listener failed: ${(e as Error).message}`);
      }
    }
  }

  /** Writes until nothing is pending, or until a write fails (what it held stays pending for the retry). */
  async function flush(): Promise<void> {
    const failuresBefore = failures;
    startWrite();
    while (writing) {
      await writing;
      if (failures !== failuresBefore) return;
      startWrite();
    }
  }

  let markSubscribed!: () => void;
  const firstSubscription = new Promise<void>((resolve) => (markSubscribed = resolve));

  // A shared subscription gets no retained messages (MQTT 5.0 §4.8.2): each device's current state is the one the
  // replica that received its latest state message stored, read by every replica from the database.
  const filters = [allDevicesFilter('state'), allDevicesFilter('events')].map((f) => (options.shareGroup ? sharedFilter(options.shareGroup, f) : f));

  function subscribe() {
    client.subscribe(filters, { qos: 1 }, (err) => {
      if (err) log(`bus: subscription failed: ${err.message}`);
      markSubscribed();
    });
  }

  client.on('message', onMessage);
  client.on('connect', subscribe);
  if (client.connected) subscribe();

  // A rollout hands the same stored release for every device of a wave: its text is turned into bytes once, not per device.
  // Stored releases never change (a change would break the signature), so the cache stays true.
  const encoded = new WeakMap<SignedReleaseText, Buffer>();

  async function publishRelease(deviceId: string, release: SignedReleaseText): Promise<void> {
    let payload = encoded.get(release);
    if (!payload) {
      // The stored text as it is: never a re-serialization of the parsed copy.
      payload = Buffer.from(release.raw, 'utf8');
      encoded.set(release, payload);
    }
    if (payload.byteLength > MAX_PAYLOAD_BYTES.release) {
      throw new RangeError(`release ${release.parsed.release.id} is ${payload.byteLength} bytes; the limit is ${MAX_PAYLOAD_BYTES.release}`);
    }
    await client.publishAsync(deviceTopic(deviceId, 'release'), payload, { qos: 1, retain: true });
  }

  return {
    publishRelease,
    publishCommand: async function publishCommand(deviceId, command, issuedBy) {
      const message: CommandMessage = { v: PROTOCOL_VERSION, id: randomUUID(), issuedBy, command };
      await client.publishAsync(deviceTopic(deviceId, 'cmd'), encodeMessage(message), { qos: 1 });
      return message.id;
    },
    publishFreshness: async function publishFreshness(deviceClassId, text) {
      await client.publishAsync(classFreshnessTopic(deviceClassId), text, { qos: 1, retain: true });
    },
    clearRelease: async function clearRelease(deviceId) {
      await client.publishAsync(deviceTopic(deviceId, 'release'), Buffer.alloc(0), { qos: 1, retain: true });
    },
    deviceStates: states,
    onStored: function onStored(listener) {
      storedListeners.add(listener);
      return () => void storedListeners.delete(listener);
    },
    stats: function stats() {
      return { ...counts, rejected: rejects.counts() };
    },
    flush,
    subscribed: () => firstSubscription,
    close: async function close() {
      if (retryTimer) clearTimeout(retryTimer);
      retryTimer = null;
      await flush();
      closed = true;
      client.off('message', onMessage);
      client.off('connect', subscribe);
    },
  };
}
