/**
 * Archive ingest speed, on a fresh database (see bench-db.ts):
 *  1. the store alone: 500,000 simulation values (50 members × 10,000 daily steps) written by the
 *     server path (COPY on PostgreSQL) and, for comparison, by batched inserts (the path before COPY,
 *     and the embedded store's path);
 *  2. the same batch through the HTTP API as JSON and as CSV, then again (an upsert that changes nothing);
 *  3. a one-gauge archive of about 1,000,000 values through the API: 25 years of daily observations,
 *     two forcings and 20 member simulations, and 10 years of daily past runs (20 members × 10 lead
 *     times, with their forecast forcings) sent a year per request.
 * Usage: DATABASE_URL=postgres://postgres@127.0.0.1:5432/test npx tsx bench/ingest.ts
 * (without DATABASE_URL it measures the embedded store).
 * Goals (issue 16): ≥ 1,000,000 values/s into PostgreSQL; the 1M-value archive in under 5 s.
 */
import type { FastifyInstance } from 'fastify';
import { buildApp } from '../src/api/app.ts';
import { loadConfig } from '../src/config.ts';
import * as repo from '../src/store/archive-repo.ts';
import type { Db, Queryable } from '../src/store/db.ts';
import { loadavg, openBenchDb } from './bench-db.ts';

const DAY = 86_400_000;
const bench = await openBenchDb(process.env.DATABASE_URL, 'ingest');
const { db } = bench;
const config = loadConfig({ ...process.env, DATABASE_URL: bench.url ?? '', AUTH: 'off', HOST: '127.0.0.1', DATA_DIR: bench.dataDir, BODY_LIMIT_MB: '128' });
const app = await buildApp({ db, config });
const table: string[][] = [];
const row = (label: string, values: number, written: number | string, seconds: number) =>
  table.push([label, values.toLocaleString('en'), String(written), seconds.toFixed(2), Math.round(values / seconds).toLocaleString('en'), loadavg()]);

async function newGauge(id: string): Promise<void> {
  const res = await app.inject({ method: 'POST', url: '/gauges', payload: { id, name: `Bench ${id}`, catchmentAreaKm2: 100, timeStep: 'P1D', flowUnit: 'm3/s' } });
  if (res.statusCode !== 201) throw new Error(res.body);
}

async function post(gauge: string, resource: string, payload: string, type = 'application/json'): Promise<{ received: number; written: number }> {
  const res = await app.inject({ method: 'POST', url: `/gauges/${gauge}/${resource}`, payload, headers: { 'content-type': type } });
  if (res.statusCode !== 200) throw new Error(`${resource}: ${res.body.slice(0, 500)}`);
  return res.json();
}

const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');
const flow = (i: number, m: number) => Math.round((10 + 5 * Math.sin(i / 58) + 3 * Math.sin(i / 7 + m) + m * 0.01) * 1000) / 1000;

// 1. The store alone.
const members = 50;
const steps = 10_000;
const t0 = Date.parse('1990-01-01T00:00:00Z');
const times = Float64Array.from({ length: steps }, (_, i) => t0 + i * DAY);
const series = Array.from({ length: members }, (_, m) => ({ id: `m${String(m).padStart(2, '0')}`, values: Float64Array.from({ length: steps }, (_, i) => flow(i, m)) }));
/** The same store without COPY: what every server write was before it, and what the embedded store does. */
const withoutCopy = (d: Db): Db => ({ ...d, transaction: (fn) => d.transaction((tx) => fn({ query: (sql, params) => tx.query(sql, params) } satisfies Queryable)) });
// ONLY_API=1 leaves the store alone out (to run this file against code before the bulk path).
for (const [label, store] of process.env.ONLY_API ? [] : [[db.kind === 'postgres' ? 'store, COPY' : 'store, batched inserts', db], ...(db.kind === 'postgres' ? [['store, batched inserts', withoutCopy(db)]] : [])] as [string, Db][]) {
  const gauge = `store-${label.toLowerCase().replace(/\W+/g, '-')}`;
  await newGauge(gauge);
  await db.transaction((tx) => repo.ensureMembers(tx, gauge, series.map((s) => s.id)));
  const start = performance.now();
  const written = await store.transaction((tx) => repo.upsertSimulations(tx, gauge, times, series));
  row(label, members * steps, written, (performance.now() - start) / 1000);
}

