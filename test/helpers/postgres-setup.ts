import type { TestProject } from 'vitest/node';

/**
 * Finds the PostgreSQL server for the 'postgres' project: TEST_DATABASE_URL, else a testcontainers
 * PostgreSQL 16 when a Docker engine answers, else none (tests then use the embedded store and the
 * run says so). With REQUIRE_REAL_POSTGRES=1 (as in CI) falling back is an error.
 */
export default async function setup(project: TestProject) {
  let url = process.env.TEST_DATABASE_URL ?? '';
  let stop: (() => Promise<unknown>) | undefined;
  let source = 'TEST_DATABASE_URL';
  if (!url) {
    try {
      const { PostgreSqlContainer } = await import('@testcontainers/postgresql');
      const container = await new PostgreSqlContainer('postgres:16-alpine').start();
      url = container.getConnectionUri();
      stop = () => container.stop();
      source = 'testcontainers';
    } catch (err) {
      const reason = (err as Error).message.split('\n')[0];
      if (process.env.REQUIRE_REAL_POSTGRES === '1') {
        throw new Error(`REQUIRE_REAL_POSTGRES=1 but no PostgreSQL server: set TEST_DATABASE_URL (${reason})`);
      }
      console.warn(`[store under test] no TEST_DATABASE_URL and no Docker engine (${reason}); the 'postgres' project FALLS BACK to the embedded store`);
      source = 'fallback-embedded';
    }
  }
  if (url) console.log(`[store under test] 'postgres' project uses a real PostgreSQL server (${source})`);
  project.provide('postgresUrl', url);
  return async () => {
    if (stop) await stop();
  };
}

declare module 'vitest' {
  export interface ProvidedContext {
    postgresUrl: string;
  }
}
