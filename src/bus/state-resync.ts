import type { MqttClient } from 'mqtt';
import { allDevicesFilter } from '../protocol/topics.js';

/**
 * Reads every device's retained state from the broker once more, for a replica whose shared subscription gets
 * no retained messages (MQTT 5.0 §4.8.2). A state message the broker had handed to a replica that then died is
 * gone with it (Mosquitto 2 hands a dead member's unacknowledged messages to no other member), but the broker
 * still holds the device's latest state as its retained message: a plain subscription to the state filter
 * delivers it, the bridge on the same client stores it, and the subscription is dropped again. The broker
 * sends the retained messages while it handles the SUBSCRIBE, before the UNSUBSCRIBE that follows.
 */
export function resyncRetainedStates(client: MqttClient, log: (line: string) => void): Promise<void> {
  const filter = allDevicesFilter('state');
  return new Promise((resolve) => {
    client.subscribe(filter, { qos: 1 }, (err) => {
      if (err) {
        log(`bus: reading the retained device states failed: ${err.message}`);
        return resolve();
      }
      client.unsubscribe(filter, (e) => {
        if (e) log(`bus: dropping the retained-state subscription failed: ${e.message}`);
        resolve();
      });
    });
  });
}
