/**
 * Reading what `v4l2-ctl` (Debian v4l-utils) prints. Line formats follow the tool's printf formats
 * (v4l-utils 1.22, v4l2-ctl-common.cpp): `%31s %#8.8x (int)    : min=%lld max=%lld step=%lld default=%lld`
 * then ` value=%d` and ` flags=%s`; menu items as tab-indented `%d: %s`; `--get-ctrl` as `%s: %d`.
 */

export interface V4l2Control {
  name: string;
  type: string;
  min: number;
  max: number;
  step: number;
  defaultValue: number;
  value: number;
  flags: string[];
  menu: Array<{ index: number; name: string }>;
}

/** Parses `--list-ctrls` or `--list-ctrls-menus` output; lines it does not know (class headings) are skipped. */
export function parseControlList(text: string): Map<string, V4l2Control> {
  const controls = new Map<string, V4l2Control>();
  let last: V4l2Control | null = null;
  for (const line of text.split('\n')) {
    const item = /^\t+(-?\d+): (.*)$/.exec(line);
    if (item && last) {
      last.menu.push({ index: Number(item[1]), name: item[2]!.trim() });
      continue;
    }
    const m = /^\s*(\w+) 0x[0-9a-f]+ \((\w+)\)\s*:(.*)$/.exec(line);
    if (!m) continue;
    const fields = new Map<string, string>();
    // Drop the menu item name after value=N, e.g. "value=3 (Aperture Priority Mode)".
    for (const kv of m[3]!.replace(/\([^)]*\)/g, '').trim().split(/\s+/)) {
      const eq = kv.indexOf('=');
      if (eq > 0) fields.set(kv.slice(0, eq), kv.slice(eq + 1));
    }
    const num = (k: string, fallback: number) => (fields.has(k) ? Number(fields.get(k)) : fallback);
    last = {
      name: m[1]!, type: m[2]!,
      min: num('min', 0), max: num('max', m[2] === 'bool' ? 1 : 0), step: num('step', 1),
      defaultValue: num('default', 0), value: num('value', 0),
      flags: fields.get('flags')?.split(',').filter(Boolean) ?? [],
      menu: [],
    };
    controls.set(last.name, last);
  }
  return controls;
}

/** Parses `--get-ctrl` output: `name: value` per line. */
export function parseGetControls(text: string): Map<string, number> {
  const values = new Map<string, number>();
  for (const line of text.split('\n')) {
    const m = /^(\w+): (-?\d+)\s*$/.exec(line);
    if (m) values.set(m[1]!, Number(m[2]));
  }
  return values;
}

/** Frame rate from `--get-parm` (`Frames per second: 30.000 (30/1)`) or `--set-parm` (`Frame rate set to 30.000 fps`); null when absent. */
export function parseFrameRate(text: string): { fps: number; settable: boolean } | null {
  const settable = /Capabilities\s*:.*timeperframe/.test(text) || /Frame rate set to/.test(text);
  const m = /Frames per second: ([\d.]+)/.exec(text) ?? /Frame rate set to ([\d.]+) fps/.exec(text);
  return m ? { fps: Number(m[1]), settable } : null;
}
