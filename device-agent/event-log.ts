import { closeSync, existsSync, fdatasync, openSync, readFileSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import type { EventBody } from '../src/protocol/messages.js';
import { readJsonIfExists, writeFileAtomicSync } from './atomic-file.js';
import type { AgentClock } from './clock.js';

/** An event not yet covered by the server's ack: its number and its JSON text as written to disk. */
export interface LoggedEvent {
  seq: number;
  json: string;
}

export interface EventLog {
  /** Numbers an event, appends it to the log file and returns its seq. */
  append(body: EventBody): number;
  /** Unacknowledged events after `afterSeq`, oldest first, at most `maxCount` of them and about `maxBytes` of JSON. */
  after(afterSeq: number, maxCount: number, maxBytes: number): LoggedEvent[];
  /** The server stored every event up to `upTo`: forget them, and compact the file now and then. */
  ack(upTo: number): void;
  lastSeq(): number;
  ackedUpTo(): number;
  unackedCount(): number;
  close(): void;
}

/** Compact once this many acknowledged lines sit in the file, or this few when everything is acknowledged. */
const COMPACT_AFTER_LINES = 500;
const COMPACT_WHEN_DRAINED_LINES = 50;

/**
 * The agent's outbox on disk: `events.log` holds one JSON event per line, appended as they happen;
 * `events-acked.json` holds the highest seq the server acknowledged. Events stay on disk until an
 * ack covers them, so they survive restarts and lost connections. Compaction rewrites the log with
 * only the unacknowledged events (write the ack mark first, then the log, each atomically), so a
 * crash at any point leaves nothing lost and nothing resurrected.
 */
export function openEventLog(dir: string, clock: AgentClock): EventLog {
  const logPath = join(dir, 'events.log');
  const ackPath = join(dir, 'events-acked.json');
  const mark = readJsonIfExists(ackPath) as { ackedUpTo?: unknown } | null;
  let acked = typeof mark?.ackedUpTo === 'number' && Number.isInteger(mark.ackedUpTo) ? mark.ackedUpTo : 0;
  let pending: LoggedEvent[] = [];
  let last = acked;
  let fileLines = 0;
  if (existsSync(logPath)) {
    const text = readFileSync(logPath, 'utf8');
    // A last line without its newline is torn: count it so the file is rewritten without it.
    if (text.length > 0 && !text.endsWith('\n')) fileLines += 1;
    for (const line of text.split('\n')) {
      if (!line) continue;
      fileLines += 1;
      let seq: unknown;
      try {
        seq = (JSON.parse(line) as { seq?: unknown }).seq;
      } catch {
        continue; // a line torn by a crash mid-write
      }
      if (typeof seq !== 'number' || seq <= last) continue;
      pending.push({ seq, json: line });
      last = seq;
    }
  }
  let linesInFile = pending.length;
  // Start from a clean file (no acknowledged lines, no torn tail) before appending more; rewrite only when needed.
  if (pending.length !== fileLines) writeFileAtomicSync(logPath, pending.map((e) => `${e.json}\n`).join(''));
  let fd = openSync(logPath, 'a');
  let syncQueued = false;

  function compact() {
    writeFileAtomicSync(ackPath, JSON.stringify({ ackedUpTo: acked }));
    closeSync(fd);
    writeFileAtomicSync(logPath, pending.map((e) => `${e.json}\n`).join(''));
    fd = openSync(logPath, 'a');
    linesInFile = pending.length;
  }

  return {
    append: function append(body) {
      const seq = last + 1;
      const json = JSON.stringify({ seq, ts: new Date(clock.now()).toISOString(), ...body });
      writeSync(fd, `${json}\n`);
      last = seq;
      pending.push({ seq, json });
      linesInFile += 1;
      // The write already survives a crash of this process; the data sync (for power loss) runs off the hot path.
      if (!syncQueued) {
        syncQueued = true;
        const syncFd = fd;
        setImmediate(() => fdatasync(syncFd, () => (syncQueued = false)));
      }
      return seq;
    },
    after: function after(afterSeq, maxCount, maxBytes) {
      const out: LoggedEvent[] = [];
      let bytes = 0;
      for (const e of pending) {
        if (e.seq <= afterSeq) continue;
        if (out.length >= maxCount || (out.length > 0 && bytes + e.json.length > maxBytes)) break;
        out.push(e);
        bytes += e.json.length + 1;
      }
      return out;
    },
    ack: function ack(upTo) {
      if (upTo <= acked) return;
      acked = Math.min(upTo, last);
      let drop = 0;
      while (drop < pending.length && pending[drop]!.seq <= acked) drop += 1;
      pending = pending.slice(drop);
      // Until compaction, a restart resends some acknowledged events; the server ignores them (same device and seq).
      const ackedLines = linesInFile - pending.length;
      if (ackedLines >= COMPACT_AFTER_LINES || (pending.length === 0 && ackedLines >= COMPACT_WHEN_DRAINED_LINES)) compact();
    },
    lastSeq: () => last,
    ackedUpTo: () => acked,
    unackedCount: () => pending.length,
    close: function close() {
      if (linesInFile > pending.length) compact();
      closeSync(fd);
    },
  };
}
