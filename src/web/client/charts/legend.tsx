import type { ComponentChildren } from 'preact';

/** How one curve of a plot is drawn, and what its legend calls it. */
export interface SeriesStyle<K extends string> {
  key: K;
  label: string;
  color: string;
  width: number;
  dash?: string;
}

/** A short stretch of a line as drawn in the plot, for the legend. */
export function LineSwatch({ color, width, dash }: { color: string; width: number; dash?: string | undefined }) {
  return (
    <svg width="28" height="8" aria-hidden="true">
      <line x1="0" x2="28" y1="4" y2="4" stroke={color} stroke-width={width} stroke-dasharray={dash} />
    </svg>
  );
}

/** The curves of a plot, the first listed drawn last (on top). */
export function SeriesPaths<K extends string>({ series, pathOf }: { series: ReadonlyArray<SeriesStyle<K>>; pathOf: (key: K) => string }) {
  return (
    <>
      {[...series].reverse().map((s) => (
        <path d={pathOf(s.key)} fill="none" stroke={s.color} stroke-width={s.width} stroke-dasharray={s.dash} data-series={s.key} />
      ))}
    </>
  );
}

/** The legend under a plot: one entry per curve, then the plot's own marks (`children`, as `<li>`s). */
export function SeriesLegend<K extends string>({ series, children }: { series: ReadonlyArray<SeriesStyle<K>>; children?: ComponentChildren }) {
  return (
    <ul class="legend">
      {series.map((s) => (
        <li>
          <LineSwatch color={s.color} width={s.width} dash={s.dash} /> {s.label}
        </li>
      ))}
      {children}
    </ul>
  );
}
