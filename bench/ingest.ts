/**
 * Archive ingest speed: one batch of 500,000 values (50 members × 10,000 daily steps) through the
 * HTTP API into PostgreSQL, then the same batch again (an upsert that changes nothing).
 * Usage: DATABASE_URL=postgres://postgres@127.0.0.1:5432/test npx tsx bench/ingest.ts
 * (without DATABASE_URL it measures the embedded store). Goal: well under a minute on a real server.
 */
import { buildApp } from '../src/api/app.ts';
import { loadConfig } from '../src/config.ts';
import { migrate } from '../src/store/migrate.ts';
import { openDb } from '../src/store/open.ts';
import { mkdtempSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

const members = 50;
const steps = 10_000;
const config = loadConfig({ ...process.env, AUTH: 'off', HOST: '127.0.0.1', DATA_DIR: mkdtempSync(join(tmpdir(), 'sft-bench-')), BODY_LIMIT_MB: '128' });
const db = await openDb({ databaseUrl: config.DATABASE_URL, dataDir: config.DATA_DIR });
await migrate(db);
const app = await buildApp({ db, config });
const gaugeId = `bench-ingest-${process.pid}`;
const created = await app.inject({ method: 'POST', url: '/gauges', payload: { id: gaugeId, name: 'Bench gauge', catchmentAreaKm2: 100, timeStep: 'P1D', flowUnit: 'm3/s' } });
if (created.statusCode !== 201) throw new Error(created.body);

const t0 = Date.parse('1990-01-01T00:00:00Z');
const times = Array.from({ length: steps }, (_, i) => new Date(t0 + i * 86_400_000).toISOString());
const body = JSON.stringify({
  unit: 'm3/s',
  times,
  members: Array.from({ length: members }, (_, m) => ({
    id: `m${String(m).padStart(2, '0')}`,
    values: Array.from({ length: steps }, (_, i) => Math.round((10 + 5 * Math.sin(i / 58) + m * 0.01) * 1000) / 1000),
  })),
});

const rows: string[][] = [];
for (const label of ['first load', 'same batch again']) {
  const start = performance.now();
  const res = await app.inject({ method: 'POST', url: `/gauges/${gaugeId}/simulations`, payload: body, headers: { 'content-type': 'application/json' } });
  const seconds = (performance.now() - start) / 1000;
  if (res.statusCode !== 200) throw new Error(res.body);
  const { received, written } = res.json();
  rows.push([label, String(received), String(written), seconds.toFixed(2), Math.round(received / seconds).toLocaleString('en')]);
}
await app.inject({ method: 'DELETE', url: `/gauges/${gaugeId}?force=true` });
await app.close();
await db.close();

console.log(`store: ${db.kind}; body ${(body.length / 1e6).toFixed(1)} MB`);
console.log(['batch', 'values', 'written', 'seconds', 'values/s'].map((h) => h.padEnd(18)).join(''));
for (const r of rows) console.log(r.map((c) => c.padEnd(18)).join(''));
