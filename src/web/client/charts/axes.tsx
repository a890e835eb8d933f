import type { ComponentChildren } from 'preact';
import { num } from '../format.js';
import type { Scale } from './scale.js';

/** A plot's drawing area: the SVG's width and height and the margins around the axes, in SVG units. */
export interface PlotFrame {
  W: number;
  H: number;
  M: { left: number; right: number; top: number; bottom: number };
}

interface Props {
  frame: PlotFrame;
  x: Scale;
  y: Scale;
  xTicks: number[];
  yTicks: number[];
  /** The axis titles; each names its unit. */
  xTitle: ComponentChildren;
  yTitle: ComponentChildren;
  /** Where the rotated y title sits from the SVG's left edge. */
  yTitleX?: number;
}

/** Horizontal gridlines across the plot, each with its y value at the left. */
export function YGrid({ frame: { W, M }, y, ticks }: { frame: PlotFrame; y: Scale; ticks: number[] }) {
  return (
    <>
      {ticks.map((t) => (
        <g>
          <line x1={M.left} x2={W - M.right} y1={y(t)} y2={y(t)} class="gridline" />
          <text x={M.left - 6} y={y(t) + 4} text-anchor="end" class="tick">
            {num(t)}
          </text>
        </g>
      ))}
    </>
  );
}

/** Horizontal gridlines with the y values, x ticks with their values, both axis lines and their titles. */
export function PlotAxes({ frame, x, y, xTicks, yTicks, xTitle, yTitle, yTitleX = 14 }: Props) {
  const { W, H, M } = frame;
  const midY = (M.top + H - M.bottom) / 2;
  return (
    <>
      <YGrid frame={frame} y={y} ticks={yTicks} />
      {xTicks.map((t) => (
        <g>
          <line x1={x(t)} x2={x(t)} y1={H - M.bottom} y2={H - M.bottom + 4} class="axis" />
          <text x={x(t)} y={H - M.bottom + 16} text-anchor="middle" class="tick">
            {num(t)}
          </text>
        </g>
      ))}
      <line x1={M.left} x2={W - M.right} y1={H - M.bottom} y2={H - M.bottom} class="axis" />
      <line x1={M.left} x2={M.left} y1={M.top} y2={H - M.bottom} class="axis" />
      <text x={(M.left + W - M.right) / 2} y={H - 6} text-anchor="middle" class="axis-title">
        {xTitle}
      </text>
      <text x={yTitleX} y={midY} text-anchor="middle" class="axis-title" transform={`rotate(-90 ${yTitleX} ${midY})`}>
        {yTitle}
      </text>
    </>
  );
}
