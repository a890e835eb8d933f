import type { Store } from '../../store/store.js';
import { createCalibrator } from './calibrator.js';
import { createDriftMonitor, DEFAULT_DRIFT_TOLERANCE, type DriftChange } from './drift.js';

export interface CalibrationEngineOptions {
  /** How often drift is checked and the cached class calibrations refreshed, in ms (10,000 by default). */
  calibrationEveryMs?: number;
  driftTolerance?: number;
  log?: (line: string) => void;
}

export interface CalibrationEngineDeps extends CalibrationEngineOptions {
  store: Store;
  clock: { now(): Date };
  /** True while this server may record drift episodes (it holds the leader lock); always true by default. */
  fence?: () => boolean;
}

export interface CalibrationEngine {
  /**
   * Measured ÷ predicted inference latency of a device class, as the validator would apply it (1 while the class
   * has too little telemetry). Computed on first use and kept until the next refresh: it reads many events.
   */
  latencyFactor(deviceClassId: string): number;
  /** Checks drift now (opening and closing episodes) and drops the kept factors; returns what changed. */
  refresh(): DriftChange[];
  /** Refreshes every `calibrationEveryMs` from now on. */
  start(): void;
  stop(): void;
}

/**
 * Keeps the fleet's calibration current on its own timer: the drift monitor's episodes, and the per-class
 * latency factors the rollout gate uses. Apart from the rollout engine, so a slow refresh never delays a pass.
 */
export function createCalibrationEngine(deps: CalibrationEngineDeps): CalibrationEngine {
  const { store, clock } = deps;
  const log = deps.log ?? (() => {});
  const everyMs = deps.calibrationEveryMs ?? 10_000;
  const drift = createDriftMonitor({ store, clock, tolerance: deps.driftTolerance ?? DEFAULT_DRIFT_TOLERANCE });
  let factors = new Map<string, number>();
  let timer: ReturnType<typeof setInterval> | null = null;

  function refreshLogged() {
    // Drift episodes are written once per fleet: only the replica holding the leader lock checks them.
    if (deps.fence && !deps.fence()) return;
    try {
      refresh();
    } catch (e) {
      log(`calibration: refresh failed: ${e instanceof Error ? e.message : String(e)}`);
    }
  }

  function refresh(): DriftChange[] {
    factors = new Map();
    const changes = drift.check();
    for (const change of changes) {
      log(`drift ${change.kind}: ${change.record.deviceId} ${change.record.quantity} ${(change.record.deviation * 100).toFixed(1)}% from its class`);
    }
    return changes;
  }

  return {
    latencyFactor: function latencyFactor(deviceClassId) {
      let f = factors.get(deviceClassId);
      if (f === undefined) {
        f = createCalibrator(store).forValidator(deviceClassId)?.latencyFactor ?? 1;
        factors.set(deviceClassId, f);
      }
      return f;
    },
    refresh,
    start: function start() {
      if (timer) return;
      refreshLogged();
      timer = setInterval(refreshLogged, everyMs);
      timer.unref();
    },
    stop: function stop() {
      if (timer) clearInterval(timer);
      timer = null;
    },
  };
}
