import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    projects: [
      {
        test: {
          name: 'unit',
          include: ['test/**/*.test.ts'],
          exclude: ['test/browser/**'],
          environment: 'node',
          testTimeout: 60_000,
        },
      },
      {
        // Node drives Debian's Chromium with Playwright against a production build of the page
        // (test/browser/global-setup.ts). One file at a time, after the unit tests: real-time audio
        // needs the CPU.
        test: {
          name: 'browser',
          include: ['test/browser/**/*.test.ts'],
          environment: 'node',
          globalSetup: ['test/browser/global-setup.ts'],
          fileParallelism: false,
          sequence: { groupOrder: 1 },
          testTimeout: 90_000,
          hookTimeout: 90_000,
        },
      },
    ],
  },
});
