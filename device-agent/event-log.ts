import { randomBytes } from 'node:crypto';
import { closeSync, existsSync, fdatasync, fstatSync, ftruncateSync, openSync, readFileSync, truncateSync, writeSync } from 'node:fs';
import { join } from 'node:path';
import type { EventBody } from '../src/protocol/messages.js';
import { readJsonIfExists, writeFileAtomicSync } from './atomic-file.js';
import type { AgentClock } from './clock.js';
import { removeLeftover, replaceSmallFile, rewriteLiveFile, systemDisk, type RewriteDisk } from './log-rewrite.js';

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
  /** The server stored every event up to `upTo`: forget them, and compact the file when it has grown enough. */
  ack(upTo: number): void;
  lastSeq(): number;
  ackedUpTo(): number;
  /** The log's epoch (made at random with the log, kept in `events-epoch.json`), or null for a log made before epochs. */
  epoch(): string | null;
  /** Why events are being kept in memory only (the disk refused a write), or null when every event is on disk. */
  fault(): string | null;
  unackedCount(): number;
  /** Resolves when no compaction is running (each one runs in the background, off the event loop's path). */
  settled(): Promise<void>;
  close(): void;
}

export interface EventLogOptions {
  /** The disk's fsync; a test hands in one it can hold. */
  disk?: RewriteDisk;
  log?: (line: string) => void;
  /** Replaces writeSync for appends (a test hands in one that fails like a full disk). */
  write?: (fd: number, text: string) => void;
  /** Called when fault() changes. */
  onFault?: () => void;
}

/** writeSync until every byte is written (one write(2) may write fewer). */
function writeAll(fd: number, text: string): void {
  const bytes = Buffer.from(text, 'utf8');
  for (let at = 0; at < bytes.length; ) at += writeSync(fd, bytes, at);
}

/**
 * The epoch of the log: read from its file, or made for a new log (no log file and no ack mark yet: a first
 * start or a wiped data folder), written before the log's first line. A log that exists without one was
 * made before epochs and stays in the legacy epoch (null), so its numbering goes on as the server knows it.
 * When the disk refuses the file, the epoch lives in memory: the log's own lines most likely failed too,
 * and the next start then makes a new log with a new epoch.
 */
function logEpoch(path: string, fresh: boolean, say: (line: string) => void): string | null {
  let stored: { epoch?: unknown } | null;
  try {
    stored = readJsonIfExists(path) as { epoch?: unknown } | null;
  } catch (e) {
    stored = {};
    say(`agent: could not read ${path} (${(e as Error).message})`);
  }
  if (typeof stored?.epoch === 'string' && /^[A-Za-z0-9_-]{8,64}$/.test(stored.epoch)) return stored.epoch;
  if (!fresh) {
    if (stored !== null) say(`agent: ${path} holds no valid epoch; the log stays in the legacy epoch`);
    return null;
  }
  // 128 random bits: two logs of one device never share an epoch (common practice for random ids).
  const epoch = randomBytes(16).toString('hex');
  try {
    writeFileAtomicSync(path, JSON.stringify({ epoch }));
  } catch (e) {
    say(`agent: could not write ${path} (${(e as Error).message}); the event log's epoch is kept in memory`);
  }
  return epoch;
}

/**
 * Compact once the acknowledged lines in the file are at least as many as the pending ones (and at
 * least this many): each compaction then rewrites no more lines than were acknowledged since the
 * last, so rewriting costs O(1) per event however long the backlog (amortised analysis, as for a
 * doubling array; common practice).
 */
const COMPACT_MIN_ACKED_LINES = 500;
/** When everything is acknowledged, this few acknowledged lines are enough (the rewrite is tiny). */
const COMPACT_WHEN_DRAINED_LINES = 50;

/**
 * The agent's outbox on disk: `events.log` holds one JSON event per line, appended as they happen;
 * `events-acked.json` holds the highest seq the server acknowledged. Events stay on disk until an
 * ack covers them, so they survive restarts and lost connections. Compaction writes the ack mark
 * first, then replaces the log with the unacknowledged events, each atomically and in the
 * background while appends go on, so a crash at any point leaves nothing lost and nothing
 * resurrected, and a task switch never waits for the disk.
 */
