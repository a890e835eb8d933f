import { num } from '../format.js';
import { linearScale, OKABE_ITO } from './scale.js';

export interface Stage {
  label: string;
  value: number;
}

interface Props {
  title: string;
  unit: string;
  stages: Stage[];
  total: number;
  budget: number | null | undefined;
}

const STAGE_COLOURS = [OKABE_ITO.skyBlue, OKABE_ITO.orange, OKABE_ITO.bluishGreen, OKABE_ITO.reddishPurple, OKABE_ITO.yellow];
const W = 470;
const H = 74;
const M = { left: 8, right: 16, top: 18, bottom: 22 };

/** One frame's cost split by stage as a stacked bar, against the task's budget (a line, labelled). */
export function StageBars({ title, unit, stages, total, budget }: Props) {
  const over = budget != null && total > budget;
  const x = linearScale([0, Math.max(total, budget ?? 0) * 1.1 || 1], [M.left, W - M.right]);
  let at = 0;
  const label = `${title}: ${num(total)} ${unit} in total${budget != null ? ` against a budget of ${num(budget)} ${unit}${over ? ', over budget' : ''}` : ''}. ` + stages.map((s) => `${s.label} ${num(s.value)} ${unit}`).join(', ');
  return (
    <figure class="chart">
      <svg viewBox={`0 0 ${W} ${H}`} role="img" aria-label={label} class="chart-svg">
        <text x={M.left} y={12} class="tick">
          {title}: <tspan font-weight="700">{num(total)} {unit}</tspan>
          {budget != null && ` of ${num(budget)} ${unit} budget${over ? ' — over budget' : ''}`}
        </text>
        {stages.map((s, i) => {
          const x0 = x(at);
          at += s.value;
          return <rect x={x0} y={M.top + 4} width={Math.max(0, x(at) - x0 - 1)} height={H - M.top - M.bottom - 4} fill={STAGE_COLOURS[i % STAGE_COLOURS.length]} stroke="#1d2327" stroke-width="0.5" />;
        })}
        {budget != null && (
          <g>
            <line x1={x(budget)} x2={x(budget)} y1={M.top} y2={H - M.bottom + 4} stroke={OKABE_ITO.vermillion} stroke-width="2.5" />
            <text x={x(budget)} y={H - 4} text-anchor="middle" class="tick" fill={OKABE_ITO.vermillion}>
              budget {num(budget)} {unit}
            </text>
          </g>
        )}
      </svg>
      <figcaption>
        <ul class="legend">
          {stages.map((s, i) => (
            <li>
              <span class="swatch" style={{ background: STAGE_COLOURS[i % STAGE_COLOURS.length] }} aria-hidden="true" />
              {s.label} {num(s.value)} {unit}
            </li>
          ))}
        </ul>
      </figcaption>
    </figure>
  );
}
