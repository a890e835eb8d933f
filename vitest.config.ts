import { connect } from 'node:net';
import { defineConfig, type TestProjectInlineConfiguration } from 'vitest/config';

/** True when something listens on the port within a second (the machine's PostgreSQL, for the second backend). */
function listening(host: string, port: number): Promise<boolean> {
  return new Promise((resolve) => {
    const socket = connect({ host, port });
    const done = (up: boolean) => {
      socket.destroy();
      resolve(up);
    };
    socket.setTimeout(1000, () => done(false));
    socket.once('connect', () => done(true));
    socket.once('error', () => done(false));
  });
}

// The store and API suites run once per store backend: SQLite (every test) and PostgreSQL (tests/store, tests/api).
const BOTH_BACKENDS = ['tests/store/**/*.test.ts', 'tests/api/**/*.test.ts', 'tests/bus/event-writer.test.ts', 'tests/cli/database-flag.test.ts', 'tests/fleet/event-range.test.ts'];

const postgresUp = await listening('127.0.0.1', 5432);
if (!postgresUp) {
  console.warn('vitest: PostgreSQL is not listening on 127.0.0.1:5432, so the PostgreSQL runs of tests/store and tests/api are skipped (start it with .ci/run or pg_ctlcluster)');
}
const projects: TestProjectInlineConfiguration[] = [{ extends: true, test: { name: 'sqlite', include: ['tests/**/*.test.ts'] } }];
if (postgresUp) projects.push({ extends: true, test: { name: 'postgres', include: BOTH_BACKENDS, env: { OCELLUS_TEST_BACKEND: 'postgres' } } });

export default defineConfig({
  test: {
    testTimeout: 60_000,
    hookTimeout: 60_000,
    // Tests that start servers, brokers and agent processes share two cores; keep the pool small.
    maxWorkers: 2,
    projects,
  },
});
