// STAND-IN for `v4l2-ctl` (Debian v4l-utils) on machines without a camera. It answers --list-ctrls,
// --list-ctrls-menus, --set-ctrl, --get-ctrl, --set-parm and --get-parm for -d DEVICE in the real
// tool's output format, keeping each device's control values in a state file, as a UVC camera would:
// the V4L2 core clamps integers to [min, max] and rounds them to the step; a control flagged inactive
// (exposure while auto exposure is on, focus while continuous autofocus is on) refuses writes with
// EACCES, as UVC cameras do (from memory); with exposure_dynamic_framerate off, exposure is limited to
// the frame period, as UVC firmware does (from memory).
//
// V4L2_STANDIN_DIR holds devices.json: { "<device>": { "fixture": "<list-ctrls-menus file>",
// "frameRates": [5, 10, 30], "refuse": ["gain"] } } ("refuse": writes fail with EIO), the state files
// and calls.log (one line per invocation). Answers for a missing device and an unknown control are the
// real tool's (checked against v4l2-ctl 1.22.1 here).
'use strict';
const fs = require('node:fs');
const path = require('node:path');

const dir = process.env.V4L2_STANDIN_DIR;
if (!dir) fail('v4l2-ctl stand-in: V4L2_STANDIN_DIR is not set', 1);

function fail(message, code) {
  process.stderr.write(`${message}\n`);
  process.exit(code);
}

function parseFixture(text) {
  const controls = [];
  let cls = 'User Controls';
  for (const line of text.split('\n')) {
    const menu = /^\t+(-?\d+): (.*)$/.exec(line);
    if (menu && controls.length) {
      controls[controls.length - 1].menu.push({ index: Number(menu[1]), name: menu[2] });
      continue;
    }
    const m = /^\s*(\w+) (0x[0-9a-f]{8}) \((\w+)\)\s*: (.*)$/.exec(line);
    if (!m) {
      if (line.trim()) cls = line.trim();
      continue;
    }
    const fields = {};
    for (const kv of m[4].replace(/ \([^)]*\)/, '').split(' ')) {
      const [k, v] = kv.split('=');
      fields[k] = v;
    }
    controls.push({
      name: m[1], id: m[2], type: m[3], cls,
      min: Number(fields.min ?? 0), max: Number(fields.max ?? 1), step: Number(fields.step ?? 1),
      default: Number(fields.default), value: Number(fields.value), menu: [],
    });
  }
  return controls;
}

const args = process.argv.slice(2);
const opts = { device: '/dev/video0', sets: [], gets: [], list: false, menus: false, setParm: null, getParm: false };
const withValue = { '-d': 'device', '--device': 'device', '-c': 'set', '--set-ctrl': 'set', '-C': 'get', '--get-ctrl': 'get', '-p': 'setParm', '--set-parm': 'setParm' };
for (let i = 0; i < args.length; i++) {
  let a = args[i];
  let value;
  const eq = a.indexOf('=');
  if (a.startsWith('--') && eq > 0) (value = a.slice(eq + 1)), (a = a.slice(0, eq));
  else if (/^-[dcCp].+/.test(a)) (value = a.slice(2)), (a = a.slice(0, 2));
  if (a === '-l' || a === '--list-ctrls') opts.list = true;
  else if (a === '-L' || a === '--list-ctrls-menus') (opts.list = true), (opts.menus = true);
  else if (a === '-P' || a === '--get-parm') opts.getParm = true;
  else if (withValue[a]) {
    if (value === undefined) value = args[++i];
    if (value === undefined) fail(`v4l2-ctl: option requires an argument -- '${a}'`, 1);
    const key = withValue[a];
    if (key === 'device') opts.device = value;
    else if (key === 'set') opts.sets.push(...value.split(',').filter(Boolean));
    else if (key === 'get') opts.gets.push(...value.split(',').filter(Boolean));
    else opts.setParm = Number(value);
  } else fail(`v4l2-ctl: unrecognized option '${a}'`, 1);
}

fs.appendFileSync(path.join(dir, 'calls.log'), `${JSON.stringify(args)}\n`);
const devices = JSON.parse(fs.readFileSync(path.join(dir, 'devices.json'), 'utf8'));
const dev = devices[opts.device];
// The real tool says this, on stderr, with exit code 1, when the device node cannot be opened.
if (!dev) fail(`Cannot open device ${opts.device}, exiting.`, 1);
const statePath = path.join(dir, `${opts.device.replace(/[^a-zA-Z0-9]/g, '_')}.state.json`);
const state = fs.existsSync(statePath)
  ? JSON.parse(fs.readFileSync(statePath, 'utf8'))
  : { controls: parseFixture(fs.readFileSync(dev.fixture, 'utf8')), fps: (dev.frameRates ?? [30]).at(-1) };
