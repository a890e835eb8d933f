import { clockTime, dateTime, num } from '../format.js';
import { linearScale, OKABE_ITO } from './scale.js';
import { timeTicks } from './time-axis.js';
import { YGrid } from './axes.js';

export interface SeriesPoint {
  atMs: number;
  measured: number;
  predicted: number | null;
  /** The prediction scaled by the fitted calibration factor, when there is one. */
  calibrated: number | null;
}

interface Props {
  title: string;
  unit: string;
  points: SeriesPoint[];
  fromMs: number;
  toMs: number;
}

const W = 560;
const H = 210;
const M = { left: 52, right: 24, top: 22, bottom: 26 };

/** A prediction as horizontal steps: each reading's value holds until the next reading (the last one to the window's end). */
function steps(points: SeriesPoint[], key: 'predicted' | 'calibrated', x: (v: number) => number, y: (v: number) => number, endMs: number): string {
  let d = '';
  points.forEach((p, i) => {
    const v = p[key];
    if (v === null) return;
    const until = i + 1 < points.length ? points[i + 1]!.atMs : endMs;
    d += `M${x(p.atMs).toFixed(1)},${y(v).toFixed(1)}H${x(Math.max(until, p.atMs)).toFixed(1)}`;
  });
  return d;
}

/** Measured values (dots) against the release's prediction (steps) and the calibrated prediction (dashed steps), over time. */
export function SeriesPlot({ title, unit, points, fromMs, toMs }: Props) {
  const inWindow = points.filter((p) => p.atMs >= fromMs && p.atMs <= toMs).sort((a, b) => a.atMs - b.atMs);
  const maxV = Math.max(1e-9, ...inWindow.flatMap((p) => [p.measured, p.predicted ?? 0, p.calibrated ?? 0]));
  const x = linearScale([fromMs, toMs], [M.left, W - M.right]);
  const y = linearScale([0, maxV * 1.15], [H - M.bottom, M.top]);
  const { ticks, stepMs } = timeTicks(fromMs, toMs, 5);
  const mean = inWindow.length ? inWindow.reduce((s, p) => s + p.measured, 0) / inWindow.length : null;
  const label = `${title}: ${inWindow.length} measurements${mean !== null ? `, mean ${num(mean)} ${unit}` : ''}.`;
  return (
    <figure class="chart">
      <svg viewBox={`0 0 ${W} ${H}`} role="img" aria-label={label} class="chart-svg">
        <text x={M.left} y={14} class="tick">
          {title} ({unit})
        </text>
        <YGrid frame={{ W, H, M }} y={y} ticks={y.ticks(4)} />
        {ticks.map((t) => (
          <text x={x(t)} y={H - 8} text-anchor="middle" class="tick">
            {clockTime(t, stepMs < 300_000)}
          </text>
        ))}
        <line x1={M.left} x2={W - M.right} y1={H - M.bottom} y2={H - M.bottom} class="axis" />
        {inWindow.map((p) => (
          <rect x={x(p.atMs) - 3} y={y(p.measured) - 3} width={6} height={6} fill={OKABE_ITO.blue}>
            <title>
              {dateTime(new Date(p.atMs).toISOString())}: measured {num(p.measured)} {unit}, predicted {num(p.predicted)} {unit}
            </title>
          </rect>
        ))}
        {/* Drawn over the markers, on a white casing, so the prediction stays visible where measurements crowd it. */}
        <path d={steps(inWindow, 'predicted', x, y, toMs)} fill="none" stroke="#ffffff" stroke-width="5" data-series="predicted-casing" />
        <path d={steps(inWindow, 'predicted', x, y, toMs)} fill="none" stroke={OKABE_ITO.orange} stroke-width="2.5" data-series="predicted" />
        <path d={steps(inWindow, 'calibrated', x, y, toMs)} fill="none" stroke={OKABE_ITO.reddishPurple} stroke-width="2" stroke-dasharray="6 4" data-series="calibrated" />
        {inWindow.length === 0 && (
          <text x={(M.left + W) / 2} y={H / 2} text-anchor="middle" class="tick">
            no telemetry in this window
          </text>
        )}
      </svg>
      <figcaption>
        <ul class="legend">
          <li>
            <span class="swatch swatch-square" style={{ background: OKABE_ITO.blue }} aria-hidden="true" /> measured (mean of a telemetry window)
          </li>
          <li>
            <svg width="28" height="8" aria-hidden="true"><line x1="0" x2="28" y1="4" y2="4" stroke={OKABE_ITO.orange} stroke-width="2" /></svg> predicted by the release
          </li>
          <li>
            <svg width="28" height="8" aria-hidden="true"><line x1="0" x2="28" y1="4" y2="4" stroke={OKABE_ITO.reddishPurple} stroke-width="2" stroke-dasharray="6 4" /></svg> prediction × calibration
          </li>
        </ul>
      </figcaption>
    </figure>
  );
}
