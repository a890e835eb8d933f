import type { Store } from '../../store/store.js';
import type { EventRangeReader } from '../../store/event-ranges.js';

/** Time, frames and energy one device spent on one task in one UTC day, summed from its telemetry. */
export interface UsageRow {
  /** UTC date, YYYY-MM-DD, of the telemetry window's end (a window is counted whole in the day it was reported). */
  day: string;
  task: string;
  seconds: number;
  frames: number;
  /** Σ frames × mean energy per frame (mJ) ÷ 1000. */
  energyJ: number;
  /** Σ frames × mean inference energy (mJ) ÷ 1000: the accelerator's share of energyJ. */
  inferenceEnergyJ: number;
  windows: number;
}

interface Telemetry {
  task: string;
  frames: number;
  windowS: number;
  inferenceMjMean: number;
  frameEnergyMjMean: number;
}

export function usageOf(reader: EventRangeReader, deviceId: string, fromMs: number, toMs: number): UsageRow[] {
  const rows = new Map<string, UsageRow>();
  for (const e of reader.ofType(deviceId, 'telemetry', reader.seqRange(deviceId, fromMs, toMs))) {
    const t = e.event as unknown as Telemetry;
    const day = new Date(Date.parse(e.ts)).toISOString().slice(0, 10);
    const key = `${day}\u0000${t.task}`;
    let row = rows.get(key);
    if (!row) {
      row = { day, task: t.task, seconds: 0, frames: 0, energyJ: 0, inferenceEnergyJ: 0, windows: 0 };
      rows.set(key, row);
    }
    row.seconds += t.windowS;
    row.frames += t.frames;
    // mJ → J: ÷ 1000 (SI prefixes).
    row.energyJ += (t.frames * t.frameEnergyMjMean) / 1000;
    row.inferenceEnergyJ += (t.frames * t.inferenceMjMean) / 1000;
    row.windows += 1;
  }
  return [...rows.values()].sort((a, b) => (a.day === b.day ? a.task.localeCompare(b.task) : a.day.localeCompare(b.day)));
}

export interface UsageReader {
  device(deviceId: string, fromMs: number, toMs: number): UsageRow[];
}

export function createUsageReader(store: Pick<Store, 'eventRanges'>): UsageReader {
  const reader = store.eventRanges;
  return { device: (deviceId, fromMs, toMs) => usageOf(reader, deviceId, fromMs, toMs) };
}
