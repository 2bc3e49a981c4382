import { defineConfig } from 'vitest/config';

export default defineConfig({
  test: {
    include: ['test/**/*.test.ts', 'core/**/*.test.ts', 'app/**/*.test.ts'],
    testTimeout: 120_000,
    hookTimeout: 120_000,
    // onnxruntime and better-sqlite3 are native: keep each test file in its own process.
    pool: 'forks',
    reporters: ['default', 'json'],
    outputFile: { json: 'test-output/vitest.json' },
  },
});
