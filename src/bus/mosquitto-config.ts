import { DEVICE_PUBLISH_CHANNELS, DEVICE_SUBSCRIBE_CHANNELS } from './access.js';
import { TOPIC_ROOT } from '../protocol/topics.js';

/**
 * The Mosquitto ACL file that gives an external broker the same isolation as the embedded one:
 * the server's account reads and writes every device topic; each device (user name = device id,
 * substituted for %u) writes only its own state and events and reads only its own release, cmd
 * and ack. Mosquitto checks a client's last will against its write rules too.
 */
export function mosquittoAcl(serverUsername: string): string {
  return [
    '# Ocellus: the server account may publish and subscribe anywhere under the device tree.',
    `user ${serverUsername}`,
    `topic readwrite ${TOPIC_ROOT}/#`,
    '',
    '# Every device, logged in with its device id as user name, only within its own subtree.',
    ...DEVICE_PUBLISH_CHANNELS.map((c) => `pattern write ${TOPIC_ROOT}/%u/${c}`),
    ...DEVICE_SUBSCRIBE_CHANNELS.map((c) => `pattern read ${TOPIC_ROOT}/%u/${c}`),
    '',
  ].join('\n');
}

/** A listener section for mosquitto.conf that uses the ACL above and a password file. */
export function mosquittoListenerConfig(options: { port: number; host?: string; passwordFile: string; aclFile: string }): string {
  return [
    `listener ${options.port} ${options.host ?? '127.0.0.1'}`,
    'allow_anonymous false',
    `password_file ${options.passwordFile}`,
    `acl_file ${options.aclFile}`,
    '',
  ].join('\n');
}
