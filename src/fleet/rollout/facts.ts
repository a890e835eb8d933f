import { taskOf, type Release } from '../../protocol/release.js';
import type { RolloutDeviceRecord } from '../../store/rollouts.js';
import type { OpenRolloutDevice, RolloutFactsRepository } from '../../store/rollout-facts.js';
import type { DeviceFacts } from './gate.js';

/** The parts of a device's state message the gate reads. */
interface ReportedState {
  refused?: { releaseId: string | null; reason: string } | null;
  pending?: { releaseId: string; reason: string } | null;
}

export interface WaveInput {
  rolloutId: string;
  wave: number;
  release: Release;
  nowMs: number;
  waveStartMs: number;
  /** Read telemetry for applied devices (the gate checks latency). */
  needTelemetry: boolean;
}

export interface FactsReader {
  /** Facts about every device of a wave still on its way through the gate, from one query plus event reads where needed. */
  openWave(input: WaveInput): Array<{ device: RolloutDeviceRecord; facts: DeviceFacts }>;
  /** The same for only the given devices (those of them in the wave and still open): one statement, a key lookup each. */
  openDevices(input: WaveInput, deviceIds: Iterable<string>): Array<{ device: RolloutDeviceRecord; facts: DeviceFacts }>;
  /**
   * The same for the open devices the clock may have moved: every waiting device, assigned ones assigned at or
   * before `assignedBy` and applied ones applied at or before `appliedBy` (ISO times). The wave's rows are
   * filtered inside the database; state and events are read only for the rows that pass.
   */
  dueDevices(input: WaveInput, cutoffs: { assignedBy: string; appliedBy: string }): Array<{ device: RolloutDeviceRecord; facts: DeviceFacts }>;
  /** The release a device reports running, and whether it is online (null: never heard from). */
  reported(deviceId: string): { online: boolean; releaseId: string | null } | null;
}

const since = (nowMs: number, iso: string | null) => (iso === null ? null : Math.max(0, nowMs - Date.parse(iso)));

/**
 * Reads the bus bridge's records for the rollout gate: the retained state (online, running release, refused,
 * pending) and the events a device sent after it was assigned: release-applied, release-refused and
 * telemetry on this release. The state's `refused` counts only when the state arrived after the assignment.
 */
export function createFactsReader(rows: RolloutFactsRepository): FactsReader {
  function factsOf(d: RolloutDeviceRecord, state: OpenRolloutDevice['state'], lastSeq: number | null, release: Release, nowMs: number, waveStartMs: number, needTelemetry: boolean): DeviceFacts {
    const runs = state?.releaseId === release.id;
    let applied = runs;
    let refusedReason: string | null = null;
    let pendingReason: string | null = null;
    const telemetry = { frames: 0, measuredMsSum: 0, predictedMsSum: 0 };
    // Read only what the device's step needs: a waiting device its online flag, an assigned one that does not
    // run the release yet its refusals and holds, an applied one its telemetry (when the gate checks latency).
    // Cheap checks first: most devices of a large wave have said nothing new since the last pass.
    const stateIsNew = state !== null && d.assignedAt !== null && Date.parse(state.updatedAt) >= Date.parse(d.assignedAt);
    const newEvents = d.status !== 'waiting' && (lastSeq ?? 0) > d.eventsAfterSeq;
    // The state message itself is read only for a device that said something since it was assigned.
    const reported = d.status === 'assigned' && !runs && stateIsNew ? (rows.stateMessage(d.deviceId) as ReportedState | null) : null;
    if (reported) {
      if (reported.refused && reported.refused.releaseId === release.id) refusedReason = reported.refused.reason;
      if (reported.pending && reported.pending.releaseId === release.id) pendingReason = reported.pending.reason;
    }
    if (newEvents && ((d.status === 'assigned' && !runs) || (d.status === 'applied' && needTelemetry))) {
      for (const { type, event: body } of rows.gateEventsAfter(d.deviceId, d.eventsAfterSeq)) {
        if (type === 'release-applied' && body.releaseId === release.id) applied = true;
        else if (type === 'release-refused' && body.releaseId === release.id) refusedReason = String(body.reason);
        else if (type === 'telemetry' && body.releaseId === release.id) {
          // Own properties only: a device-reported name such as `constructor` is not a task.
          const predicted = taskOf(release, String(body.task))?.predicted.inferenceMs;
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
      online: state?.online === true,
      sinceWaveStartMs: Math.max(0, nowMs - waveStartMs),
      sinceAssignedMs: since(nowMs, d.assignedAt),
      sinceAppliedMs: since(nowMs, d.appliedAt),
      applied,
      refusedReason,
      pendingReason,
      telemetry,
    };
  }

  const withFacts = (w: WaveInput) => (o: OpenRolloutDevice) => ({ device: o.device, facts: factsOf(o.device, o.state, o.lastSeq, w.release, w.nowMs, w.waveStartMs, w.needTelemetry) });

  return {
    openWave: (w) => rows.openWave(w.rolloutId, w.wave).map(withFacts(w)),
    dueDevices: (w, cutoffs) => rows.dueDevices(w.rolloutId, w.wave, cutoffs).map(withFacts(w)),
    openDevices: (w, deviceIds) => rows.openDevices(w.rolloutId, w.wave, [...deviceIds]).map(withFacts(w)),
    reported: (deviceId) => rows.reported(deviceId),
  };
}
