import { useRef, useState } from 'preact/hooks';
import type { HistoryInterval } from '../../../api-client/response-types.js';
import { clockTime, dateTime, duration } from '../format.js';
import { colourForId, linearScale } from './scale.js';
import { timeTicks } from './time-axis.js';

export interface TimelineMark {
  atMs: number;
  label: string;
  kind: 'ok' | 'warn' | 'fail' | 'info';
}

interface Props {
  intervals: HistoryInterval[];
  marks: TimelineMark[];
  fromMs: number;
  toMs: number;
  nowMs: number;
  /** Drag across the plot to zoom to that stretch. */
  onSelect(fromMs: number, toMs: number): void;
}

const W = 1000;
const LANE_H = 30;
const M = { left: 130, right: 30, top: 8, bottom: 26 };
const MARK_LANE_H = 22;
const MARK_COLOURS = { ok: '#009E73', warn: '#E69F00', fail: '#D55E00', info: '#0072B2' } as const;
const MARK_ICONS = { ok: '✓', warn: '!', fail: '✕', info: '•' } as const;

const SWITCH_REASONS: Record<string, string> = {
  local: 'asked on the robot',
  command: 'by an operator command',
  startup: 'at agent start',
  restore: 'restored after a failed switch',
};

const OFFLINE_REASONS: Record<string, string> = {
  'last-will': 'connection lost (the broker published its last will)',
  'clean-disconnect': 'the agent shut down',
  'keepalive-missed': 'nothing heard within 1.5 × its keep-alive',
  'found-offline': 'found offline when the server started',
};

const OFFLINE_LANE = 'offline';

/** One keyboard stop for the whole chart: arrow keys move between its items in time order. */
function nextIndex(key: string, at: number, count: number): number | null {
  if (key === 'ArrowRight' || key === 'ArrowDown') return Math.min(count - 1, at + 1);
  if (key === 'ArrowLeft' || key === 'ArrowUp') return Math.max(0, at - 1);
  if (key === 'Home') return 0;
  if (key === 'End') return count - 1;
  return null;
}

/** Light colours get dark text; the rest white (Okabe–Ito yellow, sky blue and orange are light). */
function textOn(colour: string): string {
  return ['#F0E442', '#56B4E9', '#E69F00'].includes(colour) ? '#1d2327' : '#ffffff';
}

/**
 * The profiles a device ran, one lane per task: each bar a stretch on one profile revision, coloured by
 * profile (the same colour on every page) and labelled when wide enough; stretches the robot reported
 * after the fact are hatched, time offline sits on its own lane. The chart is one Tab stop: arrow keys,
 * Home and End move between bars and event marks in time order; hover or focus shows the details.
 */
