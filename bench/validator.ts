import { fileURLToPath } from 'node:url';
import { loadCatalog, profilesOf, resolveProfile } from '../src/document-files/index.js';
import { validate } from '../src/validate/index.js';
import { median } from './figure.js';
import type { BenchFigure } from './figure.js';

const DEMO = fileURLToPath(new URL('../profiles/greenhouse-demo', import.meta.url));
/** A demo profile whose model runs MobileNetV1 1.0-224, the heaviest network of the demo. */
const PROFILE_ID = 'row-navigation-b';
const WARMUP_RUNS = 500;
const MEASURED_RUNS = 3000;
const TARGET_US = 200;

/** Median time to validate one profile (MobileNetV1 1.0-224) after warm-up, network and roofline costs cached. */
export async function run(): Promise<BenchFigure[]> {
  const catalog = await loadCatalog([DEMO]);
  const found = profilesOf(catalog).find((p) => p.profile.id === PROFILE_ID);
  if (!found) throw new Error(`bench: demo profile ${PROFILE_ID} not found under ${DEMO}`);
  const resolved = resolveProfile(catalog, found.profile, found.file);
  if (!resolved.ok) throw new Error(`bench: ${resolved.issues.map((i) => i.message).join('; ')}`);
  const input = resolved.value;
  for (let i = 0; i < WARMUP_RUNS; i++) validate(input);
  const timesUs: number[] = [];
  let sink = 0;
  for (let i = 0; i < MEASURED_RUNS; i++) {
    const start = process.hrtime.bigint();
    sink += validate(input).checks.length;
    timesUs.push(Number(process.hrtime.bigint() - start) / 1000);
  }
  if (sink === 0) throw new Error('bench: validator returned no checks');
  const value = Math.round(median(timesUs) * 10) / 10;
  return [{ name: 'validator-profile', value, unit: 'us', target: TARGET_US, ratio: Math.round((value / TARGET_US) * 1000) / 1000, ok: value < TARGET_US }];
}
