import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['tests/**/*.test.ts'],
    testTimeout: 60_000,
    hookTimeout: 60_000,
    // Integration suites start their own redis-server, SMTP and HTTP peers; two cores are all we have.
    maxWorkers: 2,
  },
});
