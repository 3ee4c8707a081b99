import { readdirSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import type { Db } from './db.ts';

export const migrationsDir = fileURLToPath(new URL('../../migrations/', import.meta.url));

export interface Migration {
  version: number;
  name: string;
  sql: string;
}

export function readMigrations(dir = migrationsDir): Migration[] {
  return readdirSync(dir)
    .filter((f) => /^\d{3,}_[\w-]+\.sql$/.test(f))
    .sort()
    .map((file) => ({
      version: Number(file.slice(0, file.indexOf('_'))),
      name: file,
      sql: readFileSync(`${dir}/${file}`, 'utf8'),
    }));
}

/**
 * Applies the numbered SQL files not yet recorded in schema_migrations, all in one transaction.
 * An advisory lock keeps two instances starting together from applying the same file twice.
 */
export async function migrate(db: Db, migrations = readMigrations()): Promise<string[]> {
  return db.transaction(async (tx) => {
    await tx.query('select pg_advisory_xact_lock(7305001)');
    await tx.query(
      `create table if not exists schema_migrations (
         version integer primary key,
         name text not null,
         applied_at timestamptz not null default now())`,
    );
    const done = new Set(
      (await tx.query<{ version: number }>('select version from schema_migrations')).rows.map((r) => Number(r.version)),
    );
    const applied: string[] = [];
    for (const m of migrations) {
      if (done.has(m.version)) continue;
      for (const statement of splitStatements(m.sql)) await tx.query(statement);
      await tx.query('insert into schema_migrations (version, name) values ($1, $2)', [m.version, m.name]);
      applied.push(m.name);
    }
    return applied;
  });
}

/** Splits a plain SQL file on semicolons at line ends; our migrations keep to that simple form. */
export function splitStatements(sql: string): string[] {
  return sql
    .replace(/--[^\n]*/g, '')
    .split(/;\s*(?:\n|$)/)
    .map((s) => s.trim())
    .filter((s) => s.length > 0);
}
