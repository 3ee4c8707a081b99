import { defineConfig } from 'vitest/config';

// Computation tests run once; everything that touches the store runs twice: on a real PostgreSQL
// server (TEST_DATABASE_URL, else the one answering on 127.0.0.1:5432, else a testcontainers
// PostgreSQL, else it falls back to the embedded store and says so loudly) and on the embedded store.
// The summary reporter's last lines name the store each project ran on.
const storeTests = ['test/api/**/*.test.ts', 'test/store/**/*.test.ts', 'test/jobs/**/*.test.ts'];

export default defineConfig({
  test: {
    testTimeout: 60_000,
    hookTimeout: 120_000,
    pool: 'forks',
    reporters: ['default', './test/helpers/summary-reporter.ts'],
    projects: [
      {
        extends: true,
        test: { name: 'compute', include: ['test/*.test.ts', 'test/core/**/*.test.ts', 'test/models/**/*.test.ts', 'test/scenario/**/*.test.ts'] },
      },
      {
        extends: true,
        test: { name: 'postgres', include: storeTests, env: { TEST_STORE: 'postgres' }, globalSetup: ['test/helpers/postgres-setup.ts'] },
      },
      {
        extends: true,
        test: { name: 'embedded', include: storeTests, env: { TEST_STORE: 'embedded' } },
      },
      {
        // The fault harness: the service as a child process on the real PostgreSQL, killed and cut
        // off; skipped with the reason when no server is reachable.
        extends: true,
        test: { name: 'faults', include: ['test/faults/**/*.test.ts'], env: { TEST_STORE: 'postgres' }, globalSetup: ['test/helpers/postgres-setup.ts'], testTimeout: 120_000 },
      },
      {
        extends: true,
        test: { name: 'demo', include: ['test/demo/**/*.test.ts'], env: { TEST_STORE: 'embedded' } },
      },
      {
        extends: true,
        test: { name: 'page', include: ['test/page/**/*.test.ts'], env: { TEST_STORE: 'postgres' }, globalSetup: ['test/helpers/postgres-setup.ts'] },
      },
    ],
  },
});
