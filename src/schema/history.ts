/** The answer shape of a device's history: which profile ran when, and when the device was offline. */

/** The server-side change that put an interval's release on the device. */
export interface IntervalCause {
  releaseId: string;
  /** The rollout that assigned it (also set when a rollout's rollback restored it). */
  rolloutId?: string;
  /** Who made the assignment (a token's label#id, or the rollout's creator). */
  actor?: string;
  /** "manual", "rollout:<id>", "rollback:<id>": the assignment's recorded cause. */
  assignment?: string;
  assignedAt?: string;
}

/**
 * One stretch of a device's history: either it ran one task profile (kind 'profile'), or the server had
 * no connection to it and its own events do not say what it ran (kind 'offline': task unknown).
 */
export interface HistoryInterval {
  kind: 'profile' | 'offline';
  deviceId: string;
  /** null on an offline interval: the task is unknown. */
  task: string | null;
  profileId: string | null;
  profileRevision: number | null;
  /** The release it ran; on an offline interval, the release it had applied when it went. */
  releaseId: string | null;
  /** On an offline interval: the task the device last reported before it went. */
  lastKnownTask?: string | null;
  start: string;
  /** null: still going (no later switch or reconnection, and the window reaches the present). */
  end: string | null;
  /**
   * Profile: why the device switched into it (task-switched reason: local, command, release, startup, restore).
   * Offline: how the connection ended (last-will, clean-disconnect, keepalive-missed, found-offline).
   */
  reason: string;
  /** Seq of the task-switched event that started it; null on an offline interval. */
  seq: number | null;
  cause: IntervalCause | null;
  /**
   * 'live': the server saw it as it happened; 'after-the-fact': from events the device kept while offline
   * and delivered later, on the device's own clock.
   */
  reported: 'live' | 'after-the-fact';
}
