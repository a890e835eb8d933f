// Bench dispatcher: `npm run bench -- [names...]` runs the named parts (all when none are named) and prints
// one JSON line per figure. Exit 1 when a figure misses its target, 2 for an unknown part name.
import type { BenchPart } from './figure.js';

/** Bench parts by name: one line each; a part is a module exporting `run(): Promise<BenchFigure[]>`. */
const parts: Record<string, () => Promise<{ run: BenchPart }>> = {
  validator: () => import('./validator.js'),
  history: () => import('./history.js'),
  'history-postgres': () => import('./history-postgres.js'),
  rollout: () => import('./rollout.js'),
  planner: () => import('./planner.js'),
  ingest: () => import('./ingest.js'),
  'ingest-postgres': () => import('./ingest-postgres.js'),
  'pg-statement': () => import('./pg-statement.js'),
  agent: () => import('./agent.js'),
  import: () => import('./import.js'),
  tolerance: () => import('./tolerance.js'),
};

async function main(names: string[]): Promise<number> {
  const unknown = names.filter((n) => !Object.hasOwn(parts, n));
  if (unknown.length > 0) {
    process.stderr.write(`unknown bench part${unknown.length > 1 ? 's' : ''}: ${unknown.join(', ')}; known: ${Object.keys(parts).join(', ')}\n`);
    return 2;
  }
  let allOk = true;
  for (const name of names.length > 0 ? names : Object.keys(parts)) {
    const { run } = await parts[name]!();
    for (const figure of await run()) {
      process.stdout.write(JSON.stringify(figure) + '\n');
      allOk &&= figure.ok;
    }
  }
  return allOk ? 0 : 1;
}

main(process.argv.slice(2)).then(
  (code) => process.stdout.write('', () => process.exit(code)),
  (error: unknown) => {
    process.stderr.write(`bench failed: ${error instanceof Error ? (error.stack ?? error.message) : String(error)}\n`);
    process.exit(1);
  },
);
