// A private Mosquitto for a bench part (MQTT 5, shared subscriptions): its own config in a temporary folder,
// on a free loopback port, anonymous, no persistence; stopped after the measurement.
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { connect, createServer } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export const mosquittoInstalled = spawnSync('mosquitto', ['-h']).error === undefined;

function freePort(): Promise<number> {
  return new Promise((resolve, reject) => {
    const s = createServer();
    s.once('error', reject);
    s.listen(0, '127.0.0.1', () => {
      const port = (s.address() as { port: number }).port;
      s.close(() => resolve(port));
    });
  });
}

function answers(port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = connect({ host: '127.0.0.1', port });
    const done = (up: boolean) => (socket.destroy(), resolve(up));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

export async function startBenchMosquitto(): Promise<{ url: string; stop(): Promise<void> }> {
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-bench-mosquitto-'));
  const port = await freePort();
  const conf = join(dir, 'mosquitto.conf');
  // Running as root, Mosquitto would switch to its own user and lose access to the file; no cap on queued messages
  // a slow subscriber may hold beyond Mosquitto's default (1,000), as on a stock install.
  writeFileSync(conf, ['user root', 'persistence false', 'log_dest none', `listener ${port} 127.0.0.1`, 'allow_anonymous true', ''].join('\n'));
  const child = spawn('mosquitto', ['-c', conf], { stdio: 'ignore' });
  const deadline = Date.now() + 10_000;
  while (!(await answers(port))) {
    if (Date.now() > deadline || child.exitCode !== null) throw new Error(`private Mosquitto did not listen on ${port}`);
    await new Promise((r) => setTimeout(r, 50));
  }
  return {
    url: `mqtt://127.0.0.1:${port}`,
    stop: async () => {
      if (child.exitCode === null) {
        const exited = new Promise((r) => child.once('exit', r));
        child.kill('SIGTERM');
        await exited;
      }
      rmSync(dir, { recursive: true, force: true });
    },
  };
}
