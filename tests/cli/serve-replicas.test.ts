import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { run as serve } from '../../src/cli/serve.js';

const work = mkdtempSync(join(tmpdir(), 'ocellus-serve-replicas-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

describe('ocellus serve --replicas: bad combinations are refused before anything is written', () => {
  it('with the embedded broker: exit 2, saying why (MQTT 3.1.1, no shared subscriptions) and which flag to add', async () => {
    const io = captureIo(work, {});
    const code = await serve(['--replicas', '--port', '0', '--mqtt-port', '0', '--data', 'replica-data'], io);
    expect(code).toBe(2);
    expect(io.err()).toContain('replicas need an external MQTT 5 broker with shared subscriptions');
    expect(io.err()).toContain('the embedded broker speaks MQTT 3.1.1 only');
    expect(io.err()).toContain('--broker mqtt://HOST:PORT');
    expect(existsSync(join(work, 'replica-data'))).toBe(false);
  });

  it('a replica flag without --replicas names the missing flag', async () => {
    const io = captureIo(work, {});
    expect(await serve(['--replica-group', 'servers', '--port', '0', '--data', 'replica-data'], io)).toBe(2);
    expect(io.err()).toContain('--replica-group needs --replicas');
  });

  it('a group name with a topic wildcard is refused with the rule', async () => {
    const io = captureIo(work, {});
    expect(await serve(['--replicas', '--broker', 'mqtt://127.0.0.1:1', '--replica-group', 'a/#', '--port', '0', '--data', 'replica-data'], io)).toBe(2);
    expect(io.err()).toContain("--replica-group 'a/#'");
    expect(existsSync(join(work, 'replica-data'))).toBe(false);
  });
});
