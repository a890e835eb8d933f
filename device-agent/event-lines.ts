import type { EventBody } from '../src/protocol/messages.js';

/** A millisecond figure as people read it: one decimal (timer noise below that says nothing). */
export const msText = (ms: number) => `${Math.round(ms * 10) / 10} ms`;

/**
 * The agent's log line for an event a person at the robot wants to see as it happens (a release applied,
 * deferred or refused, a task switch, a failed switch); null for the routine ones (telemetry, motion, …).
 */
export function eventLine(body: EventBody): string | null {
  switch (body.type) {
    case 'release-applied':
      return `applied release ${body.releaseId} (version ${body.version})`;
    case 'release-deferred':
      return `release ${body.releaseId} (version ${body.version}) waits: ${body.reason}`;
    case 'release-refused':
      return `refused release ${body.releaseId ?? '(unreadable)'}: ${body.reason}`;
    case 'task-switched':
      return `task ${body.toTask}: profile ${body.profileId} revision ${body.profileRevision} of release ${body.releaseId} (${body.reason}${body.fromTask ? `, from ${body.fromTask}` : ''})`;
    case 'switch-failed':
      return `switch to task ${body.toTask} failed at ${body.step}: ${body.error}${body.restored ? ' (previous settings restored)' : ''}`;
    default:
      return null;
  }
}
