import { defineConfig } from 'vitest/config';

// Unit and property tests (Node). Browser end-to-end tests have their own config.
export default defineConfig({
  test: {
    include: ['tests/**/*.test.ts'],
    exclude: ['tests/e2e/**', 'node_modules/**'],
    environment: 'node',
    testTimeout: 60_000,
  },
});
