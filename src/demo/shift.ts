/**
 * The demo robots' working day (demo data): a time-compressed greenhouse shift. A robot drives along a
 * row, stops to count fruit, inspects leaves up close, drives on to the next row, and ends the shift
 * with a low-light patrol; then the next shift begins. Pure: a position in the shift gives a step.
 */

export interface ShiftStep {
  /** The release task the robot needs for this step. */
  task: string;
  /** Whether the robot drives during the step (a release with apply policy when-idle waits for stopped). */
  moving: boolean;
  /** How long the step lasts, in shift minutes. */
  durationMin: number;
  /** What the robot does, for logs. */
  label: string;
}

const ROWS = 4;

function rowSteps(row: number): ShiftStep[] {
  return [
    { task: 'row-navigation', moving: true, durationMin: 6, label: `drive along row ${row}` },
    { task: 'fruit-counting', moving: false, durationMin: 5, label: `stop and count fruit in row ${row}` },
    { task: 'leaf-inspection', moving: false, durationMin: 3, label: `inspect leaves up close in row ${row}` },
  ];
}

/** Demo data: four rows, then the evening low-light patrol. 66 shift minutes per cycle. */
export const GREENHOUSE_SHIFT: readonly ShiftStep[] = [
  ...Array.from({ length: ROWS }, (_, i) => rowSteps(i + 1)).flat(),
  { task: 'low-light-patrol', moving: true, durationMin: 10, label: 'low-light patrol at the end of the shift' },
];

export function shiftLengthMin(schedule: readonly ShiftStep[]): number {
  return schedule.reduce((sum, s) => sum + s.durationMin, 0);
}

/** The step at a position in the shift (minutes since the robot's first shift began; the shift repeats). */
export function stepAt(schedule: readonly ShiftStep[], elapsedMin: number): { index: number; step: ShiftStep; cycle: number } {
  if (schedule.length === 0) throw new RangeError('a shift needs at least one step');
  const length = shiftLengthMin(schedule);
  if (!(length > 0)) throw new RangeError('a shift needs a positive length');
  const t = Math.max(0, elapsedMin);
  const cycle = Math.floor(t / length);
  let within = t - cycle * length;
  for (let index = 0; index < schedule.length; index++) {
    const step = schedule[index]!;
    if (within < step.durationMin) return { index, step, cycle };
    within -= step.durationMin;
  }
  // Floating-point rounding at the very end of a cycle.
  return { index: schedule.length - 1, step: schedule[schedule.length - 1]!, cycle };
}
