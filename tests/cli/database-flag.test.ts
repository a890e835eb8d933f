import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { captureIo } from '../../src/cli/io.js';
import { run as serve } from '../../src/cli/serve.js';
import { run as token } from '../../src/cli/token.js';
import { openStore } from '../../src/store/index.js';
import { freshPostgresUrl, storeBackend } from '../support/store-backend.js';

const work = mkdtempSync(join(tmpdir(), 'ocellus-database-flag-'));
afterAll(() => rmSync(work, { recursive: true, force: true }));

describe('choosing the store with --database or OCELLUS_DATABASE_URL', () => {
  it('refuses a URL that is not postgres:// with exit 2, naming the flag, before anything is written', async () => {
    const io = captureIo(work, {});
    expect(await serve(['--port', '0', '--mqtt-port', '0', '--data', 'never', '--database', 'mysql://root@db/ocellus'], io)).toBe(2);
    expect(io.err()).toContain("--database (or OCELLUS_DATABASE_URL) must be a postgres:// or postgresql:// URL, got 'mysql://root@db/ocellus'");
    expect(existsSync(join(work, 'never'))).toBe(false);
  });

  it('reads OCELLUS_DATABASE_URL when the flag is absent', async () => {
    const io = captureIo(work, { OCELLUS_DATABASE_URL: 'sqlite:///tmp/x.db' });
    expect(await token(['create', '--role', 'admin', '--data', 'never-2'], io)).toBe(2);
    expect(io.err()).toContain("--database must be a postgres:// or postgresql:// URL, got 'sqlite:///tmp/x.db'");
  });

  it.runIf(storeBackend === 'postgres')('token create --database puts the token in that PostgreSQL database, keys in the data folder', async () => {
    const url = freshPostgresUrl();
    const io = captureIo(work, {});
    expect(await token(['create', '--role', 'operator', '--label', 'night shift', '--data', 'pg-data', '--database', url, '--json'], io)).toBe(0);
    const { secret } = JSON.parse(io.out()) as { secret: string };
    expect(existsSync(join(work, 'pg-data', 'ocellus.db'))).toBe(false);
    expect(existsSync(join(work, 'pg-data', 'device-secret-key'))).toBe(true);
    const store = openStore(join(work, 'pg-data'), { databaseUrl: url });
    try {
      expect(store.tokens.authenticate(secret)?.label).toBe('night shift');
      expect(store.audit.query({ action: 'token.create' })).toHaveLength(1);
    } finally {
      store.close();
    }
  });
});
