import type { JSX } from 'preact';
import { num } from '../format.js';
import type { Candidate } from '../../../api-client/response-types.js';
import { linearScale, OKABE_ITO, SERIES_COLOURS } from './scale.js';
import { YGrid } from './axes.js';

interface Props {
  front: Candidate[];
  nearMisses: Candidate[];
  /** The task's minimum accuracy, drawn as a line. */
  minAccuracy: number | undefined;
  /** Index into `front` of the highlighted candidate. */
  selected: number | null;
  onSelect(index: number): void;
}

const W = 520;
const H = 280;
const M = { left: 56, right: 18, top: 18, bottom: 42 };

/** One shape per model, so models read apart without colour too. */
const SHAPES = ['circle', 'square', 'triangle', 'diamond', 'star'] as const;
type Shape = (typeof SHAPES)[number];

export function Marker({ shape, x, y, r, fill, stroke }: { shape: Shape; x: number; y: number; r: number; fill: string; stroke: string }) {
  const common = { fill, stroke, 'stroke-width': 1.5 };
  switch (shape) {
    case 'circle':
      return <circle cx={x} cy={y} r={r} {...common} />;
    case 'square':
      return <rect x={x - r * 0.9} y={y - r * 0.9} width={r * 1.8} height={r * 1.8} {...common} />;
    case 'triangle':
      return <path d={`M${x},${y - r * 1.15}L${x + r * 1.1},${y + r * 0.8}L${x - r * 1.1},${y + r * 0.8}Z`} {...common} />;
    case 'diamond':
      return <path d={`M${x},${y - r * 1.2}L${x + r * 1.2},${y}L${x},${y + r * 1.2}L${x - r * 1.2},${y}Z`} {...common} />;
    case 'star':
      // Lines only: drawn in the model's colour.
      return <path d={`M${x - r},${y - r}L${x + r},${y + r}M${x + r},${y - r}L${x - r},${y + r}M${x},${y - r * 1.3}V${y + r * 1.3}`} fill="none" stroke={fill} stroke-width={2.5} />;
  }
}

/** Colour and shape of each model, in the order the models first appear. */
export function modelStyles(ids: string[]): Map<string, { colour: string; shape: Shape }> {
  const out = new Map<string, { colour: string; shape: Shape }>();
  for (const id of ids) {
    if (out.has(id)) continue;
    const k = out.size;
    out.set(id, { colour: SERIES_COLOURS[k % SERIES_COLOURS.length]!, shape: SHAPES[k % SHAPES.length]! });
  }
  return out;
}

const finite = (c: Candidate) => Number.isFinite(c.energyMjPerFrame) && c.predictedAccuracy !== null && Number.isFinite(c.predictedAccuracy);

/**
 * Energy per frame against predicted accuracy: the front as filled marks numbered like the table's rows
 * (one shape and colour per model), near misses as grey crosses, the task's minimum accuracy as a line.
 */
