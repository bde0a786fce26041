import { configDefaults, defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/**/*.test.ts'],
    // Real processes, crashes and outages: a run of its own (`npm run test:faults`, vitest.faults.config.ts).
    exclude: [...configDefaults.exclude, 'tests/faults/**'],
    // Bounds, not speed claims: a busy two-core machine runs the CPU-bound cases several times slower than a quiet one.
    testTimeout: 300_000,
    hookTimeout: 120_000,
    // Integration suites start their own redis-server, SMTP and HTTP peers; two cores are all we have.
    maxWorkers: 2,
  },
});