const byName = new Map(state.controls.map((c) => [c.name, c]));
const valueOf = (name) => byName.get(name)?.value;

function inactive(c) {
  if (c.name === 'exposure_time_absolute') return valueOf('auto_exposure') !== undefined && valueOf('auto_exposure') !== 1;
  if (c.name === 'focus_absolute') return valueOf('focus_automatic_continuous') === 1;
  if (c.name === 'white_balance_temperature') return valueOf('white_balance_automatic') === 1;
  return false;
}

function limitExposure() {
  const e = byName.get('exposure_time_absolute');
  if (!e || valueOf('exposure_dynamic_framerate') === 1) return;
  const periodUnits = Math.floor(10000 / state.fps);
  if (e.value > periodUnits) e.value = Math.max(e.min, periodUnits);
}

function save() {
  fs.writeFileSync(`${statePath}.tmp`, JSON.stringify(state));
  fs.renameSync(`${statePath}.tmp`, statePath);
}

const hex = (id) => `0x${id.slice(2).padStart(8, '0')}`;
function describe(c) {
  const name = c.name.padStart(31);
  let line;
  if (c.type === 'bool') line = `${name} ${hex(c.id)} (bool)   : default=${c.default} value=${c.value}`;
  else if (c.type === 'menu') {
    const item = c.menu.find((m) => m.index === c.value);
    line = `${name} ${hex(c.id)} (menu)   : min=${c.min} max=${c.max} default=${c.default} value=${c.value}${item ? ` (${item.name})` : ''}`;
  } else line = `${name} ${hex(c.id)} (int)    : min=${c.min} max=${c.max} step=${c.step} default=${c.default} value=${c.value}`;
  if (inactive(c)) line += ' flags=inactive';
  return line;
}

// Set phase (the real tool sets controls, then the frame rate, then prints what was asked).
if (opts.sets.length > 0) {
  const wanted = opts.sets.map((s) => {
    const eq = s.indexOf('=');
    const name = eq > 0 ? s.slice(0, eq) : s;
    if (!byName.has(name)) fail(`unknown control '${name}'`, 1);
    return { c: byName.get(name), raw: Number(s.slice(eq + 1)) };
  });
  for (const { c, raw } of wanted) {
    let errno = null;
    if ((dev.refuse ?? []).includes(c.name)) errno = 'Input/output error';
    else if (inactive(c)) errno = 'Permission denied';
    else if (!Number.isInteger(raw)) errno = 'Invalid argument';
    else if (c.type === 'menu' && !c.menu.some((m) => m.index === raw)) errno = 'Invalid argument';
    if (errno) fail(`VIDIOC_S_EXT_CTRLS: failed: ${errno}\nError setting controls: ${errno}`, 255);
  }
  for (const { c, raw } of wanted) {
    if (c.type === 'bool') c.value = raw ? 1 : 0;
    else if (c.type === 'menu') c.value = raw;
    else c.value = Math.min(c.max, Math.max(c.min, c.min + Math.round((raw - c.min) / c.step) * c.step));
  }
  limitExposure();
}
if (opts.setParm !== null) {
  const rates = dev.frameRates ?? [30];
  const nearest = rates.reduce((best, r) => (Math.abs(r - opts.setParm) < Math.abs(best - opts.setParm) ? r : best), rates[0]);
  state.fps = nearest;
  limitExposure();
  process.stdout.write(`Frame rate set to ${nearest.toFixed(3)} fps\n`);
}
if (opts.sets.length > 0 || opts.setParm !== null) save();

// Get phase.
for (const name of opts.gets) {
  if (!byName.has(name)) fail(`unknown control '${name}'`, 1);
  process.stdout.write(`${name}: ${byName.get(name).value}\n`);
}
if (opts.getParm) {
  process.stdout.write(`Streaming Parameters Video Capture:\n\tCapabilities     : timeperframe\n\tFrames per second: ${state.fps.toFixed(3)} (${state.fps}/1)\n\tRead buffers     : 0\n`);
}
if (opts.list) {
  let cls = null;
  for (const c of state.controls) {
    if (c.cls !== cls) (cls = c.cls), process.stdout.write(`\n${cls}\n\n`);
    process.stdout.write(`${describe(c)}\n`);
    if (opts.menus && c.type === 'menu') for (const m of c.menu) process.stdout.write(`\t\t\t\t${m.index}: ${m.name}\n`);
  }
}
