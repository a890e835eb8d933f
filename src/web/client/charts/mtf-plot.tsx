import { num } from '../format.js';
import { linearScale, OKABE_ITO } from './scale.js';
import { PlotAxes } from './axes.js';
import { SeriesLegend, SeriesPaths, type SeriesStyle } from './legend.js';

export interface MtfPoint {
  cycPerMm: number;
  diffraction: number;
  defocus: number;
  pixel: number;
  motion: number;
  system: number;
}

interface Props {
  points: MtfPoint[];
  distanceM: number;
  /** Sensor pixels per network input pixel: the input's Nyquist frequency is the sensor's divided by it. */
  downscale: number;
}

const W = 470;
const H = 230;
const M = { left: 44, right: 14, top: 14, bottom: 40 };

type Key = 'system' | 'diffraction' | 'defocus' | 'pixel' | 'motion';
const SERIES: Array<SeriesStyle<Key>> = [
  { key: 'system', label: 'system', color: OKABE_ITO.blue, width: 2.5 },
  { key: 'defocus', label: 'defocus', color: OKABE_ITO.orange, width: 1.5, dash: '5 3' },
  { key: 'diffraction', label: 'diffraction', color: OKABE_ITO.reddishPurple, width: 1.5, dash: '1 3' },
  { key: 'pixel', label: 'pixel aperture', color: OKABE_ITO.skyBlue, width: 1.5, dash: '3 2' },
  { key: 'motion', label: 'motion', color: OKABE_ITO.black, width: 1.5, dash: '7 2 1 2' },
];

/**
 * The MTF at the worst point of the working range: each stage and their product against spatial frequency on the
 * sensor, up to the sensor's Nyquist frequency, with the network input's Nyquist frequency and MTF50 marked.
 */
export function MtfPlot({ points, distanceM, downscale }: Props) {
  if (points.length < 2) return <p class="muted">No MTF figures in this report.</p>;
  const maxNu = points[points.length - 1]!.cycPerMm;
  const x = linearScale([0, maxNu], [M.left, W - M.right]);
  const y = linearScale([0, 1], [H - M.bottom, M.top]);
  const line = (key: Key) => points.map((p, i) => `${i === 0 ? 'M' : 'L'}${x(p.cycPerMm).toFixed(1)},${y(p[key]).toFixed(1)}`).join('');
  // MTF50 by linear interpolation between the sampled points (the validator's figures solve it exactly).
  let mtf50: number | null = null;
  for (let i = 1; i < points.length && mtf50 === null; i++) {
    const a = points[i - 1]!;
    const b = points[i]!;
    if (a.system >= 0.5 && b.system < 0.5) mtf50 = a.cycPerMm + ((a.system - 0.5) / (a.system - b.system)) * (b.cycPerMm - a.cycPerMm);
  }
  const inputNyquist = downscale > 1 ? maxNu / downscale : null;
  const summary = `MTF at ${num(distanceM)} m, the worst point of the range, from 0 to the sensor's Nyquist frequency ${num(maxNu)} cycles/mm; ` +
    (mtf50 !== null ? `the system falls to 0.5 at about ${num(mtf50)} cycles/mm.` : 'the system stays above 0.5 up to Nyquist.');
  return (
    <figure class="chart">
      <svg viewBox={`0 0 ${W} ${H}`} role="img" aria-label={summary} class="chart-svg" data-chart="mtf">
        <PlotAxes frame={{ W, H, M }} x={x} y={y} xTicks={x.ticks(5)} yTicks={y.ticks(5)} xTitle="spatial frequency on the sensor (cycles/mm)" yTitle="MTF" yTitleX={12} />
        {inputNyquist !== null && (
          <g>
            <line x1={x(inputNyquist)} x2={x(inputNyquist)} y1={M.top} y2={H - M.bottom} stroke={OKABE_ITO.bluishGreen} stroke-width="1.5" stroke-dasharray="2 3" />
            <text x={x(inputNyquist) + 4} y={M.top + 10} class="tick" fill={OKABE_ITO.bluishGreen}>
              input Nyquist
            </text>
          </g>
        )}
        {mtf50 !== null && <circle cx={x(mtf50)} cy={y(0.5)} r="4" fill="none" stroke={OKABE_ITO.vermillion} stroke-width="2" />}
        <SeriesPaths series={SERIES} pathOf={line} />
      </svg>
      <figcaption>
        <SeriesLegend series={SERIES}>
          <li>
            <svg width="12" height="12" aria-hidden="true"><circle cx="6" cy="6" r="4" fill="none" stroke={OKABE_ITO.vermillion} stroke-width="2" /></svg> MTF50
          </li>
        </SeriesLegend>
      </figcaption>
    </figure>
  );
}
