import { fileURLToPath } from 'node:url';
import { defineConfig } from 'vitest/config';

export default defineConfig({
  root: fileURLToPath(new URL('..', import.meta.url)),
  test: {
    include: ['tests/**/*.test.ts'],
    testTimeout: 30_000,
    hookTimeout: 60_000,
    pool: 'forks',
    globalSetup: ['tests/fixtures/build-once.ts'],
    // expect.poll waits for a condition; its default deadline (1 s) is a machine-speed assumption (a busy
    // machine can take longer to render a page or answer a request). A deadline that is generous but still
    // well inside a test's timeout turns a real hang into a failure naming the condition, not a flake.
    expect: { poll: { timeout: 10_000, interval: 50 } },
  },
});