export function openEventLog(dir: string, clock: AgentClock, options: EventLogOptions = {}): EventLog {
  const disk = options.disk ?? systemDisk;
  const say = options.log ?? (() => {});
  const write = options.write ?? writeAll;
  const logPath = join(dir, 'events.log');
  const ackPath = join(dir, 'events-acked.json');
  const epochPath = join(dir, 'events-epoch.json');
  removeLeftover(logPath);
  removeLeftover(ackPath);
  removeLeftover(epochPath);
  const epoch = logEpoch(epochPath, !existsSync(logPath) && !existsSync(ackPath), say);
  const mark = readJsonIfExists(ackPath) as { ackedUpTo?: unknown } | null;
  let acked = typeof mark?.ackedUpTo === 'number' && Number.isInteger(mark.ackedUpTo) ? mark.ackedUpTo : 0;
  // pending[head..] are the unacknowledged events, oldest first; the acknowledged front is cut off now and then.
  let pending: LoggedEvent[] = [];
  let head = 0;
  let last = acked;
  let fileLines = 0;
  if (existsSync(logPath)) {
    let text = readFileSync(logPath, 'utf8');
    // A last line without its newline is torn by a crash mid-write: cut it off in place (needs no free space),
    // so the next append starts on a line of its own.
    if (text.length > 0 && !text.endsWith('\n')) {
      const keep = text.lastIndexOf('\n') + 1;
      truncateSync(logPath, Buffer.byteLength(text.slice(0, keep), 'utf8'));
      say(`agent: cut a torn last line (${text.length - keep} characters) off ${logPath}`);
      text = text.slice(0, keep);
    }
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
  const linesOf = (from: number) => pending.slice(from).map((e) => `${e.json}\n`).join('');
  let linesInFile = pending.length;
  let faulted: string | null = null;
  /** Lines the disk refused, oldest first: in memory (and in `pending`) until a write or a compaction lands them. */
  let unwritten: string[] = [];
  function setFault(value: string | null) {
    if (value === faulted) return;
    faulted = value;
    options.onFault?.();
  }
  // Start from a file without acknowledged lines before appending more; rewrite only when needed. On a full
  // disk the file keeps them (a restart resends some events the server already has; it ignores them).
  if (pending.length !== fileLines) {
    try {
      writeFileAtomicSync(logPath, linesOf(0));
    } catch (e) {
      say(`agent: could not compact ${logPath} at start (${(e as Error).message}); keeping its acknowledged lines`);
    }
  }
  let fd = openSync(logPath, 'a');
  /** Bytes in the file, so a write the disk cut short can be cut off again. */
  let fileBytes = fstatSync(fd).size;
  let syncQueued = false;
  let compaction: Promise<void> | null = null;
  /** Lines appended while a background rewrite runs, for it to copy before its rename. */
  let appendedDuringRewrite: string[] | null = null;
  let closed = false;

  /** Writes text at the end of the file, or leaves the file as it was (a partial write cut off) and throws. */
  function appendOrUndo(text: string) {
    try {
      write(fd, text);
      fileBytes += Buffer.byteLength(text, 'utf8');
    } catch (e) {
      try {
        ftruncateSync(fd, fileBytes);
      } catch {
        // the next start cuts a torn tail off anyway
      }
      throw e;
    }
  }

  /** Tries once more to write the lines the disk refused, in order; they stay in memory if it still refuses. */
  function flushUnwritten() {
    const text = unwritten.join('');
    try {
      appendOrUndo(text);
    } catch {
      return;
    }
    unwritten = [];
    say('agent: the disk takes events again; the event log is complete');
    setFault(null);
  }

  function queueDataSync() {
    // The write already survives a crash of this process; the data sync (for power loss) runs off the hot path.
    if (syncQueued) return;
    syncQueued = true;
    const syncFd = fd;
    setImmediate(() => fdatasync(syncFd, () => (syncQueued = false)));
  }

  function dropAcknowledged() {
    while (head < pending.length && pending[head]!.seq <= acked) head += 1;
    // Cut the front off once it is the larger part, so the array stays proportional to what is pending.
    if (head > 1024 && head * 2 > pending.length) {
      pending = pending.slice(head);
      head = 0;
    }
  }

  /** First index at or after `head` whose seq is above `seq` (seqs ascend, so a binary search). */
  function indexAfter(seq: number): number {
    let lo = head;
    let hi = pending.length;
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      if (pending[mid]!.seq <= seq) lo = mid + 1;
      else hi = mid;
    }
    return lo;
  }

  function compactSync() {
    writeFileAtomicSync(ackPath, JSON.stringify({ ackedUpTo: acked }));
    closeSync(fd);
    writeFileAtomicSync(logPath, linesOf(head));
    fd = openSync(logPath, 'a');
    fileBytes = fstatSync(fd).size;
    unwritten = [];
    linesInFile = pending.length - head;
  }

  async function compactInBackground() {
    // Snapshot in one tick: the mark, and every line above it (acknowledged or not) for the new file.
    const markedUpTo = acked;
    const from = indexAfter(markedUpTo);
    const headText = linesOf(from);
    let lines = pending.length - from;
    appendedDuringRewrite = [];
    try {
      // The mark goes first: the log may only lose lines the mark already covers.
      if (!(await replaceSmallFile(ackPath, JSON.stringify({ ackedUpTo: markedUpTo }), () => closed, disk))) return;
      await rewriteLiveFile({
        path: logPath,
        head: headText,
        disk,
        cancelled: () => closed,
        tail: function appendedMeanwhile() {
          const more = appendedDuringRewrite!;
          appendedDuringRewrite = [];
          lines += more.length;
          return more.join('');
        },
        swapped: function useRewrittenFile() {
          closeSync(fd);
          fd = openSync(logPath, 'a');
          fileBytes = fstatSync(fd).size;
          linesInFile = lines;
          appendedDuringRewrite = null;
          // The rewrite copied every pending line from memory, those the disk had refused included.
          if (unwritten.length > 0) (unwritten = []), setFault(null);
        },
      });
    } finally {
      appendedDuringRewrite = null;
    }
  }

  function maybeCompact() {
    if (compaction || closed) return;
    const unacked = pending.length - head;
    const ackedLines = linesInFile - unacked;
    const due = unacked === 0 ? ackedLines >= COMPACT_WHEN_DRAINED_LINES : ackedLines >= Math.max(unacked, COMPACT_MIN_ACKED_LINES);
    if (!due) return;
    compaction = compactInBackground()
      .catch((e: unknown) => say(`agent: event log compaction failed (${(e as Error).message}); the log keeps its acknowledged lines until the next try`))
      .finally(() => {
        compaction = null;
        // Acks that came in meanwhile may already call for the next one.
        maybeCompact();
      });
  }

  return {
    append: function append(body) {
      const seq = last + 1;
      const json = JSON.stringify({ seq, ts: new Date(clock.now()).toISOString(), ...body });
      const line = `${json}\n`;
      // Behind lines the disk refused, this one waits too: the file never has a gap in its order.
      if (unwritten.length > 0) unwritten.push(line);
      else {
        try {
          appendOrUndo(line);
        } catch (e) {
          unwritten.push(line);
          say(`agent: event log write failed (${(e as Error).message}); keeping events in memory until the disk takes them`);
          setFault(`event log: ${(e as Error).message}`);
        }
      }
      if (unwritten.length > 1) flushUnwritten();
      appendedDuringRewrite?.push(line);
      last = seq;
      pending.push({ seq, json });
      linesInFile += 1;
      queueDataSync();
      return seq;
    },
    after: function after(afterSeq, maxCount, maxBytes) {
      const out: LoggedEvent[] = [];
      let bytes = 0;
      for (let i = indexAfter(afterSeq); i < pending.length; i++) {
        const e = pending[i]!;
        if (out.length >= maxCount || (out.length > 0 && bytes + e.json.length > maxBytes)) break;
        out.push(e);
        bytes += e.json.length + 1;
      }
      return out;
    },
    ack: function ack(upTo) {
      if (upTo <= acked) return;
      acked = Math.min(upTo, last);
      dropAcknowledged();
      // Until compaction, a restart resends some acknowledged events; the server ignores them (same device and seq).
      maybeCompact();
    },
    lastSeq: () => last,
    ackedUpTo: () => acked,
    epoch: () => epoch,
    fault: () => faulted,
    unackedCount: () => pending.length - head,
    settled: async function settled() {
      while (compaction) await compaction;
    },
    close: function close() {
      if (closed) return;
      // A background compaction stops before its rename; this one, synchronous, supersedes it.
      closed = true;
      try {
        if (unwritten.length > 0 || linesInFile > pending.length - head) compactSync();
      } catch (e) {
        say(`agent: could not write the event log on close (${(e as Error).message}); ${unwritten.length} events were only in memory`);
      }
      try {
        closeSync(fd);
      } catch {
        // a failed compaction closed it already
      }
    },
  };
}
