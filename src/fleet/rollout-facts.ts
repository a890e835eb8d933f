import type Database from 'better-sqlite3';
import type { Release } from '../protocol/release.js';
import type { RolloutDeviceRecord } from '../store/rollouts.js';
import type { DeviceFacts } from './rollout-gate.js';

interface StateRow {
  online: number;
  release_id: string | null;
  state: string | null;
  updated_at: string;
}

interface EventRow {
  type: string;
  event: string;
}

/** The parts of a device's state message the gate reads. */
interface ReportedState {
  refused?: { releaseId: string | null; reason: string } | null;
  pending?: { releaseId: string; reason: string } | null;
}

export interface FactsReader {
  /** Facts about one device of a rollout of `release`, at `nowMs`, for a wave that started at waveStartMs. */
  facts(d: RolloutDeviceRecord, release: Release, nowMs: number, waveStartMs: number): DeviceFacts;
  /** The release a device reports running, and whether it is online (null: never heard from). */
  reported(deviceId: string): { online: boolean; releaseId: string | null } | null;
}

const since = (nowMs: number, iso: string | null) => (iso === null ? null : Math.max(0, nowMs - Date.parse(iso)));

/**
 * Reads the bus bridge's tables for the rollout gate: the retained state (online, running release, refused,
 * pending) and the events a device sent after it was assigned: release-applied, release-refused and
 * telemetry on this release. The state's `refused` counts only when the state arrived after the assignment.
 */
export function createFactsReader(db: Database.Database): FactsReader {
  const stateRow = db.prepare('SELECT online, release_id, state, updated_at FROM device_state WHERE device_id = ?');
  const eventsAfter = db.prepare(`SELECT type, event FROM device_events WHERE device_id = ? AND seq > ?
      AND type IN ('release-applied', 'release-refused', 'telemetry') ORDER BY seq`);

  return {
    facts: function facts(d, release, nowMs, waveStartMs) {
      const row = stateRow.get(d.deviceId) as StateRow | undefined;
      const reported = (row?.state ? JSON.parse(row.state) : {}) as ReportedState;
      const assignedMs = d.assignedAt === null ? null : Date.parse(d.assignedAt);
      const stateIsNew = row !== undefined && assignedMs !== null && Date.parse(row.updated_at) >= assignedMs;
      let applied = row?.release_id === release.id;
      let refusedReason: string | null =
        stateIsNew && reported.refused && reported.refused.releaseId === release.id ? reported.refused.reason : null;
      const telemetry = { frames: 0, measuredMsSum: 0, predictedMsSum: 0 };
      if (d.status !== 'waiting') {
        for (const e of eventsAfter.all(d.deviceId, d.eventsAfterSeq) as EventRow[]) {
          const body = JSON.parse(e.event) as Record<string, unknown>;
          if (e.type === 'release-applied' && body.releaseId === release.id) applied = true;
          else if (e.type === 'release-refused' && body.releaseId === release.id) refusedReason = String(body.reason);
          else if (e.type === 'telemetry' && body.releaseId === release.id) {
            const predicted = release.tasks[String(body.task)]?.predicted.inferenceMs;
            const frames = Number(body.frames);
            if (predicted === undefined || !(frames > 0)) continue;
            telemetry.frames += frames;
            telemetry.measuredMsSum += frames * Number(body.inferenceMsMean);
            telemetry.predictedMsSum += frames * predicted;
          }
        }
      }
      // A device that runs the release has applied it, whatever it refused before (e.g. before it was fixed).
      if (applied) refusedReason = null;
      return {
        status: d.status,
        online: row?.online === 1,
        sinceWaveStartMs: Math.max(0, nowMs - waveStartMs),
        sinceAssignedMs: since(nowMs, d.assignedAt),
        sinceAppliedMs: since(nowMs, d.appliedAt),
        applied,
        refusedReason,
        pendingReason: reported.pending && reported.pending.releaseId === release.id ? reported.pending.reason : null,
        telemetry,
      };
    },
    reported: function reported(deviceId) {
      const row = stateRow.get(deviceId) as StateRow | undefined;
      return row ? { online: row.online === 1, releaseId: row.release_id } : null;
    },
  };
}
