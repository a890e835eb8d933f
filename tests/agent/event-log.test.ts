import { cpSync, readFileSync, statSync } from 'node:fs';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { systemClock } from '../../device-agent/clock.js';
import { openEventLog } from '../../device-agent/event-log.js';
import { systemDisk, type RewriteDisk } from '../../device-agent/log-rewrite.js';
import { tempDir } from '../support/agent-fixtures.js';

const dirs: Array<{ path: string; remove(): void }> = [];
afterAll(() => dirs.forEach((d) => d.remove()));
function dir(label: string) {
  const d = tempDir(label);
  dirs.push(d);
  return d.path;
}

const seqsIn = (path: string) => readFileSync(join(path, 'events.log'), 'utf8').split('\n').filter(Boolean).map((l) => (JSON.parse(l) as { seq: number }).seq);
const markIn = (path: string) => (JSON.parse(readFileSync(join(path, 'events-acked.json'), 'utf8')) as { ackedUpTo: number }).ackedUpTo;
const range = (from: number, to: number) => Array.from({ length: to - from + 1 }, (_v, i) => from + i);

/** A disk whose fsync waits until the test lets it go, as a slow card would. */
function heldDisk(onSync?: () => void) {
  let release!: () => void;
  let held = new Promise<void>((r) => (release = r));
  let syncs = 0;
  const disk: RewriteDisk = {
    sync: async (handle) => {
      syncs += 1;
      onSync?.();
      await held;
      await systemDisk.sync(handle);
    },
  };
  return {
    disk,
    syncs: () => syncs,
    release: () => release(),
    hold: () => void (held = new Promise<void>((r) => (release = r))),
  };
}

describe('event log compaction', () => {
  it('draining a 20,000-event backlog 500 at a time rewrites fewer lines than were appended (amortised: each rewrite is paid for by as many acknowledged lines, common practice)', async () => {
    const path = dir('evlog-amortised');
    const log = openEventLog(path, systemClock);
    for (let i = 0; i < 20_000; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
    let inode = statSync(join(path, 'events.log')).ino;
    let rewrittenLines = 0;
    let compactions = 0;
    for (let upTo = 500; upTo <= 20_000; upTo += 500) {
      log.ack(upTo);
      await log.settled();
      const now = statSync(join(path, 'events.log')).ino;
      if (now !== inode) {
        inode = now;
        compactions += 1;
        rewrittenLines += seqsIn(path).length;
      }
    }
    // Rewriting the whole pending log every 500 acknowledged lines would rewrite about 390,000 lines here.
    expect(rewrittenLines).toBeLessThanOrEqual(20_000);
    expect(compactions).toBeGreaterThan(0);
    expect(seqsIn(path)).toEqual([]);
    expect(markIn(path)).toBe(20_000);
    log.close();
  });

  it('appends and acks (a task switch\'s events) go on while a compaction waits for the disk, and the new file keeps every one of them', async () => {
    const path = dir('evlog-held');
    const held = heldDisk();
    const log = openEventLog(path, systemClock, { disk: held.disk });
    for (let i = 0; i < 1200; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
    log.ack(700); // 700 acknowledged lines against 500 pending: compaction starts, then waits on its fsync
    for (let i = 0; i < 10_000 && held.syncs() === 0; i++) await new Promise((r) => setImmediate(r));
    expect(held.syncs()).toBe(1);
    // The log answers at once while the disk is held.
    expect(log.append({ type: 'motion', moving: true })).toBe(1201);
    expect(log.append({ type: 'motion', moving: false })).toBe(1202);
    log.ack(710);
    expect(log.unackedCount()).toBe(492);
    // Nothing has been replaced yet: the old file still holds the acknowledged lines.
    expect(seqsIn(path)).toEqual(range(1, 1202));
    held.release();
    await log.settled();
    // The events appended meanwhile are in the new file; 701..710 are acknowledged but were pending when it began.
    expect(seqsIn(path)).toEqual(range(701, 1202));
    expect(markIn(path)).toBe(700);
    expect(log.append({ type: 'motion', moving: true })).toBe(1203);
    log.close();
    const again = openEventLog(path, systemClock);
    expect(again.ackedUpTo()).toBe(710);
    expect(again.after(0, 10_000, 1e9).map((e) => e.seq)).toEqual(range(711, 1203));
    again.close();
  });

  it('a crash at any disk step of a compaction leaves every unacknowledged event, none acknowledged before the mark, and numbering that goes on', async () => {
    const path = dir('evlog-crash');
    const copies: string[] = [];
    // At each fsync, copy the folder as it is: what a power cut at that moment would leave (at best).
    const held = heldDisk(() => {
      const copy = dir(`evlog-crash-at-${copies.length}`);
      cpSync(path, copy, { recursive: true });
      copies.push(copy);
    });
    const log = openEventLog(path, systemClock, { disk: held.disk });
    for (let i = 0; i < 1500; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
    log.ack(900);
    for (let step = 0; step < 10 && held.syncs() > 0; step++) {
      log.append({ type: 'motion', moving: true });
      held.release();
      await new Promise((r) => setImmediate(r));
      held.hold();
    }
    held.release();
    await log.settled();
    log.close();
    expect(copies.length).toBeGreaterThanOrEqual(3); // the mark, its folder, the log, its folder
    for (const copy of copies) {
      const reopened = openEventLog(copy, systemClock);
      const pending = reopened.after(0, 10_000, 1e9).map((e) => e.seq);
      expect(reopened.ackedUpTo()).toBeLessThanOrEqual(900);
      // Everything above the mark is still there, in order, with no gap.
      expect(pending).toEqual(range(reopened.ackedUpTo() + 1, reopened.lastSeq()));
      const last = reopened.lastSeq();
      expect(last).toBeGreaterThanOrEqual(1500);
      expect(reopened.append({ type: 'motion', moving: false })).toBe(last + 1);
      reopened.close();
    }
  });

  it('closing during a compaction writes the final state itself, and the interrupted one never overwrites it', async () => {
    const path = dir('evlog-close');
    const held = heldDisk();
    const log = openEventLog(path, systemClock, { disk: held.disk });
    for (let i = 0; i < 1200; i++) log.append({ type: 'motion', moving: i % 2 === 0 });
    log.ack(700);
    log.ack(1200);
    log.close();
    held.release();
    await log.settled();
    expect(markIn(path)).toBe(1200);
    expect(seqsIn(path)).toEqual([]);
    const again = openEventLog(path, systemClock);
    expect(again.append({ type: 'motion', moving: true })).toBe(1201);
    again.close();
  });
});