export function FrontPlot({ front, nearMisses, minAccuracy, selected, onSelect }: Props) {
  const shown = front.map((c, i) => ({ c, i })).filter(({ c }) => finite(c));
  const misses = nearMisses.filter(finite);
  const all = [...shown.map((s) => s.c), ...misses];
  const energies = all.map((c) => c.energyMjPerFrame);
  const accuracies = [...all.map((c) => c.predictedAccuracy as number), ...(minAccuracy !== undefined ? [minAccuracy] : [])];
  const eLo = Math.min(...energies, Infinity);
  const eHi = Math.max(...energies, -Infinity);
  const ePad = Math.max((eHi - eLo) * 0.12, eHi * 0.05, 1e-6);
  const aLo = Math.min(...accuracies, Infinity);
  const aHi = Math.max(...accuracies, -Infinity);
  const aPad = Math.max((aHi - aLo) * 0.12, 0.005);
  const x = linearScale([Math.max(0, eLo - ePad), eHi + ePad], [M.left, W - M.right]);
  const y = linearScale([aLo - aPad, Math.min(1, aHi + aPad)], [H - M.bottom, M.top]);
  const styles = modelStyles(front.map((c) => c.modelId));
  const hidden = front.length - shown.length;
  const summary =
    `Energy per frame against predicted accuracy: ${shown.length} candidates on the front` +
    (misses.length ? ` and ${misses.length} near misses` : '') +
    (minAccuracy !== undefined ? `; the task needs accuracy ${num(minAccuracy)}` : '') +
    '. The table below lists the same candidates.';

  if (all.length === 0) return <p class="muted">Nothing to plot: no candidate has an energy and an accuracy estimate.</p>;
  // Each number goes right of its mark unless a label already sits there, then left.
  const placed: Array<{ x: number; y: number; right: boolean }> = [];
  const marks: JSX.Element[] = shown.map(({ c, i }) => {
    const st = styles.get(c.modelId)!;
    const px = x(c.energyMjPerFrame);
    const py = y(c.predictedAccuracy as number);
    const crowded = placed.some((p) => p.right && Math.abs(p.x - px) < 22 && Math.abs(p.y - py) < 13);
    placed.push({ x: px, y: py, right: !crowded });
    return (
      <g class={`front-point${selected === i ? ' selected' : ''}`} onClick={() => onSelect(i)} data-rank={i + 1}>
        <title>
          #{i + 1} {c.modelId}: {num(c.energyMjPerFrame)} mJ per frame, accuracy {num(c.predictedAccuracy)}, {num(c.latencyMs)} ms
        </title>
        {selected === i && <circle cx={px} cy={py} r={11} fill="none" stroke={OKABE_ITO.black} stroke-width={2} />}
        <Marker shape={st.shape} x={px} y={py} r={6} fill={st.colour} stroke="#1d2327" />
        <text x={crowded ? px - 9 : px + 9} y={py - 7} text-anchor={crowded ? 'end' : 'start'} class="point-label">
          {i + 1}
        </text>
      </g>
    );
  });

  return (
    <figure class="chart front-chart">
      <svg viewBox={`0 0 ${W} ${H}`} role="img" aria-label={summary} class="chart-svg">
        <YGrid frame={{ W, H, M }} y={y} ticks={y.ticks(5)} />
        {x.ticks(5).map((t) => (
          <text x={x(t)} y={H - M.bottom + 16} text-anchor="middle" class="tick">
            {num(t)}
          </text>
        ))}
        <line x1={M.left} x2={W - M.right} y1={H - M.bottom} y2={H - M.bottom} class="axis" />
        <line x1={M.left} x2={M.left} y1={M.top} y2={H - M.bottom} class="axis" />
        <text x={(M.left + W - M.right) / 2} y={H - 6} text-anchor="middle" class="axis-title">
          energy per frame (mJ) — lower is better
        </text>
        <text transform={`translate(14 ${(M.top + H - M.bottom) / 2}) rotate(-90)`} text-anchor="middle" class="axis-title">
          predicted accuracy ↑
        </text>
        {minAccuracy !== undefined && (
          <g>
            <line x1={M.left} x2={W - M.right} y1={y(minAccuracy)} y2={y(minAccuracy)} stroke={OKABE_ITO.vermillion} stroke-width={1.5} stroke-dasharray="7 3 2 3" />
            <text x={W - M.right - 4} y={y(minAccuracy) - 5} text-anchor="end" class="band-label">
              task minimum {num(minAccuracy)}
            </text>
          </g>
        )}
        {misses.map((c) => (
          <g class="miss-point">
            <title>
              near miss {c.modelId}: {num(c.energyMjPerFrame)} mJ, accuracy {num(c.predictedAccuracy)} (fails a check)
            </title>
            <path d={`M${x(c.energyMjPerFrame) - 5},${y(c.predictedAccuracy as number) - 5}l10,10m0,-10l-10,10`} stroke="#5b6369" stroke-width={2} />
          </g>
        ))}
        {marks}
      </svg>
      <figcaption>
        <ul class="legend">
          {[...styles].map(([id, st]) => (
            <li>
              <svg width="16" height="16" aria-hidden="true">
                <Marker shape={st.shape} x={8} y={8} r={5} fill={st.colour} stroke="#1d2327" />
              </svg>
              {id} (passes every check)
            </li>
          ))}
          {misses.length > 0 && (
            <li>
              <svg width="16" height="16" aria-hidden="true">
                <path d="M3,3l10,10m0,-10l-10,10" stroke="#5b6369" stroke-width={2} />
              </svg>
              near miss (fails a check)
            </li>
          )}
          {minAccuracy !== undefined && (
            <li>
              <svg width="28" height="8" aria-hidden="true">
                <line x1="0" x2="28" y1="4" y2="4" stroke={OKABE_ITO.vermillion} stroke-width="1.5" stroke-dasharray="7 3 2 3" />
              </svg>
              task's minimum accuracy
            </li>
          )}
        </ul>
        {hidden > 0 && <p class="muted small">{hidden} candidates without an accuracy estimate are in the table only.</p>}
      </figcaption>
    </figure>
  );
}
