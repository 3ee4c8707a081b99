import { randomBytes } from 'node:crypto';
import pg from 'pg';
import { inject } from 'vitest';
import type { Db } from '../../src/store/db.ts';
import { openEmbedded } from '../../src/store/embedded-driver.ts';
import { migrate, readMigrations, type Migration } from '../../src/store/migrate.ts';
import { openPostgres } from '../../src/store/postgres-driver.ts';

export interface TestDb {
  db: Db;
  /** Connection string of this test's own database, when on a server. */
  url: string | null;
  close(): Promise<void>;
}

/**
 * The store this project tests, migrated (by default with every migration; a test of one migration
 * passes the ones before it). On a server each call gets its own fresh database.
 */
export async function openTestDb(migrations: Migration[] = readMigrations()): Promise<TestDb> {
  const serverUrl = process.env.TEST_STORE === 'postgres' ? inject('postgresUrl') : '';
  if (!serverUrl) {
    const db = await openEmbedded(null);
    await migrate(db, migrations);
    return { db, url: null, close: () => db.close() };
  }
  const name = `sft_test_${randomBytes(5).toString('hex')}`;
  const admin = new pg.Client({ connectionString: serverUrl });
  await admin.connect();
  await admin.query(`create database ${name}`);
  await admin.end();
  const url = withDatabase(serverUrl, name);
  const db = openPostgres(url, 5);
  await migrate(db, migrations);
  return {
    db,
    url,
    async close() {
      await db.close();
      const c = new pg.Client({ connectionString: serverUrl });
      await c.connect();
      await c.query(`drop database if exists ${name} with (force)`);
      await c.end();
    },
  };
}

export function withDatabase(url: string, database: string): string {
  const u = new URL(url);
  u.pathname = `/${database}`;
  return u.toString();
}
