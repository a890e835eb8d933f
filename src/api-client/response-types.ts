/** Shapes of the API's answers as its clients read them (src/api/routes/); imports no storage code. */
import type { Check, Report } from '../schema/report.js';
import type { Profile } from '../schema/profile.js';
import type { Task } from '../schema/task.js';
import type { DeviceClass } from '../schema/device-class.js';
import type { StateMessage } from '../protocol/messages.js';
import type { ValidationFigures } from '../validate/validate.js';
import type { Candidate, NearMiss, PlanResult } from '../plan/types.js';
import type { DriftEpisode } from '../schema/drift.js';
import type { HistoryInterval, IntervalCause } from '../schema/history.js';

export type { Check, Report, Profile, Task, DeviceClass, StateMessage, ValidationFigures, Candidate, NearMiss, DriftEpisode, HistoryInterval, IntervalCause };

/** GET /devices/:id/history: the window asked for (or fitted) and the intervals in it, oldest first. */
export interface DeviceHistoryAnswer {
  from: string;
  to: string;
  intervals: HistoryInterval[];
}

/** POST /plan: the planner's result, the calibration it applied and the document versions it read. */
export interface PlanAnswer extends PlanResult {
  calibration: { latencyFactor: number; energyFactor: number; samples: number } | null;
  refs: {
    task: { id: string; version: number };
    deviceClass: { id: string; version: number };
    models: Array<{ model: { id: string; version: number }; network: { id: string; version: number } }>;
  };
}

export interface DeviceListItem {
  id: string;
  deviceClassId: string;
  tags: string[];
  assignedReleaseId: string | null;
  createdAt: string;
  online: boolean | null;
  lastSeenAt: string | null;
  reportedState: StateMessage | null;
}

export interface DeviceDetail extends DeviceListItem {
  assignedRelease: { id: string; version: number; deviceClassId: string } | null;
  reported: { state: StateMessage | null; online: boolean; lastSeenAt: string } | null;
  assignments: Array<{ id: number; releaseId: string; cause: string; actor: string; createdAt: string }>;
  /** Drift episodes, newest first. */
  drift: DriftEpisode[];
}

export interface StoredDocument<T> {
  id: string;
  version: number;
  document: T;
  createdAt?: string;
}

export interface RevisionSummary {
  profileId: string;
  revision: number;
  status: 'pass' | 'warn' | 'fail';
  profile: Profile;
  createdAt: string;
  createdBy: string;
  refs?: unknown;
}

export interface Revision extends RevisionSummary {
  report: Report & { figures?: Partial<ValidationFigures> };
}

export interface ValidateAnswer {
  report: Report & { figures?: Partial<ValidationFigures> };
}

export interface ReleaseSummary {
  id: string;
  deviceClassId: string;
  version: number;
  createdAt: string;
  createdBy: string;
  applyPolicy: 'immediate' | 'when-idle';
  defaultTask: string;
  tasks: Record<string, { profileId: string; revision: number }>;
  overridden: boolean;
  /** Robots whose latest report says they run it (online and offline), and robots assigned it. */
  robots?: { applied: { online: number; offline: number }; assigned: number };
}

export interface AuditEntry {
  id: number;
  at: string;
  actor: string;
  action: string;
  target: string;
  detail: unknown;
}

export interface FieldChange {
  path: string;
  change: 'added' | 'removed' | 'changed';
  before?: unknown;
  after?: unknown;
}

export interface RolloutSummary {
  id: string;
  releaseId: string;
  deviceClassId: string;
  status: 'running' | 'paused' | 'completed' | 'aborted' | 'rolling-back' | 'rolled-back';
  waveCount: number;
  currentWave: number;
  pauseReason: unknown;
  /** The rollout as requested: its note, gate and offline rules. */
  spec?: { note?: string };
  createdAt: string;
  createdBy: string;
  updatedAt: string;
}

export interface RolloutDevice {
  deviceId: string;
  wave: number;
  status: 'waiting' | 'assigned' | 'applied' | 'passed' | 'failed' | 'skipped';
  reason: string | null;
  previousReleaseId: string | null;
  rollbackStatus: string | null;
}

export interface RolloutDetail extends RolloutSummary {
  devices: RolloutDevice[];
  rollback: { restored: number; pending: number; nothingToRestore: number } | null;
}
