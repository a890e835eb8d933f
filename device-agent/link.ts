import mqtt, { type IClientOptions, type MqttClient } from 'mqtt';
import { deviceTopic, type DeviceChannel } from '../src/protocol/topics.js';

export type MqttConnect = (url: string, options: IClientOptions) => MqttClient;

export interface LinkOptions {
  deviceId: string;
  brokerUrl: string;
  username: string;
  password: string;
  /** The state to leave behind (online: false) if the connection drops; kept current as state changes. */
  willPayload: string;
  onMessage(channel: 'release' | 'cmd' | 'ack' | 'freshness', payload: Buffer): void;
  /** The device class's freshness topic, subscribed apart: a broker that refuses it leaves the device's own topics working. */
  freshnessTopic?: string;
  onConnected(): void;
  onDisconnected(): void;
  mqttConnect?: MqttConnect;
  reconnectMs?: number;
  keepaliveS?: number;
  log?: (line: string) => void;
}

export interface Link {
  connected(): boolean;
  /** Retained, QoS 1: the broker keeps the latest state for whoever subscribes later. */
  publishState(payload: string, willPayload: string): void;
  publishEvents(payload: string): void;
  close(finalState?: string): Promise<void>;
}

const INBOUND: ReadonlyArray<'release' | 'cmd' | 'ack'> = ['release', 'cmd', 'ack'];

/**
 * The device's MQTT session: client id = device id, persistent session (commands and acks sent
 * while it was away are queued by the broker), subscriptions to its own release, cmd and ack topics
 * renewed on every connect, and a last will that marks its state offline.
 */
export function openLink(options: LinkOptions): Link {
  const log = options.log ?? (() => {});
  const stateTopic = deviceTopic(options.deviceId, 'state');
  const connect = options.mqttConnect ?? mqtt.connect;
  const will = { topic: stateTopic, payload: Buffer.from(options.willPayload), qos: 1 as const, retain: true };
  const client = connect(options.brokerUrl, {
    clientId: options.deviceId,
    username: options.username,
    password: options.password,
    clean: false,
    reconnectPeriod: options.reconnectMs ?? 1000,
    // A refused CONNECT (the broker still holds this device's previous session, or a rate limit) is retried
    // like a lost connection; mqtt.js would otherwise stop reconnecting for good.
    reconnectOnConnackError: true,
    keepalive: options.keepaliveS ?? 30,
    connectTimeout: 10_000,
    will,
    // mqtt-packet's write cache holds 65,536 two-byte Buffers for packet ids (about 6 MB of heap);
    // an agent sends a few packets a second, so it allocates the two bytes per packet instead.
    writeCache: false,
  });
  const topics = new Map<string, 'release' | 'cmd' | 'ack'>(INBOUND.map((c) => [deviceTopic(options.deviceId, c as DeviceChannel), c]));
  let up = false;

  client.on('connect', () => {
    client.subscribe([...topics.keys()], { qos: 1 }, (err) => {
      if (err) {
        log(`agent: subscription refused: ${err.message}`);
        return;
      }
      up = true;
      options.onConnected();
    });
    if (options.freshnessTopic) {
      client.subscribe(options.freshnessTopic, { qos: 1 }, (err, granted) => {
        if (err || granted?.some((g) => g.qos === 128)) log(`agent: the broker refused the freshness topic ${options.freshnessTopic}${err ? ` (${err.message})` : ''}; freshness is not watched`);
      });
    }
  });
  client.on('close', () => {
    if (!up) return;
    up = false;
    options.onDisconnected();
  });
  client.on('error', (e) => log(`agent: broker: ${e.message}`));
  client.on('message', (topic, payload) => {
    const channel = topics.get(topic);
    if (channel) options.onMessage(channel, payload);
    else if (topic === options.freshnessTopic) options.onMessage('freshness', payload);
  });

  return {
    connected: () => up,
    publishState: function publishState(payload, willPayload) {
      // mqtt.js sends options.will on every reconnect: keep it describing the latest state.
      will.payload = Buffer.from(willPayload);
      if (up) client.publish(stateTopic, payload, { qos: 1, retain: true });
    },
    publishEvents: function publishEvents(payload) {
      if (up) client.publish(deviceTopic(options.deviceId, 'events'), payload, { qos: 1 });
    },
    close: async function close(finalState) {
      if (up && finalState) await client.publishAsync(stateTopic, finalState, { qos: 1, retain: true }).catch(() => {});
      await client.endAsync(!up);
    },
  };
}
