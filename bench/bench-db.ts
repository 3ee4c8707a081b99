/**
 * Benches measure on a fresh database: a server's shared database carries other runs' dead rows,
 * which slow writes down and make figures depend on history. With a server URL this creates its
 * own database beside the named one and drops it at the end; without one it opens the embedded store.
 */
import { mkdtempSync, readFileSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import pg from 'pg';
import type { Db } from '../src/store/db.ts';
import { migrate } from '../src/store/migrate.ts';
import { openDb } from '../src/store/open.ts';

export interface BenchDb {
  db: Db;
  /** The fresh database's connection string (server only). */
  url: string | null;
  dataDir: string;
  drop(): Promise<void>;
}

export async function openBenchDb(serverUrl: string | undefined, label: string): Promise<BenchDb> {
  const dataDir = mkdtempSync(join(tmpdir(), `sft-bench-${label}-`));
  if (!serverUrl) {
    const db = await openDb({ dataDir });
    await migrate(db);
    return { db, url: null, dataDir, drop: async () => { await db.close(); rmSync(dataDir, { recursive: true, force: true }); } };
  }
  const name = `sft_bench_${label.replace(/\W/g, '_')}_${process.pid}`;
  await admin(serverUrl, `create database ${name}`);
  const u = new URL(serverUrl);
  u.pathname = `/${name}`;
  const url = u.toString();
  const db = await openDb({ databaseUrl: url, dataDir });
  await migrate(db);
  return {
    db,
    url,
    dataDir,
    async drop() {
      await db.close();
      await admin(serverUrl, `drop database if exists ${name} with (force)`);
      rmSync(dataDir, { recursive: true, force: true });
    },
  };
}

async function admin(url: string, sql: string): Promise<void> {
  const c = new pg.Client({ connectionString: url });
  await c.connect();
  try {
    await c.query(sql);
  } finally {
    await c.end();
  }
}

/** The 1-, 5- and 15-minute load averages: other agents share the machine's cores. */
export function loadavg(): string {
  try {
    return readFileSync('/proc/loadavg', 'utf8').split(' ').slice(0, 3).join(' ');
  } catch {
    return 'n/a';
  }
}
