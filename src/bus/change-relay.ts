import type { MqttClient } from 'mqtt';
import { SERVER_CHANGES_TOPIC } from '../protocol/topics.js';

/** Tells the other replicas what changed on this one, and hears what changed on theirs. */
export interface ChangeRelay {
  readonly replicaId: string;
  /** Sends a change made on this replica (JSON-serialisable) to the others; QoS 1, not retained. */
  send(change: unknown): void;
  /** Calls `listener` with each change another replica sent; returns the unsubscribe. */
  onRemote(listener: (change: unknown, fromReplica: string) => void): () => void;
  /** Calls `listener` when the broker announces that another replica's connection was lost (its last will). */
  onReplicaLost(listener: (replicaId: string) => void): () => void;
  /** Settles once the broker has answered the subscription. */
  subscribed(): Promise<void>;
  close(): void;
}

/** The largest relayed change accepted, in bytes: a change names what changed, never carries documents. */
const MAX_CHANGE_BYTES = 64 * 1024;

/** What a replica's last will carries on SERVER_CHANGES_TOPIC: the broker publishes it when the replica's connection is lost. */
export function replicaLostWill(replicaId: string): string {
  return JSON.stringify({ from: replicaId, lost: true });
}

/**
 * A change feed between replicas over the broker they share: every replica publishes its changes to
 * SERVER_CHANGES_TOPIC and subscribes to it with No Local (MQTT 5.0 §3.8.3.1, "No Local option": the broker
 * does not send a client its own messages); messages from this replica's own id are dropped as well, for a
 * broker that ignores the option. Works with any store backend. The server account alone may use the topic
 * (src/bus/mosquitto-config.ts).
 */
export function createChangeRelay(options: { client: MqttClient; replicaId: string; log?: (line: string) => void }): ChangeRelay {
  const { client, replicaId } = options;
  const log = options.log ?? (() => {});
  const listeners = new Set<(change: unknown, fromReplica: string) => void>();
  const lostListeners = new Set<(replicaId: string) => void>();
  let markSubscribed!: () => void;
  const first = new Promise<void>((resolve) => (markSubscribed = resolve));

  function onMessage(topic: string, payload: Buffer) {
    if (topic !== SERVER_CHANGES_TOPIC || payload.length > MAX_CHANGE_BYTES) return;
    let message: { from?: unknown; change?: unknown; lost?: unknown };
    try {
      message = JSON.parse(payload.toString('utf8')) as typeof message;
    } catch {
      return log('relay: dropped a change message that is not JSON');
    }
    if (typeof message.from !== 'string' || message.from === replicaId) return;
    if (message.lost === true) {
      for (const listener of [...lostListeners]) {
        try {
          listener(message.from);
        } catch (e) {
          log(`relay: a replica-lost listener failed: ${(e as Error).message}`);
        }
      }
      return;
    }
    if (message.change === undefined) return;
    for (const listener of [...listeners]) {
      try {
        listener(message.change, message.from);
      } catch (e) {
        log(`relay: a change listener failed: ${(e as Error).message}`);
      }
    }
  }

  function subscribe() {
    client.subscribe(SERVER_CHANGES_TOPIC, { qos: 1, nl: true }, (err) => {
      if (err) log(`relay: subscription failed: ${err.message}`);
      markSubscribed();
    });
  }

  client.on('message', onMessage);
  client.on('connect', subscribe);
  if (client.connected) subscribe();

  return {
    replicaId,
    send: function send(change) {
      client.publish(SERVER_CHANGES_TOPIC, JSON.stringify({ from: replicaId, change }), { qos: 1 }, (err) => {
        if (err) log(`relay: change not sent: ${err.message}`);
      });
    },
    onRemote: function onRemote(listener) {
      listeners.add(listener);
      return () => void listeners.delete(listener);
    },
    onReplicaLost: function onReplicaLost(listener) {
      lostListeners.add(listener);
      return () => void lostListeners.delete(listener);
    },
    subscribed: () => first,
    close: function close() {
      client.off('message', onMessage);
      client.off('connect', subscribe);
    },
  };
}
