/** A map from data values to pixels, with its inverse and readable tick values. */
export interface Scale {
  (value: number): number;
  invert(px: number): number;
  ticks(count?: number): number[];
  domain: [number, number];
}

function niceStep(span: number, count: number): number {
  const raw = span / Math.max(1, count);
  const mag = 10 ** Math.floor(Math.log10(raw));
  const norm = raw / mag;
  return (norm >= 5 ? 10 : norm >= 2 ? 5 : norm >= 1 ? 2 : 1) * mag;
}

export function linearScale(domain: [number, number], range: [number, number]): Scale {
  const [d0, d1] = domain[0] === domain[1] ? [domain[0], domain[0] + 1] : domain;
  const [r0, r1] = range;
  const s = ((v: number) => r0 + ((v - d0) / (d1 - d0)) * (r1 - r0)) as Scale;
  s.invert = (px) => d0 + ((px - r0) / (r1 - r0)) * (d1 - d0);
  s.ticks = (count = 5) => {
    const step = niceStep(d1 - d0, count);
    const out: number[] = [];
    for (let v = Math.ceil(d0 / step) * step; v <= d1 + step * 1e-9; v += step) out.push(Number(v.toPrecision(12)));
    return out;
  };
  s.domain = [d0, d1];
  return s;
}

/** Logarithmic: for distances, where blur changes with 1/d and ranges span decades. */
export function logScale(domain: [number, number], range: [number, number]): Scale {
  const l0 = Math.log10(domain[0]);
  const l1 = Math.log10(domain[1] === domain[0] ? domain[0] * 10 : domain[1]);
  const [r0, r1] = range;
  const s = ((v: number) => r0 + ((Math.log10(v) - l0) / (l1 - l0)) * (r1 - r0)) as Scale;
  s.invert = (px) => 10 ** (l0 + ((px - r0) / (r1 - r0)) * (l1 - l0));
  s.ticks = () => {
    const out: number[] = [];
    for (let e = Math.floor(l0); e <= Math.ceil(l1); e++) {
      for (const m of [1, 2, 5]) {
        const v = m * 10 ** e;
        if (v >= 10 ** l0 * 0.999 && v <= 10 ** l1 * 1.001) out.push(Number(v.toPrecision(6)));
      }
    }
    return out;
  };
  s.domain = [10 ** l0, 10 ** l1];
  return s;
}

/** Okabe & Ito (2008), "Color Universal Design": eight colours told apart with the common colour-vision deficiencies. */
export const OKABE_ITO = {
  orange: '#E69F00',
  skyBlue: '#56B4E9',
  bluishGreen: '#009E73',
  yellow: '#F0E442',
  blue: '#0072B2',
  vermillion: '#D55E00',
  reddishPurple: '#CC79A7',
  black: '#000000',
} as const;

/** Colours for things in a row (lanes, profiles), in an order that keeps neighbours apart. */
export const SERIES_COLOURS = [OKABE_ITO.blue, OKABE_ITO.orange, OKABE_ITO.bluishGreen, OKABE_ITO.reddishPurple, OKABE_ITO.skyBlue, OKABE_ITO.vermillion, OKABE_ITO.yellow];

/**
 * A profile's colour, the same on every page: picked from SERIES_COLOURS by a hash of its id (FNV-1a, 32 bit),
 * not by its place in a list that changes with what a page shows.
 */
export function colourForId(id: string): string {
  let h = 0x811c9dc5;
  for (let i = 0; i < id.length; i++) {
    h ^= id.charCodeAt(i);
    h = Math.imul(h, 0x01000193) >>> 0;
  }
  return SERIES_COLOURS[h % SERIES_COLOURS.length]!;
}
