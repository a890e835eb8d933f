import { join } from 'node:path';
import { readJsonIfExists, writeFileAtomic } from './atomic-file.js';

export interface PersistedRun {
  /** The signed release exactly as received (its signature is checked again on start). */
  signed: unknown;
  /** The task that was active, or null for the release's default task. */
  activeTask: string | null;
}

/** The highest release sequence this device applied, and the signature digest of that release. */
export interface SequenceFloor {
  version: number;
  digest: string;
  releaseId: string;
}

export interface AppliedMark extends SequenceFloor {
  /** The key that signed it (PEM); added to the trusted keys when new (a key rotation the device followed). */
  signerPem: string;
}

export interface ReleaseStore {
  load(): PersistedRun | null;
  floor(): SequenceFloor | null;
  /** Keys this device trusts, oldest first: the configured key, then every key it moved to through a rotation. */
  trustedKeys(): string[];
  /** Records a newly applied release, its sequence and its active task (atomically, before the call resolves). */
  saveRelease(signed: unknown, mark: AppliedMark, activeTask: string): Promise<void>;
  /**
   * Records the active task after a switch; written behind the switch, latest value wins. Resolves once the
   * write was tried (never rejects: a failed write is the store's fault() and is retried), so a caller can
   * answer "switched" only after the task would survive a power cut.
   */
  saveTask(releaseId: string, activeTask: string): Promise<void>;
  /** The last write that failed (a full disk, say), or null once everything asked for is on disk. */
  fault(): string | null;
  /** Resolves when every write asked for so far has been tried. */
  settle(): Promise<void>;
  close(): void;
}

export interface ReleaseStoreOptions {
  dir: string;
  /** The key configured on the device: the start of its trust. */
  rootKeyPem: string;
  log?: (line: string) => void;
  /** Pause before a failed write is tried again. */
  retryMs?: number;
  /** Called when fault() changes. */
  onFault?: () => void;
}

const isFloor = (v: unknown): v is SequenceFloor => {
  const f = v as Partial<SequenceFloor> | null;
  return !!f && Number.isInteger(f.version) && typeof f.digest === 'string' && typeof f.releaseId === 'string';
};

/**
 * What the device applied, on its disk, each file replaced atomically: `applied-release.json` (the
 * signed release as received), `active-task.json` ({releaseId, task}), `release-floor.json` (the
 * highest sequence applied, never lowered) and `trusted-keys.json` (keys reached by rotation).
 * The task file names its release, so a task saved for an older release is not taken for the new one.
 * A write that fails (ENOSPC) is kept and tried again until it lands; the files on disk stay whole.
 */
export function createReleaseStore(options: ReleaseStoreOptions): ReleaseStore {
  const { dir } = options;
  const log = options.log ?? (() => {});
  const releasePath = join(dir, 'applied-release.json');
  const taskPath = join(dir, 'active-task.json');
  const floorPath = join(dir, 'release-floor.json');
  const keysPath = join(dir, 'trusted-keys.json');
  let chain: Promise<void> = Promise.resolve();
  let latestTask: { releaseId: string; task: string } | null = null;
  let taskWrite: Promise<void> | null = null;
  let faulted: string | null = null;
  let retryTimer: NodeJS.Timeout | null = null;
  let closed = false;
  /** What still has to reach the disk after a failure: the newest of each file. */
  const owed = new Map<string, string>();

  const storedFloor = readJsonIfExists(floorPath);
  let floor: SequenceFloor | null = isFloor(storedFloor) ? storedFloor : null;
  const storedKeys = readJsonIfExists(keysPath);
  const keys = [options.rootKeyPem, ...(Array.isArray(storedKeys) ? storedKeys.filter((k): k is string => typeof k === 'string' && k !== options.rootKeyPem) : [])];

  function setFault(value: string | null) {
    if (value === faulted) return;
    faulted = value;
    options.onFault?.();
  }

  async function writeOwed(): Promise<void> {
    for (const [path, content] of [...owed]) {
      await writeFileAtomic(path, content);
      if (owed.get(path) === content) owed.delete(path);
    }
  }

  function scheduleRetry() {
    if (retryTimer || closed) return;
    retryTimer = setTimeout(() => {
      retryTimer = null;
      void enqueue(async () => {});
    }, options.retryMs ?? 5000);
    retryTimer.unref?.();
  }

  /** Queues files to write (in order); each write also retries whatever an earlier failure left owed. */
  function enqueue(fill: () => void | Promise<void>): Promise<void> {
    const next = chain.then(async () => {
      await fill();
      try {
        await writeOwed();
        setFault(null);
      } catch (e) {
        const message = `could not save run state: ${(e as Error).message}`;
        log(`agent: ${message}; keeping it in memory and trying again`);
        setFault(message);
        scheduleRetry();
        throw e;
      }
    });
    chain = next.catch(() => {});
    return next;
  }

  return {
    load: function load() {
      const signed = readJsonIfExists(releasePath);
      if (signed === null) return null;
      const task = readJsonIfExists(taskPath) as { releaseId?: unknown; task?: unknown } | null;
      const releaseId = (signed as { release?: { id?: unknown } }).release?.id;
      const activeTask = task && task.releaseId === releaseId && typeof task.task === 'string' ? task.task : null;
      return { signed, activeTask };
    },
    floor: () => floor,
    trustedKeys: () => [...keys],
    saveRelease: function saveRelease(signed, mark, activeTask) {
      latestTask = { releaseId: mark.releaseId, task: activeTask };
      if (!floor || mark.version >= floor.version) floor = { version: mark.version, digest: mark.digest, releaseId: mark.releaseId };
      if (!keys.includes(mark.signerPem)) keys.push(mark.signerPem);
      const floorNow = floor;
      // Keys and floor first: a release on disk is never above the floor; then the task, which names the new
      // release, so until the release file is replaced the old one starts on its default task.
      return enqueue(() => {
        owed.set(keysPath, JSON.stringify(keys.slice(1)));
        owed.set(floorPath, JSON.stringify(floorNow));
        owed.set(taskPath, JSON.stringify(latestTask));
        owed.set(releasePath, JSON.stringify(signed));
      });
    },
    saveTask: function saveTask(releaseId, activeTask) {
      latestTask = { releaseId, task: activeTask };
      // A write already queued has not filled in its task yet: it will write this latest one.
      if (taskWrite) return taskWrite;
      const write = enqueue(() => {
        taskWrite = null;
        owed.set(taskPath, JSON.stringify(latestTask));
      }).catch(() => {});
      taskWrite = write;
      return write;
    },
    fault: () => faulted,
    settle: function settle() {
      return chain;
    },
    close: function close() {
      closed = true;
      if (retryTimer) clearTimeout(retryTimer);
    },
  };
}
