import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { createServer, type Server } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { run as serve } from '../../src/cli/serve.js';

let holder: Server;
let busyPort: number;
const work = mkdtempSync(join(tmpdir(), 'ocellus-serve-port-'));

beforeAll(async () => {
  // Another program holds a port, as the demo holds 8080 and 1884.
  holder = createServer();
  await new Promise<void>((resolve) => holder.listen(0, '127.0.0.1', resolve));
  busyPort = (holder.address() as { port: number }).port;
});

afterAll(async () => {
  await new Promise<void>((resolve) => holder.close(() => resolve()));
  rmSync(work, { recursive: true, force: true });
});

describe('ocellus serve on a port that is taken', () => {
  it('HTTP port taken: exit 2, the flag to change it named, and no data folder or admin token written', async () => {
    const io = captureIo(work, { OCELLUS_ADMIN_TOKEN: 'a-long-enough-admin-secret-for-tests' });
    const code = await serve(['--port', String(busyPort), '--mqtt-port', '0', '--data', 'fresh-data'], io);
    expect(code).toBe(2);
    expect(io.err()).toContain(`cannot listen for HTTP on 127.0.0.1:${busyPort}: in use`);
    expect(io.err()).toContain('choose another port with --port N');
    expect(io.err()).not.toMatch(/\n\s+at /); // no stack trace
    expect(io.out()).toBe('');
    expect(existsSync(join(work, 'fresh-data'))).toBe(false);
  });

  it('MQTT port taken: exit 2 naming --mqtt-port, nothing written', async () => {
    const io = captureIo(work, {});
    const code = await serve(['--port', '0', '--mqtt-port', String(busyPort), '--data', 'fresh-data-2'], io);
    expect(code).toBe(2);
    expect(io.err()).toContain(`cannot listen for MQTT (the embedded broker) on 127.0.0.1:${busyPort}`);
    expect(io.err()).toContain('--mqtt-port N');
    expect(existsSync(join(work, 'fresh-data-2'))).toBe(false);
  });
});
