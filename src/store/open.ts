import { join } from 'node:path';
import type { Db } from './db.ts';
import { openEmbedded } from './embedded-driver.ts';
import { openPostgres } from './postgres-driver.ts';

/** A PostgreSQL server when a connection string is given, else the embedded store under dataDir. */
export async function openDb(options: { databaseUrl?: string; dataDir: string; onConnectionError?: (err: Error) => void }): Promise<Db> {
  if (options.databaseUrl) {
    const db = openPostgres(options.databaseUrl, 10, options.onConnectionError);
    await db.query('select 1');
    return db;
  }
  return openEmbedded(join(options.dataDir, 'embedded'));
}
