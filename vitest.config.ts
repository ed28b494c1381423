import { defineConfig } from 'vitest/config';

// Two projects: `fast` (pure code, seconds) and `slow` (real broker, Prometheus,
// Alertmanager, Chromium). `npm test` runs both; slow suites run one file at a time
// because they start real servers on a 2-core machine.
export default defineConfig({
  test: {
    projects: [
      {
        test: {
          name: 'fast',
          include: ['tests/**/*.test.ts'],
          exclude: ['tests/**/*.slow.test.ts', 'node_modules/**'],
          testTimeout: 30_000,
        },
      },
      {
        test: {
          name: 'slow',
          include: ['tests/**/*.slow.test.ts'],
          testTimeout: 300_000,
          hookTimeout: 300_000,
          fileParallelism: false,
        },
      },
    ],
  },
});
