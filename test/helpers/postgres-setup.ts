import pg from 'pg';
import type { TestProject } from 'vitest/node';
import { storeEnvKey } from './store-env.ts';

/** The server a plain `npm test` looks for when TEST_DATABASE_URL is unset (trust auth, as in CI). */
export const LOCAL_SERVER_URL = 'postgres://postgres@127.0.0.1:5432/postgres';

/** Same major version as CI's server (`pg_lsclusters`: 15) and docker-compose.yml. */
const CONTAINER_IMAGE = 'postgres:15-alpine';

/**
 * Finds the PostgreSQL server for a project that tests on one ('postgres', 'page'), in this order:
 * TEST_DATABASE_URL; a server answering on 127.0.0.1:5432 (probed for about a second); a
 * testcontainers PostgreSQL when a Docker engine answers; else none, and the project's tests use the
 * embedded store and the run says so loudly. With REQUIRE_REAL_POSTGRES=1 (as in CI) falling back is
 * an error. What was found is left in the environment for the summary reporter, whose last lines
 * name the store each project tested (test/helpers/summary-reporter.ts).
 */
export default async function setup(project: TestProject) {
  let url = process.env.TEST_DATABASE_URL ?? '';
  let stop: (() => Promise<unknown>) | undefined;
  let source = 'TEST_DATABASE_URL';
  if (!url && (await answers(LOCAL_SERVER_URL))) {
    url = LOCAL_SERVER_URL;
    source = 'found answering on 127.0.0.1:5432';
  }
  if (!url) {
    try {
      const { PostgreSqlContainer } = await import('@testcontainers/postgresql');
      const container = await new PostgreSqlContainer(CONTAINER_IMAGE).start();
      url = container.getConnectionUri();
      stop = () => container.stop();
      source = `testcontainers ${CONTAINER_IMAGE}`;
    } catch (err) {
      const reason = (err as Error).message.split('\n')[0];
      if (process.env.REQUIRE_REAL_POSTGRES === '1') {
        throw new Error(`REQUIRE_REAL_POSTGRES=1 but no PostgreSQL server: set TEST_DATABASE_URL (${reason})`);
      }
      const notice = `no TEST_DATABASE_URL, nothing on 127.0.0.1:5432 and no Docker engine (${reason})`;
      console.warn(`\n${'!'.repeat(100)}\n[store under test] '${project.name}' project: ${notice};\n` +
        `its tests FALL BACK to the embedded store, so NO PostgreSQL server is tested.\n${'!'.repeat(100)}\n`);
      process.env[storeEnvKey(project.name)] = `FELL BACK to the embedded store (${notice}): no PostgreSQL server was tested`;
    }
  }
  if (url) {
    const version = await serverVersion(url);
    const where = describe(url);
    console.log(`[store under test] '${project.name}' project uses PostgreSQL ${version} at ${where} (${source})`);
    process.env[storeEnvKey(project.name)] = `PostgreSQL ${version} server at ${where} (${source})`;
  }
  project.provide('postgresUrl', url);
  return async () => {
    if (stop) await stop();
  };
}

async function answers(url: string): Promise<boolean> {
  const client = new pg.Client({ connectionString: url, connectionTimeoutMillis: 1200 });
  client.on('error', () => {});
  try {
    await client.connect();
    await client.query('select 1');
    return true;
  } catch {
    return false;
  } finally {
    await client.end().catch(() => {});
  }
}

async function serverVersion(url: string): Promise<string> {
  const client = new pg.Client({ connectionString: url, connectionTimeoutMillis: 5000 });
  client.on('error', () => {});
  try {
    await client.connect();
    const { rows } = await client.query<{ server_version: string }>('show server_version');
    return rows[0].server_version.split(' ')[0];
  } catch {
    return '(version unknown)';
  } finally {
    await client.end().catch(() => {});
  }
}

/** host:port/database, without credentials. */
function describe(url: string): string {
  const u = new URL(url);
  return `${u.hostname}:${u.port || 5432}${u.pathname}`;
}

declare module 'vitest' {
  export interface ProvidedContext {
    postgresUrl: string;
  }
}
