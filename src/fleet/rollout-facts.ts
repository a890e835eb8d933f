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
  /** Facts about one device of a rollout of `release`, at `nowMs`, for a wave that started at waveStartMs; telemetry only when asked. */
  facts(d: RolloutDeviceRecord, release: Release, nowMs: number, waveStartMs: number, needTelemetry: boolean): DeviceFacts;
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
  const lastSeq = db.prepare('SELECT seq FROM device_events WHERE device_id = ? ORDER BY seq DESC LIMIT 1').pluck();
  const eventsAfter = db.prepare(`SELECT type, event FROM device_events WHERE device_id = ? AND seq > ?
      AND type IN ('release-applied', 'release-refused', 'telemetry') ORDER BY seq`);

  return {
    facts: function facts(d, release, nowMs, waveStartMs, needTelemetry) {
      const row = stateRow.get(d.deviceId) as StateRow | undefined;
      const runs = row?.release_id === release.id;
      let applied = runs;
      let refusedReason: string | null = null;
      let pendingReason: string | null = null;
      const telemetry = { frames: 0, measuredMsSum: 0, predictedMsSum: 0 };
      // Read only what the device's step needs: a waiting device its online flag, an assigned one that does not
      // run the release yet its refusals and holds, an applied one its telemetry (when the gate checks latency).
      // Cheap checks first: most devices of a large wave have said nothing new since the last pass.
      const stateIsNew = row !== undefined && d.assignedAt !== null && Date.parse(row.updated_at) >= Date.parse(d.assignedAt);
      const newEvents = d.status !== 'waiting' && ((lastSeq.get(d.deviceId) as number | undefined) ?? 0) > d.eventsAfterSeq;
      if (d.status === 'assigned' && !runs && row?.state) {
        const reported = JSON.parse(row.state) as ReportedState;
        if (stateIsNew && reported.refused && reported.refused.releaseId === release.id) refusedReason = reported.refused.reason;
        if (reported.pending && reported.pending.releaseId === release.id) pendingReason = reported.pending.reason;
      }
      if (newEvents && ((d.status === 'assigned' && !runs) || (d.status === 'applied' && needTelemetry))) {
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
        pendingReason,
        telemetry,
      };
    },
    reported: function reported(deviceId) {
      const row = stateRow.get(deviceId) as StateRow | undefined;
      return row ? { online: row.online === 1, releaseId: row.release_id } : null;
    },
  };
}
