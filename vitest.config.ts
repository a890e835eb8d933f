import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/**/*.test.ts'],
    testTimeout: 60_000,
    hookTimeout: 60_000,
    // Tests that start servers, brokers and agent processes share two cores; keep the pool small.
    maxWorkers: 2,
  },
});
