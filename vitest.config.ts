import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts'],
    testTimeout: 60_000,
    pool: 'forks',
    // Process tests run bin/qband.mjs, which runs dist/: build it from the current sources first.
    globalSetup: ['test/support/buildOnce.ts'],
  },
});
