import { fileURLToPath } from 'node:url';
import { findDocument, loadCatalog } from '../src/document-files/index.js';
import { plan } from '../src/plan/index.js';
import { median } from './figure.js';
import type { BenchFigure } from './figure.js';

const DEMO = fileURLToPath(new URL('../profiles/greenhouse-demo', import.meta.url));
/** The demo's larger device class (8 MiB SRAM, fp16) with every demo model offered: the biggest default grid. */
const TASK_ID = 'fruit-counting';
const DEVICE_CLASS_ID = 'gh-scout-b';
const WARMUP_RUNS = 1;
const MEASURED_RUNS = 5;
const TARGET_PER_S = 100_000;

/**
 * Candidates evaluated per second by whole plan() calls on one core: building the axes and tables, sweeping
 * the grid, and confirming every front member and near miss with validate() are all inside the timing.
 */
export async function run(): Promise<BenchFigure[]> {
  const catalog = await loadCatalog([DEMO]);
  const task = findDocument(catalog, 'task', TASK_ID);
  const deviceClass = findDocument(catalog, 'device-class', DEVICE_CLASS_ID);
  if (!task || !deviceClass) throw new Error(`bench: demo task ${TASK_ID} or device class ${DEVICE_CLASS_ID} not found under ${DEMO}`);
  const candidates = catalog.documents.flatMap((d) => {
    if (d.kind !== 'model') return [];
    const network = findDocument(catalog, 'network', d.value.networkId);
    return network ? [{ model: d.value, network }] : [];
  });
  const rates: number[] = [];
  for (let i = 0; i < WARMUP_RUNS + MEASURED_RUNS; i++) {
    const start = process.hrtime.bigint();
    const result = plan({ task, deviceClass, candidates });
    const seconds = Number(process.hrtime.bigint() - start) / 1e9;
    if (result.evaluated === 0 || result.front.length === 0) throw new Error('bench: the demo plan evaluated nothing or found no front');
    if (i >= WARMUP_RUNS) rates.push(result.evaluated / seconds);
  }
  const value = Math.round(median(rates));
  return [{ name: 'planner', value, unit: 'candidates/s', target: TARGET_PER_S, ratio: Math.round((value / TARGET_PER_S) * 100) / 100, ok: value >= TARGET_PER_S }];
}
