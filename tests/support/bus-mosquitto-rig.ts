/** A private Mosquitto process on a free loopback port, for tests that must restart a broker or configure its ACL. */
import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { writeFileSync } from 'node:fs';
import { createServer } from 'node:net';
import { join } from 'node:path';
import { mosquittoAcl, mosquittoListenerConfig } from '../../src/bus/mosquitto-config.js';
import { portOpen, waitFor } from './agent-fixtures.js';

export const mosquittoBinary = spawnSync('mosquitto', ['-h']).error === undefined ? 'mosquitto' : null;
export const MOSQUITTO_BINARY_SKIP_NOTE = 'skipped: the mosquitto program is not installed, so no private broker can be started';

async function freePort(): Promise<number> {
  const server = createServer();
  await new Promise<void>((r) => server.listen(0, '127.0.0.1', r));
  const port = (server.address() as { port: number }).port;
  await new Promise<void>((r) => server.close(() => r()));
  return port;
}

export interface PrivateMosquitto {
  url: string;
  port: number;
  start(): Promise<void>;
  stop(): Promise<void>;
}

/**
 * Starts `mosquitto -c <dir>/mosquitto.conf`. Without `users` it allows anonymous clients; with
 * them it uses a password file (made by mosquitto_passwd) and the ACL of src/bus/mosquitto-config.ts.
 */
export async function startPrivateMosquitto(dir: string, users?: { server: string; passwords: Record<string, string> }): Promise<PrivateMosquitto> {
  const port = await freePort();
  const confPath = join(dir, 'mosquitto.conf');
  // Running as root, Mosquitto would switch to its own user and lose access to these files.
  const common = ['user root', 'persistence false', 'log_dest none', ''];
  if (users) {
    const passwordFile = join(dir, 'passwd');
    writeFileSync(passwordFile, '');
    for (const [user, password] of Object.entries(users.passwords)) {
      const r = spawnSync('mosquitto_passwd', ['-b', passwordFile, user, password]);
      if (r.status !== 0) throw new Error(`mosquitto_passwd failed: ${r.stderr.toString()}`);
    }
    const aclFile = join(dir, 'acl');
    writeFileSync(aclFile, mosquittoAcl(users.server));
    writeFileSync(confPath, [...common, mosquittoListenerConfig({ port, passwordFile, aclFile })].join('\n'));
  } else {
    writeFileSync(confPath, [...common, `listener ${port} 127.0.0.1`, 'allow_anonymous true', ''].join('\n'));
  }
  let child: ChildProcess | null = null;
  const broker: PrivateMosquitto = {
    url: `mqtt://127.0.0.1:${port}`,
    port,
    start: async () => {
      child = spawn('mosquitto', ['-c', confPath], { stdio: 'ignore' });
      await waitFor(() => portOpen(port), `private Mosquitto listening on ${port}`, 10_000, 50);
    },
    stop: async () => {
      const c = child;
      child = null;
      if (!c || c.exitCode !== null) return;
      const exited = new Promise((r) => c.once('exit', r));
      c.kill('SIGTERM');
      await exited;
    },
  };
  await broker.start();
  return broker;
}
