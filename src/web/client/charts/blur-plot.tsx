import { num } from '../format.js';
import { PlotAxes } from './axes.js';
import { LineSwatch, SeriesLegend, SeriesPaths, type SeriesStyle } from './legend.js';
import { linearScale, logScale, OKABE_ITO } from './scale.js';

export interface BlurPoint {
  distanceM: number;
  defocusPx: number | null;
  diffractionPx: number | null;
  pixelPx?: number | null;
  motionPx?: number | null;
  totalPx: number | null;
}

interface Props {
  curve: BlurPoint[];
  /** The model's tolerance, in `unit`. */
  toleratedBlurPx: number | null | undefined;
  /** Pixels the plot is drawn in: the tolerance's; sensor-px figures are divided by `downscale` for input px. */
  unit?: 'sensor-px' | 'input-px' | undefined;
  downscale?: number | undefined;
  nearM: number;
  farM: number;
  focusM: number;
}

type Key = 'totalPx' | 'defocusPx' | 'diffractionPx' | 'pixelPx' | 'motionPx';

/** The parts of the combined blur, each drawn as its own line; the combined blur is at least the largest. */
const SERIES: Array<SeriesStyle<Key>> = [
  { key: 'totalPx', label: 'combined blur', color: OKABE_ITO.blue, width: 2.5 },
  { key: 'defocusPx', label: 'defocus', color: OKABE_ITO.orange, width: 1.5, dash: '5 3' },
  { key: 'diffractionPx', label: 'diffraction', color: OKABE_ITO.reddishPurple, width: 1.5, dash: '1 3' },
  { key: 'pixelPx', label: 'pixel aperture', color: OKABE_ITO.skyBlue, width: 1.5, dash: '3 2' },
  { key: 'motionPx', label: 'motion', color: OKABE_ITO.black, width: 1.5, dash: '7 2 1 2' },
];

const W = 470;
const H = 250;
const M = { left: 48, right: 14, top: 14, bottom: 40 };

function path(points: Array<[number, number]>): string {
  return points.map(([x, y], i) => `${i === 0 ? 'M' : 'L'}${x.toFixed(1)},${y.toFixed(1)}`).join('');
}

/**
 * The combined blur (one MTF of defocus, diffraction, pixel aperture and motion, as an equivalent disc) against
 * object distance over the task's working range (shaded), each part as its own line, with the blur the model
 * tolerates as a horizontal line and the focus distance marked. Distance runs on a log axis.
 */
export function BlurPlot({ curve: sensorCurve, toleratedBlurPx, unit = 'sensor-px', downscale = 1, nearM, farM, focusM }: Props) {
  const k = unit === 'input-px' ? downscale : 1;
  const scaled = (v: number | null | undefined) => (v === null || v === undefined ? null : v / k);
  const curve: BlurPoint[] = sensorCurve.map((p) => ({
    distanceM: p.distanceM, totalPx: scaled(p.totalPx), defocusPx: scaled(p.defocusPx), diffractionPx: scaled(p.diffractionPx), pixelPx: scaled(p.pixelPx), motionPx: scaled(p.motionPx),
  }));
  const unitText = unit === 'input-px' ? 'input px' : 'px';
  const finite = curve.filter((p) => p.totalPx !== null && Number.isFinite(p.totalPx));
  const lo = Math.min(nearM, focusM) / 1.35;
  const hi = Math.max(farM, focusM) * 1.35;
  const x = logScale([lo, hi], [M.left, W - M.right]);
  const maxBlur = Math.max(1, toleratedBlurPx ?? 0, ...finite.map((p) => p.totalPx as number));
  const y = linearScale([0, maxBlur * 1.15], [H - M.bottom, M.top]);
  const line = (key: Key) =>
    path(curve.filter((p) => p[key] != null && Number.isFinite(p[key])).map((p) => [x(p.distanceM), y(Math.min(p[key] as number, maxBlur * 1.15))]));
  const worst = finite.reduce<BlurPoint | null>((w, p) => (w === null || (p.totalPx as number) > (w.totalPx as number) ? p : w), null);
  const summary =
    `Blur against distance from ${num(nearM)} m to ${num(farM)} m, focus at ${num(focusM)} m. ` +
    (worst ? `Worst combined blur ${num(worst.totalPx)} ${unitText} at ${num(worst.distanceM)} m; ` : '') +
    `the model tolerates ${num(toleratedBlurPx ?? null)} ${unitText}.`;

  return (
    <figure class="chart">
      <svg viewBox={`0 0 ${W} ${H}`} role="img" aria-label={summary} class="chart-svg">
        <rect x={x(nearM)} y={M.top} width={Math.max(1, x(farM) - x(nearM))} height={H - M.top - M.bottom} class="band" />
        <text x={(x(nearM) + x(farM)) / 2} y={M.top + 12} class="band-label" text-anchor="middle">
          working range
        </text>
        <PlotAxes frame={{ W, H, M }} x={x} y={y} xTicks={x.ticks()} yTicks={y.ticks(5)} xTitle="object distance (m, log scale)" yTitle={`blur (${unitText})`} />
        <line x1={x(focusM)} x2={x(focusM)} y1={M.top} y2={H - M.bottom} stroke={OKABE_ITO.bluishGreen} stroke-width="1.5" stroke-dasharray="2 3" />
        <text x={x(focusM) + 4} y={H - M.bottom - 6} class="tick" fill={OKABE_ITO.bluishGreen}>
          focus {num(focusM)} m
        </text>
        {toleratedBlurPx != null && (
          <g>
            <line x1={M.left} x2={W - M.right} y1={y(toleratedBlurPx)} y2={y(toleratedBlurPx)} stroke={OKABE_ITO.vermillion} stroke-width="2" stroke-dasharray="8 3 2 3" />
            <text x={W - M.right - 4} y={y(toleratedBlurPx) - 5} text-anchor="end" class="tick" fill={OKABE_ITO.vermillion}>
              tolerated {num(toleratedBlurPx)} {unitText}
            </text>
          </g>
        )}
        <SeriesPaths series={SERIES} pathOf={line} />
      </svg>
      <figcaption>
        <SeriesLegend series={SERIES}>
          <li>
            <LineSwatch color={OKABE_ITO.vermillion} width={2} dash="8 3 2 3" /> tolerated blur
          </li>
        </SeriesLegend>
        <details>
          <summary>Blur figures as a table</summary>
          <table class="grid compact">
            <thead>
              <tr>
                <th scope="col">distance (m)</th>
                <th scope="col">defocus ({unitText})</th>
                <th scope="col">diffraction ({unitText})</th>
                <th scope="col">pixel ({unitText})</th>
                <th scope="col">motion ({unitText})</th>
                <th scope="col">combined ({unitText})</th>
              </tr>
            </thead>
            <tbody>
              {curve.map((p) => (
                <tr>
                  <td>{num(p.distanceM)}</td>
                  <td>{num(p.defocusPx)}</td>
                  <td>{num(p.diffractionPx)}</td>
                  <td>{num(p.pixelPx)}</td>
                  <td>{num(p.motionPx)}</td>
                  <td>{num(p.totalPx)}</td>
                </tr>
              ))}
            </tbody>
          </table>
        </details>
      </figcaption>
    </figure>
  );
}
