import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { DataDirLockedError, openEmbedded } from '../../src/store/embedded-driver.ts';
import { migrate, readMigrations, splitStatements } from '../../src/store/migrate.ts';
import { openTestDb } from '../helpers/test-db.ts';

const dirs: string[] = [];
const tempDir = () => {
  const d = mkdtempSync(join(tmpdir(), 'sft-embedded-'));
  dirs.push(d);
  return d;
};
afterAll(() => dirs.forEach((d) => rmSync(d, { recursive: true, force: true })));

describe('store (both drivers)', () => {
  it('rolls a failed transaction back completely', async () => {
    const { db, close } = await openTestDb();
    await expect(
      db.transaction(async (tx) => {
        await tx.query(`insert into gauges (id, name, catchment_area_km2, time_step, step_seconds, time_zone, flow_unit) values ('a','A',1,'P1D',86400,'UTC','m3/s')`);
        throw new Error('boom');
      }),
    ).rejects.toThrow('boom');
    expect((await db.query('select * from gauges')).rows).toHaveLength(0);
    await close();
  });

  it('applies migrations once and records them', async () => {
    const { db, close } = await openTestDb();
    expect(await migrate(db)).toEqual([]);
    const { rows } = await db.query<{ name: string }>('select name from schema_migrations order by version');
    expect(rows.map((r) => r.name)).toEqual(readMigrations().map((m) => m.name));
    await close();
  });

  it('delivers NOTIFY payloads to listeners', async () => {
    const { db, close } = await openTestDb();
    const got: string[] = [];
    const stop = await db.listen('sft_test_channel', (p) => got.push(p));
    await db.query("select pg_notify('sft_test_channel', 'hello')");
    for (let i = 0; i < 50 && !got.length; i++) await new Promise((r) => setTimeout(r, 20));
    expect(got).toEqual(['hello']);
    await stop();
    await close();
  });
});

// Driver-specific: run once, in the embedded project.
describe.skipIf(process.env.TEST_STORE === 'postgres')('embedded driver', () => {
  it('serialises concurrent use and keeps transactions apart from outside queries', async () => {
    const db = await openEmbedded(null);
    await migrate(db);
    const insert = (id: string) =>
      db.query(`insert into gauges (id, name, catchment_area_km2, time_step, step_seconds, time_zone, flow_unit) values ($1,'x',1,'P1D',86400,'UTC','m3/s')`, [id]);
    const tx = db.transaction(async (t) => {
      await t.query(`insert into gauges (id, name, catchment_area_km2, time_step, step_seconds, time_zone, flow_unit) values ('in-tx','x',1,'P1D',86400,'UTC','m3/s')`);
      await new Promise((r) => setTimeout(r, 50));
      return (await t.query<{ n: number }>('select count(*)::int as n from gauges')).rows[0].n;
    });
    const outside = Promise.all([insert('o1'), insert('o2')]);
    const [inside] = await Promise.all([tx, outside]);
    expect(Number(inside)).toBe(1); // the outside inserts waited for the transaction
    expect((await db.query('select id from gauges order by id')).rows).toHaveLength(3);
    await db.close();
  });

  it('keeps data in its directory across reopen', async () => {
    const dir = tempDir();
    const a = await openEmbedded(dir);
    await migrate(a);
    await a.query(`insert into gauges (id, name, catchment_area_km2, time_step, step_seconds, time_zone, flow_unit) values ('kept','x',1,'P1D',86400,'UTC','m3/s')`);
    await a.close();
    const b = await openEmbedded(dir);
    expect((await b.query('select id from gauges')).rows).toEqual([{ id: 'kept' }]);
    await b.close();
  });

  it('refuses a second process on the same data directory with a clear message', async () => {
    const dir = tempDir();
    const db = await openEmbedded(dir);
    const script = join(dir, 'second.mts');
    writeFileSync(
      script,
      `import { openEmbedded } from ${JSON.stringify(join(process.cwd(), 'src/store/embedded-driver.ts'))};
       try { await openEmbedded(${JSON.stringify(dir)}); console.log('opened'); } catch (e) { console.log('refused: ' + e.message); process.exit(3); }`,
    );
    const second = spawnSync(process.execPath, ['--import', 'tsx', script], { encoding: 'utf8', cwd: process.cwd() });
    expect(second.status).toBe(3);
    expect(second.stdout).toMatch(/in use by process \d+/);
    await expect(openEmbedded(dir)).rejects.toBeInstanceOf(DataDirLockedError);
    await db.close();
  });

  it('takes over a lock left by a process that is gone', async () => {
    const dir = tempDir();
    writeFileSync(join(dir, 'embedded.lock'), '999999');
    const db = await openEmbedded(dir);
    await db.close();
  });

  it('splits migration files into statements', () => {
    expect(splitStatements('create table a (x int);\n-- note; with semicolon\ncreate table b (y int);')).toEqual([
      'create table a (x int)',
      'create table b (y int)',
    ]);
  });
});
