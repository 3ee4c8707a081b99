/**
 * Archive reads under load: one gauge with 800,000 simulation values (80 members × 10,000 daily
 * steps) on a fresh database; 4 reads of the whole archive at once (2 JSON, 2 CSV) over HTTP, with
 * the longest event-loop block (perf_hooks monitorEventLoopDelay) while they run.
 *  - "whole body": the way reads were answered before streaming (every row read, the response built
 *    and serialised at once), run in this process for comparison;
 *  - "streamed": the service's routes (keyset pages, chunked writes with backpressure).
 * Usage: DATABASE_URL=postgres://postgres@127.0.0.1:5432/test npx tsx bench/archive-read.ts
 * Goal (issue 16): no event-loop block over 50 ms. The first row measures the floor: the longest
 * delay this process sees while doing nothing, which on a shared, loaded machine is not zero.
 */
import { request } from 'node:http';
import type { AddressInfo } from 'node:net';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { setFlagsFromString } from 'node:v8';
import { runInNewContext } from 'node:vm';
import { buildApp } from '../src/api/app.ts';
import { loadConfig } from '../src/config.ts';
import { isoUtc } from '../src/services/series-input.ts';
import { ensureMembers, readSimulations, upsertSimulations } from '../src/store/archive-repo.ts';
import { loadavg, openBenchDb } from './bench-db.ts';

const members = 80;
const steps = 10_000;
const bench = await openBenchDb(process.env.DATABASE_URL, 'archive_read');
const { db } = bench;
const config = loadConfig({ ...process.env, DATABASE_URL: bench.url ?? '', AUTH: 'off', HOST: '127.0.0.1', DATA_DIR: bench.dataDir });
const app = await buildApp({ db, config });
const gauge = 'read-bench';
const created = await app.inject({ method: 'POST', url: '/gauges', payload: { id: gauge, name: 'Read bench', catchmentAreaKm2: 100, timeStep: 'P1D', flowUnit: 'm3/s' } });
if (created.statusCode !== 201) throw new Error(created.body);
const t0 = Date.parse('1990-01-01T00:00:00Z');
const times = Float64Array.from({ length: steps }, (_, i) => t0 + i * 86_400_000);
const series = Array.from({ length: members }, (_, m) => ({
  id: `m${String(m).padStart(2, '0')}`,
  values: Float64Array.from({ length: steps }, (_, i) => Math.round((10 + 5 * Math.sin(i / 58) + 3 * Math.sin(i / 7 + m)) * 1000) / 1000),
}));
const loadStart = performance.now();
await db.transaction(async (tx) => {
  await ensureMembers(tx, gauge, series.map((s) => s.id));
  await upsertSimulations(tx, gauge, times, series);
});
console.log(`loaded ${(members * steps).toLocaleString('en')} values in ${((performance.now() - loadStart) / 1000).toFixed(1)} s (loadavg ${loadavg()})`);
await db.query('analyze member_simulations');

await app.listen({ port: 0, host: '127.0.0.1' });
const port = (app.server.address() as AddressInfo).port;

/** Reads a URL to its end, counting bytes. */
function fetchBytes(path: string): Promise<number> {
  return new Promise((resolve, reject) => {
    request({ host: '127.0.0.1', port, path }, (res) => {
      let n = 0;
      res.on('data', (c: Buffer) => (n += c.length));
      res.on('end', () => (res.statusCode === 200 ? resolve(n) : reject(new Error(`status ${res.statusCode}`))));
      res.on('error', reject);
    })
      .on('error', reject)
      .end();
  });
}

/** The read as it was before streaming: every row at once, the body built and serialised whole. */
async function wholeBody(csv: boolean): Promise<number> {
  const rows = await readSimulations(db, gauge, {});
  const timeSet = [...new Set(rows.map((r) => r.t))].sort((a, b) => a - b);
  const index = new Map(timeSet.map((x, i) => [x, i]));
  const byMember = new Map<string, (number | null)[]>();
  for (const r of rows) {
    let values = byMember.get(r.member_id);
    if (!values) byMember.set(r.member_id, (values = new Array(timeSet.length).fill(null)));
    values[index.get(r.t)!] = r.value;
  }
  const list = [...byMember].map(([id, values]) => ({ id, values }));
  const body = csv
    ? [['time', ...list.map((m) => `${m.id} (m3/s)`)].join(','), ...timeSet.map((x, i) => [isoUtc(x), ...list.map((m) => m.values[i] ?? '')].join(','))].join('\n') + '\n'
    : JSON.stringify({ gaugeId: gauge, unit: 'm3/s', times: timeSet.map(isoUtc), members: list });
  return Buffer.byteLength(body);
}

// Each measurement starts from a collected heap, so none pays for the garbage of the setup or the one before.
setFlagsFromString('--expose-gc');
const collect = runInNewContext('gc') as () => void;

async function measure(label: string, reads: () => Promise<number>[]): Promise<string[]> {
  collect();
  const h = monitorEventLoopDelay({ resolution: 5 });
  h.enable();
  const start = performance.now();
  const sizes = await Promise.all(reads());
  const seconds = (performance.now() - start) / 1000;
  h.disable();
  const maxMs = h.max / 1e6;
  return [label, sizes.map((s) => (s / 1e6).toFixed(1)).join(' / '), seconds.toFixed(2), maxMs.toFixed(0), (h.percentile(99) / 1e6).toFixed(0), loadavg(), maxMs <= 50 ? 'met' : 'missed'];
}

const rows: string[][] = [];
// The machine's floor: the same monitor while this process only waits (other agents load the cores).
rows.push(await measure('nothing (floor of this machine)', () => [new Promise<number>((resolve) => setTimeout(() => resolve(0), 5000))]));
// Streamed first: the whole-body reads leave a large heap behind whose collection would land in the next measurement.
const url = `/gauges/${gauge}/simulations`;
if (process.env.ONLY !== 'whole') {
  rows.push(await measure('streamed, one JSON read', () => [fetchBytes(url)]));
  rows.push(await measure('streamed (routes)', () => [fetchBytes(url), fetchBytes(url), fetchBytes(`${url}?format=csv`), fetchBytes(`${url}?format=csv`)]));
}
if (process.env.ONLY !== 'streamed') rows.push(await measure('whole body (before)', () => [wholeBody(false), wholeBody(false), wholeBody(true), wholeBody(true)]));

await app.close();
await bench.drop();
console.log(`store: ${db.kind} (fresh database); 4 reads at once of ${(members * steps).toLocaleString('en')} values (2 JSON, 2 CSV)`);
const header = ['reads', 'MB each', 'seconds', 'max block ms', 'p99 delay ms', 'loadavg', '≤ 50 ms'];
const widths = header.map((h, k) => Math.max(h.length, ...rows.map((r) => r[k].length)) + 2);
for (const r of [header, ...rows]) console.log(r.map((c, k) => (k === 0 ? c.padEnd(widths[k]) : c.padStart(widths[k]))).join(''));
