import { DEVICE_PUBLISH_CHANNELS, DEVICE_SUBSCRIBE_CHANNELS } from './access.js';
import { DEFAULT_PACKET_LIMITS } from './broker.js';
import { CLASS_TOPIC_ROOT, SERVER_CHANGES_TOPIC, TOPIC_ROOT } from '../protocol/topics.js';

/**
 * The Mosquitto ACL file that gives an external broker the same isolation as the embedded one:
 * the server's account reads and writes every device topic; each device (user name = device id,
 * substituted for %u) writes only its own state and events and reads only its own release, cmd
 * and ack, and reads the device classes' freshness statements. Mosquitto checks a client's last will against
 * its write rules too.
 */
export function mosquittoAcl(serverUsername: string): string {
  return [
    '# Ocellus: the server account may publish and subscribe anywhere under the device tree.',
    `user ${serverUsername}`,
    `topic readwrite ${TOPIC_ROOT}/#`,
    `topic readwrite ${CLASS_TOPIC_ROOT}/#`,
    '# Replicas of the server tell each other what changed here; devices have no rule for it, so they cannot read it.',
    `topic readwrite ${SERVER_CHANGES_TOPIC}`,
    '',
    '# Every device, logged in with its device id as user name, only within its own subtree.',
    ...DEVICE_PUBLISH_CHANNELS.map((c) => `pattern write ${TOPIC_ROOT}/%u/${c}`),
    ...DEVICE_SUBSCRIBE_CHANNELS.map((c) => `pattern read ${TOPIC_ROOT}/%u/${c}`),
    '# Every device reads the signed freshness statements of the device classes (published by the server only).',
    `pattern read ${CLASS_TOPIC_ROOT}/+/freshness`,
    '',
  ].join('\n');
}

/** Files for a TLS listener; with `caFile` every client must show a certificate signed by it. */
export interface MosquittoTlsFiles {
  certFile: string;
  keyFile: string;
  /** Per-device certificates: the certificate's CN becomes the user name (use_identity_as_username). */
  caFile?: string;
  crlFile?: string;
}

/**
 * The mosquitto.conf lines that give an external Mosquitto (2.x) the embedded broker's rules, as far as
 * Mosquitto has them: a packet size cap that applies to CONNECT too (max_packet_size), the client id forced to
 * the user name (use_username_as_clientid, so one device's credentials cannot take another's client id),
 * a password file and the ACL above, and optionally TLS with per-device certificates. One difference stays:
 * Mosquitto lets a second session with the same client id take over the first (MQTT 3.1.1 §3.1.4), where the
 * embedded broker keeps the live one.
 */
export function mosquittoListenerConfig(options: {
  port: number;
  host?: string;
  passwordFile: string;
  aclFile: string;
  maxPacketBytes?: number;
  tls?: MosquittoTlsFiles;
}): string {
  const tls = options.tls;
  return [
    `max_packet_size ${options.maxPacketBytes ?? DEFAULT_PACKET_LIMITS.maxPacketBytes}`,
    `listener ${options.port} ${options.host ?? '127.0.0.1'}`,
    'allow_anonymous false',
    'use_username_as_clientid true',
    `password_file ${options.passwordFile}`,
    `acl_file ${options.aclFile}`,
    ...(tls ? [`certfile ${tls.certFile}`, `keyfile ${tls.keyFile}`, 'tls_version tlsv1.2'] : []),
    ...(tls?.caFile ? [`cafile ${tls.caFile}`, 'require_certificate true', 'use_identity_as_username true'] : []),
    ...(tls?.crlFile ? [`crlfile ${tls.crlFile}`] : []),
    '',
  ].join('\n');
}
