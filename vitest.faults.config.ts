import { defineConfig } from 'vitest/config';

/**
 * The fault suite (`npm run test:faults`): real worker processes, a private redis-server, SMTP and webhook
 * receivers, with crashes and outages in between. One file at a time: the scenarios measure timing
 * (backoff, lock expiry) that a second suite competing for the two cores would distort.
 */
export default defineConfig({
  test: {
    include: ['tests/faults/**/*.test.ts'],
    testTimeout: 300_000,
    hookTimeout: 60_000,
    fileParallelism: false,
  },
});
