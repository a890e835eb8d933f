import { createHash } from 'node:crypto';
import { mkdirSync, readdirSync, utimesSync, writeFileSync } from 'node:fs';
import { createServer } from 'node:http';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import { createBlobStore, TMP_SWEEP_AGE_MS } from '../../src/store/index.js';
import { tempDir } from '../support/agent-fixtures.js';

// Several replicas may share one data folder: a store that opens removes only temporary upload files old
// enough that no live upload can own them, judged by their modification time against an injected clock.
const NOW_MS = Date.parse('2026-03-02T07:00:00.000Z');

function partFile(tmp: string, name: string, ageMs: number): void {
  const path = join(tmp, name);
  writeFileSync(path, 'demo data: part of an upload');
  const at = (NOW_MS - ageMs) / 1000;
  utimesSync(path, at, at);
}

describe('sweep of blobs/tmp when a blob store opens', () => {
  it('removes files last written an hour ago or more and keeps younger ones', () => {
    const dir = tempDir('blob-sweep');
    try {
      const tmp = join(dir.path, 'blobs', 'tmp');
      mkdirSync(tmp, { recursive: true });
      partFile(tmp, 'crashed-yesterday.part', 86_400_000);
      partFile(tmp, 'exactly-an-hour.part', TMP_SWEEP_AGE_MS);
      partFile(tmp, 'just-under-an-hour.part', TMP_SWEEP_AGE_MS - 1000);
      partFile(tmp, 'in-progress.part', 5_000);
      createBlobStore(dir.path, { nowMs: () => NOW_MS });
      expect(readdirSync(tmp).sort()).toEqual(['in-progress.part', 'just-under-an-hour.part']);
      // The age is a setting: told 10 s, a store keeps only the 5-second-old file; told 5 s, it removes that too.
      createBlobStore(dir.path, { nowMs: () => NOW_MS, tmpSweepAgeMs: 10_000 });
      expect(readdirSync(tmp)).toEqual(['in-progress.part']);
      createBlobStore(dir.path, { nowMs: () => NOW_MS, tmpSweepAgeMs: 5_000 });
      expect(readdirSync(tmp)).toEqual([]);
    } finally {
      dir.remove();
    }
  });

  it("lets another store's upload in progress on the same folder finish", async () => {
    const dir = tempDir('blob-sweep-shared');
    try {
      const first = createBlobStore(dir.path);
      const bytes = Buffer.from('demo data: weights of a greenhouse leaf-spot detector');
      const sha = createHash('sha256').update(bytes).digest('hex');
      let release!: () => void;
      const gate = new Promise<void>((resolve) => (release = resolve));
      let firstHalfWritten!: () => void;
      const halfway = new Promise<void>((resolve) => (firstHalfWritten = resolve));
      async function* source() {
        yield bytes.subarray(0, 20);
        firstHalfWritten();
        await gate;
        yield bytes.subarray(20);
      }
      const upload = first.put(source(), { sha256: sha, maxBytes: 1000, sizeBytes: bytes.length });
      await halfway;
      expect(readdirSync(join(dir.path, 'blobs', 'tmp'))).toHaveLength(1);
      // A second replica starts on the shared folder while the upload is open (real clock).
      createBlobStore(dir.path);
      expect(readdirSync(join(dir.path, 'blobs', 'tmp'))).toHaveLength(1);
      release();
      expect(await upload).toEqual({ ok: true, sha256: sha, sizeBytes: bytes.length });
      expect(first.sizeOf(sha)).toBe(bytes.length);
    } finally {
      dir.remove();
    }
  });

  it("rests on Node's HTTP server ending any request, an upload included, well within the sweep age", () => {
    // Node's documented default server.requestTimeout is 300,000 ms (Node.js http documentation); the server does not change it.
    const server = createServer();
    expect(server.requestTimeout).toBeGreaterThan(0);
    expect(server.requestTimeout * 10).toBeLessThanOrEqual(TMP_SWEEP_AGE_MS);
  });
});
