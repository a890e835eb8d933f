import type { Store } from '../store/store.js';

/** What the demo reports every few seconds and at the end. */
export interface DemoSummary {
  elapsedS: number;
  robots: number;
  robotsOnline: number;
  /** Task switches the server has recorded (task-switched events stored). */
  switches: number;
  /** Releases robots reported applied (release-applied events stored). */
  releasesApplied: number;
  eventsStored: number;
  /** Events the agents hold that the server has not acknowledged yet. */
  eventsUnacked: number;
  rollout: RolloutSummary | null;
}

export interface RolloutSummary {
  id: string;
  status: string;
  /** 1-based, for people. */
  wave: number;
  waveCount: number;
  devices: number;
  devicesPassed: number;
}

/** Counts from the server's database: events by type and devices online. */
export function readStoredCounts(store: Pick<Store, 'deviceEvents' | 'deviceStates'>): Pick<DemoSummary, 'switches' | 'releasesApplied' | 'eventsStored' | 'robotsOnline'> {
  const byType = store.deviceEvents.countByType();
  return {
    switches: byType['task-switched'] ?? 0,
    releasesApplied: byType['release-applied'] ?? 0,
    eventsStored: Object.values(byType).reduce((sum, n) => sum + n, 0),
    robotsOnline: store.deviceStates.countOnline(),
  };
}

/** The rollout as the API shows it, reduced to what one line can say. */
export function summarizeRollout(view: { id: string; status: string; currentWave: number; waveCount: number; devices: Array<{ status: string }> }): RolloutSummary {
  return {
    id: view.id,
    status: view.status,
    // The API numbers waves from 1.
    wave: Math.min(view.currentWave, view.waveCount),
    waveCount: view.waveCount,
    devices: view.devices.length,
    devicesPassed: view.devices.filter((d) => d.status === 'passed').length,
  };
}

function clock(seconds: number): string {
  const s = Math.max(0, Math.floor(seconds));
  return `${Math.floor(s / 60)}:${String(s % 60).padStart(2, '0')}`;
}

export function formatRollout(r: RolloutSummary | null): string {
  if (!r) return 'rollout not started';
  return `rollout ${r.id} ${r.status}, wave ${r.wave}/${r.waveCount}, ${r.devicesPassed}/${r.devices} robots passed`;
}

/** One line for the console, e.g. `[demo 0:42] robots 12/12 online | switches 318 | ...`. */
export function formatSummary(s: DemoSummary, final = false): string {
  return [
    `[demo ${clock(s.elapsedS)}${final ? ' final' : ''}] robots ${s.robotsOnline}/${s.robots} online`,
    `switches ${s.switches}`,
    `releases applied ${s.releasesApplied}`,
    formatRollout(s.rollout),
    `events stored ${s.eventsStored} (${s.eventsUnacked} awaiting ack)`,
  ].join(' | ');
}