export function Timeline({ intervals, marks, fromMs, toMs, nowMs, onSelect }: Props) {
  const tasks = [...new Set(intervals.filter((i) => i.kind === 'profile').map((i) => i.task ?? ''))].sort();
  if (intervals.some((i) => i.kind === 'offline')) tasks.push(OFFLINE_LANE);
  const profiles = [...new Set(intervals.filter((i) => i.kind === 'profile').map((i) => `${i.profileId}`))].sort();
  const [focusAt, setFocusAt] = useState(0);
  const lanesH = Math.max(1, tasks.length) * LANE_H;
  const H = M.top + lanesH + MARK_LANE_H + M.bottom;
  const x = linearScale([fromMs, toMs], [M.left, W - M.right]);
  const { ticks, stepMs } = timeTicks(fromMs, toMs);
  const [hover, setHover] = useState<{ text: string[]; xPct: number; yPx: number } | null>(null);
  /** SVG units to CSS pixels below the top of the timeline box (the SVG is scaled to the box's width). */
  const toBoxPx = (ySvg: number) => {
    const svg = svgRef.current;
    if (!svg?.parentElement) return ySvg;
    const box = svg.getBoundingClientRect();
    return box.top - svg.parentElement.getBoundingClientRect().top + (ySvg * box.height) / H;
  };
  const [drag, setDrag] = useState<{ x0: number; x1: number } | null>(null);
  const svgRef = useRef<SVGSVGElement>(null);

  function svgX(clientX: number): number {
    const r = svgRef.current!.getBoundingClientRect();
    return ((clientX - r.left) / r.width) * W;
  }

  const clamp = (px: number) => Math.min(W - M.right, Math.max(M.left, px));
  const visible = intervals
    .map((iv) => ({ iv, s: Math.max(fromMs, Date.parse(iv.start)), e: Math.min(toMs, iv.end === null ? nowMs : Date.parse(iv.end)) }))
    .filter((v) => v.e > v.s)
    .sort((a, b) => a.s - b.s);
  const shownMarks = marks.filter((m) => m.atMs >= fromMs && m.atMs <= toMs).sort((a, b) => a.atMs - b.atMs);
  const itemCount = visible.length + shownMarks.length;
  const current = Math.min(focusAt, Math.max(0, itemCount - 1));
  function onKeyDown(e: KeyboardEvent) {
    const to = nextIndex(e.key, current, itemCount);
    if (to === null || itemCount === 0) return;
    e.preventDefault();
    setFocusAt(to);
    (svgRef.current?.querySelector(`[data-item="${to}"]`) as SVGGElement | null)?.focus();
  }
  const offlineCount = intervals.filter((i) => i.kind === 'offline').length;
  const summary = `${intervals.length - offlineCount} profile interval${intervals.length - offlineCount === 1 ? '' : 's'}${offlineCount ? ` and ${offlineCount} offline` : ''} on ${tasks.length} lane${tasks.length === 1 ? '' : 's'} between ${dateTime(new Date(fromMs).toISOString())} and ${dateTime(new Date(toMs).toISOString())}.`;

  return (
    <div class="timeline">
      <svg
        ref={svgRef}
        viewBox={`0 0 ${W} ${H}`}
        class="chart-svg timeline-svg"
        role="group"
        aria-label={summary}
        onKeyDown={onKeyDown}
        onPointerDown={(e) => {
          if ((e.target as Element).closest('[data-interval]')) return;
          const px = clamp(svgX(e.clientX));
          setDrag({ x0: px, x1: px });
          (e.currentTarget as Element).setPointerCapture(e.pointerId);
        }}
        onPointerMove={(e) => drag && setDrag({ ...drag, x1: clamp(svgX(e.clientX)) })}
        onPointerUp={() => {
          if (drag && Math.abs(drag.x1 - drag.x0) > 6) {
            const a = x.invert(Math.min(drag.x0, drag.x1));
            const b = x.invert(Math.max(drag.x0, drag.x1));
            onSelect(Math.round(a), Math.round(b));
          }
          setDrag(null);
        }}
      >
        <defs>
          <pattern id="hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)">
            <line x1="0" y1="0" x2="0" y2="6" stroke="#ffffff" stroke-width="2" stroke-opacity="0.7" />
          </pattern>
        </defs>
        {ticks.map((t) => (
          <g>
            <line x1={x(t)} x2={x(t)} y1={M.top} y2={M.top + lanesH + MARK_LANE_H} class="gridline" />
            <text x={x(t)} y={H - 8} text-anchor="middle" class="tick">
              {clockTime(t, stepMs < 60_000 * 5)}
            </text>
          </g>
        ))}
        {tasks.map((task, lane) => (
          <g>
            <rect x={M.left} y={M.top + lane * LANE_H} width={W - M.left - M.right} height={LANE_H} class={lane % 2 ? 'lane-odd' : 'lane-even'} />
            <text x={M.left - 8} y={M.top + lane * LANE_H + LANE_H / 2 + 4} text-anchor="end" class="lane-label">
              {task}
            </text>
          </g>
        ))}
        {tasks.length === 0 && (
          <text x={(M.left + W) / 2} y={M.top + LANE_H / 2 + 4} text-anchor="middle" class="tick">
            no profile ran in this window
          </text>
        )}
        <text x={M.left - 8} y={M.top + lanesH + MARK_LANE_H / 2 + 4} text-anchor="end" class="lane-label">
          events
        </text>
        {visible.map(({ iv, s, e }, k) => {
          const offline = iv.kind === 'offline';
          const lane = tasks.indexOf(offline ? OFFLINE_LANE : (iv.task ?? ''));
          const x0 = x(s);
          const w = Math.max(2, x(e) - x0);
          const fill = offline ? '#6b7280' : colourForId(iv.profileId ?? '');
          const late = iv.reported === 'after-the-fact';
          const label = offline ? 'offline' : `${iv.profileId} r${iv.profileRevision}`;
          const span = `${dateTime(iv.start)} → ${iv.end ? dateTime(iv.end) : offline ? 'still offline' : 'still running'} (${duration(e - Date.parse(iv.start))})`;
          const text = offline
            ? [
                'offline: task unknown',
                span,
                `why: ${OFFLINE_REASONS[iv.reason] ?? iv.reason}`,
                `last known task ${iv.lastKnownTask ?? 'none'}, release ${iv.releaseId ?? 'none'}`,
              ]
            : [
                `${iv.task}: ${iv.profileId} revision ${iv.profileRevision}`,
                `release ${iv.releaseId}`,
                span,
                iv.reason === 'release'
                  ? `switched by a new release${iv.cause?.rolloutId ? ` (rollout ${iv.cause.rolloutId})` : ''}${iv.cause?.actor ? `, assigned by ${iv.cause.actor}` : ''}`
                  : `switched: ${SWITCH_REASONS[iv.reason] ?? iv.reason}`,
                ...(late ? ['reported after the fact: the robot was offline and sent this later (its own clock)'] : []),
              ];
          const show = () => setHover({ text, xPct: ((x0 + w / 2) / W) * 100, yPx: toBoxPx(M.top + lane * LANE_H) });
          return (
            <g
              data-interval={offline ? 'offline' : `${iv.task}|${iv.profileId}|${iv.profileRevision}|${iv.releaseId}`}
              data-kind={iv.kind}
              data-reported={iv.reported}
              data-start={iv.start}
              data-end={iv.end ?? ''}
              {...(iv.seq !== null ? { 'data-seq': iv.seq } : {})}
              data-item={k}
              tabindex={k === current ? 0 : -1}
              role="img"
              aria-label={text.join('; ')}
              class={`interval${late ? ' interval-late' : ''}${offline ? ' interval-offline' : ''}`}
              onPointerEnter={show}
              onPointerLeave={() => setHover(null)}
              onFocus={() => (setFocusAt(k), show())}
              onBlur={() => setHover(null)}
            >
              <rect x={x0} y={M.top + lane * LANE_H + 3} width={w} height={LANE_H - 6} rx={3} fill={fill} fill-opacity={late ? 0.55 : 1} />
              {(late || offline) && <rect x={x0} y={M.top + lane * LANE_H + 3} width={w} height={LANE_H - 6} rx={3} fill="url(#hatch)" />}
              {w > label.length * 7 + 8 && (
                <text x={x0 + 5} y={M.top + lane * LANE_H + LANE_H / 2 + 4} class="interval-label" fill={late ? '#1d2327' : textOn(fill)}>
                  {label}
                </text>
              )}
            </g>
          );
        })}
        {shownMarks.map((m, j) => {
            const k = visible.length + j;
            const cx = x(m.atMs);
            const cy = M.top + lanesH + MARK_LANE_H / 2;
            const text = [`${m.label}`, dateTime(new Date(m.atMs).toISOString())];
            const show = () => setHover({ text, xPct: (cx / W) * 100, yPx: toBoxPx(cy - 8) });
            return (
              <g
                data-item={k}
                tabindex={k === current ? 0 : -1}
                role="img"
                aria-label={text.join(', ')}
                class="mark"
                onPointerEnter={show}
                onPointerLeave={() => setHover(null)}
                onFocus={() => (setFocusAt(k), show())}
                onBlur={() => setHover(null)}
              >
                <circle cx={cx} cy={cy} r={7} fill={MARK_COLOURS[m.kind]} />
                <text x={cx} y={cy + 4} text-anchor="middle" class="mark-icon">
                  {MARK_ICONS[m.kind]}
                </text>
              </g>
            );
          })}
        {drag && <rect x={Math.min(drag.x0, drag.x1)} y={M.top} width={Math.abs(drag.x1 - drag.x0)} height={lanesH + MARK_LANE_H} class="selection" />}
      </svg>
      {hover && (
        <div class="tooltip" role="tooltip" style={{ left: `${Math.min(80, Math.max(10, hover.xPct))}%`, top: `${hover.yPx}px` }}>
          {hover.text.map((t, i) => (i === 0 ? <strong>{t}</strong> : <div>{t}</div>))}
        </div>
      )}
      <ul class="legend">
        {profiles.map((p) => (
          <li>
            <span class="swatch" style={{ background: colourForId(p) }} aria-hidden="true" />
            {p}
          </li>
        ))}
        {intervals.some((i) => i.reported === 'after-the-fact') && (
          <li>
            <span class="swatch swatch-late" aria-hidden="true" /> hatched: reported after the fact (robot's clock)
          </li>
        )}
        {offlineCount > 0 && (
          <li>
            <span class="swatch swatch-offline" aria-hidden="true" /> offline: task unknown
          </li>
        )}
      </ul>
    </div>
  );
}