// 2. Through the API, JSON and CSV.
const json = JSON.stringify({ unit: 'm3/s', times: Array.from(times, iso), members: series.map((s) => ({ id: s.id, values: Array.from(s.values) })) });
const csvLines = [['time', ...series.map((s) => `${s.id} (m3/s)`)].join(',')];
for (let i = 0; i < steps; i++) csvLines.push([iso(times[i]), ...series.map((s) => s.values[i])].join(','));
const csv = csvLines.join('\n') + '\n';
for (const [format, body, type] of [['JSON', json, 'application/json'], ['CSV', csv, 'text/csv']]) {
  const gauge = `api-${format.toLowerCase()}`;
  await newGauge(gauge);
  for (const label of ['first load', 'same batch again']) {
    const start = performance.now();
    const { received, written } = await post(gauge, 'simulations', body, type);
    row(`API ${format} (${(body.length / 1e6).toFixed(1)} MB), ${label}`, received, written, (performance.now() - start) / 1000);
  }
}

// 3. A one-gauge archive of about a million values through the API.
const archiveGauge = 'archive-1m';
await newGauge(archiveGauge);
const years = 25;
const nDays = Math.round((years * 365.25 * DAY) / DAY);
const a0 = Date.parse('1995-01-01T00:00:00Z');
const aTimes = Array.from({ length: nDays }, (_, i) => iso(a0 + i * DAY));
const simMembers = 20;
const leads = 10;
const runYears = 10;
const requests: [string, string][] = [
  ['observations', JSON.stringify({ unit: 'm3/s', times: aTimes, values: aTimes.map((_, i) => flow(i, 0.5)) })],
  [
    'forcings',
    JSON.stringify({
      times: aTimes,
      variables: [
        { name: 'precipitation', unit: 'mm', values: aTimes.map((_, i) => Math.max(0, Math.round(10 * Math.sin(i * 1.7)) / 2)) },
        { name: 'air_temperature', unit: 'degC', values: aTimes.map((_, i) => Math.round(100 * (8 + 10 * Math.sin((2 * Math.PI * i) / 365.25))) / 100) },
      ],
    }),
  ],
  ['simulations', JSON.stringify({ unit: 'm3/s', times: aTimes, members: Array.from({ length: simMembers }, (_, m) => ({ id: `p${String(m).padStart(2, '0')}`, values: aTimes.map((_, i) => flow(i, m)) })) })],
];
const firstIssue = nDays - runYears * 365 - leads;
for (let y = 0; y < runYears; y++) {
  const runs = Array.from({ length: 365 }, (_, d) => {
    const issue = firstIssue + y * 365 + d;
    return {
      issueTime: aTimes[issue],
      members: Array.from({ length: simMembers }, (_, m) => ({ id: `p${String(m).padStart(2, '0')}`, values: Array.from({ length: leads }, (_, l) => flow(issue + l + 1, m + 0.3)) })),
      forcings: { precipitation: Array.from({ length: leads }, (_, l) => Math.max(0, Math.round(10 * Math.sin((issue + l) * 1.3)) / 2)), air_temperature: Array.from({ length: leads }, (_, l) => 8 + l / 10) },
    };
  });
  requests.push(['reforecasts', JSON.stringify({ unit: 'm3/s', runs })]);
}
const archiveStart = performance.now();
let archiveValues = 0;
let archiveWritten = 0;
for (const [resource, body] of requests) {
  const { received, written } = await post(archiveGauge, resource, body);
  archiveValues += received;
  archiveWritten += written;
}
const archiveSeconds = (performance.now() - archiveStart) / 1000;
row(`API, one-gauge archive (${requests.length} requests)`, archiveValues, archiveWritten, archiveSeconds);

await app.close();
await bench.drop();

console.log(`store: ${db.kind} (fresh database)`);
const header = ['what', 'values', 'written', 'seconds', 'values/s', 'loadavg'];
const widths = header.map((h, k) => Math.max(h.length, ...table.map((r) => r[k].length)) + 2);
for (const r of [header, ...table]) console.log(r.map((c, k) => (k === 0 ? c.padEnd(widths[k]) : c.padStart(widths[k]))).join(''));
const best = Math.max(0, ...table.filter((r) => r[0].startsWith('store')).map((r) => Number(r[4].replace(/,/g, ''))));
if (!process.env.ONLY_API) console.log(`goal ≥ 1,000,000 values/s into the store: ${best >= 1e6 ? 'met' : 'missed'} (best ${best.toLocaleString('en')}/s)`);
console.log(`goal one-gauge archive of ~1M values through the API in < 5 s: ${archiveSeconds < 5 ? 'met' : 'missed'} (${archiveSeconds.toFixed(2)} s for ${archiveValues.toLocaleString('en')} values)`);
