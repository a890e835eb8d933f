import { join } from 'node:path';
import { readJsonIfExists, writeFileAtomic } from './atomic-file.js';

export interface PersistedRun {
  /** The signed release exactly as received (its signature is checked again on start). */
  signed: unknown;
  /** The task that was active, or null for the release's default task. */
  activeTask: string | null;
}

export interface ReleaseStore {
  load(): PersistedRun | null;
  /** Records a newly applied release and its active task (atomically, before the call resolves). */
  saveRelease(signed: unknown, releaseId: string, activeTask: string): Promise<void>;
  /** Records the active task after a switch; written behind the switch, latest value wins. */
  saveTask(releaseId: string, activeTask: string): void;
  /** Resolves when every write asked for so far is on disk. */
  settle(): Promise<void>;
}

/**
 * The applied release and the active task on the device's disk, each replaced atomically:
 * `applied-release.json` (the signed release as received) and `active-task.json` ({releaseId, task}).
 * The task file names its release, so a task saved for an older release is not taken for the new one.
 */
export function createReleaseStore(dir: string, log: (line: string) => void = () => {}): ReleaseStore {
  const releasePath = join(dir, 'applied-release.json');
  const taskPath = join(dir, 'active-task.json');
  let chain: Promise<void> = Promise.resolve();
  let latestTask: { releaseId: string; task: string } | null = null;
  let taskWriteQueued = false;

  function enqueue(write: () => Promise<void>): Promise<void> {
    const next = chain.then(write);
    chain = next.catch((e: unknown) => log(`agent: could not save run state: ${(e as Error).message}`));
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
    saveRelease: function saveRelease(signed, releaseId, activeTask) {
      latestTask = { releaseId, task: activeTask };
      // Task first: it names the new release, so until the release file is replaced the old one starts on its default task.
      return enqueue(async () => {
        await writeFileAtomic(taskPath, JSON.stringify(latestTask));
        await writeFileAtomic(releasePath, JSON.stringify(signed));
      });
    },
    saveTask: function saveTask(releaseId, activeTask) {
      latestTask = { releaseId, task: activeTask };
      if (taskWriteQueued) return;
      taskWriteQueued = true;
      void enqueue(async () => {
        taskWriteQueued = false;
        await writeFileAtomic(taskPath, JSON.stringify(latestTask));
      });
    },
    settle: function settle() {
      return chain;
    },
  };
}

