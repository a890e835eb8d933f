import { stepAt, type ShiftStep } from './shift.js';

/** The part of a device agent a robot's own software talks to (the agent's control calls). */
export interface RobotAgent {
  setTask(task: string): Promise<{ ok: true; unchanged?: true } | { ok: false }>;
  setMotion(moving: boolean): void;
}

export interface DemoRobotOptions {
  agent: RobotAgent;
  schedule: readonly ShiftStep[];
  /** Time compression: shift minutes per real second. */
  shiftMinPerS: number;
  /** Where in the shift this robot starts, in shift minutes (robots are spread over the shift). */
  offsetMin: number;
  /** Monotonic milliseconds. */
  nowMs: () => number;
  /** How often the robot looks at its schedule, in ms. */
  pollMs?: number;
  log?: (line: string) => void;
}

export interface DemoRobotCounts {
  /** Task switches the agent made on this robot's request. */
  switches: number;
  /** Requests the agent refused (no release applied yet, or a failed switch). */
  refused: number;
  stepsStarted: number;
}

export interface DemoRobot {
  start(): void;
  /** Stops following the schedule and waits for a call in progress. */
  stop(): Promise<void>;
  counts(): DemoRobotCounts;
  current(): ShiftStep | null;
}

/**
 * A simulated robot working its shift: at each step it tells its agent what it does. It stops before
 * switching to a task done standing still, and switches before it drives off, so profile changes happen
 * while it stands (a release with apply policy when-idle is applied only then).
 */
export function createDemoRobot(options: DemoRobotOptions): DemoRobot {
  const { agent, schedule } = options;
  const pollMs = options.pollMs ?? 100;
  const log = options.log ?? (() => {});
  const counts: DemoRobotCounts = { switches: 0, refused: 0, stepsStarted: 0 };
  let startedMs = 0;
  let currentKey: string | null = null;
  let current: ShiftStep | null = null;
  let moving = false;
  let timer: NodeJS.Timeout | null = null;
  let busy: Promise<void> = Promise.resolve();
  let stopped = false;

  async function switchTo(task: string): Promise<void> {
    const r = await agent.setTask(task);
    if (r.ok && r.unchanged !== true) counts.switches += 1;
    else if (!r.ok) counts.refused += 1;
  }

  async function enter(step: ShiftStep): Promise<void> {
    counts.stepsStarted += 1;
    current = step;
    log(`robot: ${step.label}`);
    if (!step.moving) {
      if (moving) agent.setMotion((moving = false));
      await switchTo(step.task);
    } else {
      await switchTo(step.task);
      if (!moving) agent.setMotion((moving = true));
    }
  }

  function tick() {
    timer = null;
    if (stopped) return;
    const elapsedMin = options.offsetMin + ((options.nowMs() - startedMs) / 1000) * options.shiftMinPerS;
    const at = stepAt(schedule, elapsedMin);
    const key = `${at.cycle}:${at.index}`;
    if (key !== currentKey) {
      currentKey = key;
      busy = enter(at.step).catch((e: unknown) => log(`robot: ${(e as Error).message}`));
    }
    void busy.then(() => {
      if (!stopped) timer = setTimeout(tick, pollMs);
    });
  }

  return {
    start: function start() {
      if (timer || stopped) return;
      startedMs = options.nowMs();
      tick();
    },
    stop: async function stop() {
      stopped = true;
      if (timer) clearTimeout(timer);
      timer = null;
      await busy;
    },
    counts: () => ({ ...counts }),
    current: () => current,
  };
}
