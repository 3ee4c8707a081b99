/**
 * Verification of 5,000 stored runs end to end, as GET /gauges/:id/verification does it: runs and
 * observations read from PostgreSQL page by page, the side-by-side comparison and the warning
 * verification. A fresh database is made on the server and dropped afterwards. Each run: 20 raw
 * and 20 corrected members, 100 stage quantiles, 3 thresholds, 10 daily lead times; 20 years of
 * daily observations before them (climatology). The runs are stored without their verification
 * records (as runs stored before records existed), so the first verification builds them; the
 * next ones read the records, with the aggregation in the worker pool and then on the main
 * thread; then the kept answer (nothing changed), and the answer after one observation is
 * revised. Goal: under 1 s. Prints figures (with phases and the event loop's longest hold); asserts nothing.
 * Usage: DATABASE_URL=postgres://postgres@127.0.0.1:5432/test npx tsx bench/warning-verification-service.ts [runs]
 * Data are invented.
 */
import { randomBytes } from 'node:crypto';
import os from 'node:os';
import pg from 'pg';
import { benchRiver, DAY, H, K, M, THRESHOLDS } from './verification-bench-river.ts';
import { midpointProbs } from '../src/core/verification/index.ts';
import { packRecords } from '../src/core/verification/run-record.ts';
import { CorrectionPool } from '../src/workers/correction-pool.ts';
import { buildForecastView } from '../src/services/forecast-view.ts';
import { StageClock } from '../src/services/stage-clock.ts';
import { forgetVerificationAnswers, verifyStoredRuns } from '../src/services/verify-runs.ts';
import { upsertObservations } from '../src/store/archive-repo.ts';
import { insertRun } from '../src/store/forecasts-repo.ts';
import { insertGauge } from '../src/store/gauges-repo.ts';
import { migrate, readMigrations } from '../src/store/migrate.ts';
import { openPostgres } from '../src/store/postgres-driver.ts';

const DATABASE_URL = process.env.DATABASE_URL;
if (!DATABASE_URL) {
  console.error('set DATABASE_URL to a PostgreSQL server');
  process.exit(2);
}
const nRuns = Number(process.argv[2] ?? 5000);

const name = `bench_wv_${randomBytes(4).toString('hex')}`;
const admin = new pg.Client({ connectionString: DATABASE_URL });
await admin.connect();
await admin.query(`create database ${name}`);
const u = new URL(DATABASE_URL);
u.pathname = `/${name}`;
const db = openPostgres(u.toString(), 4);
try {
  await migrate(db, readMigrations());
  const gauge = await insertGauge(db, { id: 'bench-river', name: 'Bench River at Nowhere', catchmentAreaKm2: 300, timeStep: 'P1D', stepSeconds: 86400, timeZone: 'UTC', flowUnit: 'm3/s', location: null, thresholds: THRESHOLDS });
  const { g, nHist, times, z, flow } = benchRiver(nRuns);
  await upsertObservations(db, gauge.id, times, flow, null);
  const probs = Array.from(midpointProbs(K));
  const t1 = performance.now();
  for (let s = 0; s < nRuns; s++) {
    const i = nHist + s;
    const member = (scale: number) => {
      const v: number[] = [];
      let e = z[i];
      for (let k = 0; k < H; k++) {
        e = 0.85 * e + 0.35 * g.normal();
        v.push(scale * 50 * Math.exp(e + 0.5 * Math.sin((2 * Math.PI * (i + k + 1)) / 365.25)));
      }
      return v;
    };
    const raw = Array.from({ length: M }, () => member(1.2));
    const corrected = Array.from({ length: M }, () => member(1));
    const percentiles: number[][] = [];
    for (let k = 0; k < H; k++) {
      const col = corrected.map((m) => m[k]).sort((a, b) => a - b);
      percentiles.push(probs.map((p) => col[Math.min(M - 1, Math.floor(p * M))] * (0.9 + 0.2 * p)));
    }
    const exceedance = THRESHOLDS.flatMap((t) => percentiles.map((q) => q.filter((x) => x > t.value).length / K));
    const anyTime = THRESHOLDS.map((_, j) => Math.min(1, 1.2 * Math.max(...exceedance.slice(j * H, (j + 1) * H))));
    const id = crypto.randomUUID();
    const view = buildForecastView({
      id,
      gauge,
      issueTimeMs: times[i],
      createdAt: new Date().toISOString(),
      source: 'default',
      status: 'corrected',
      degradedReason: null,
      modelVersion: null,
      seed: 1,
      nDraws: 1000,
      attentionLevel: 0.3,
      probs: [0.5],
      nLeads: H,
      memberIds: raw.map((_, m) => `m${m}`),
      raw: Float64Array.from(raw.flat()),
      corrected: Float64Array.from(corrected.flat()),
      quantiles: percentiles.map((q) => q[50]),
      exceedance: Float64Array.from(exceedance),
      anyTime: Float64Array.from(anyTime),
      firstLikelyLead: THRESHOLDS.map(() => null),
      recent: { times: [], observed: [] },
      timings: { featuresMs: 0, inferenceMs: 0, stochasticMs: 0, totalMs: 0 },
    } as unknown as Parameters<typeof buildForecastView>[0]);
    await insertRun(db, { id, gaugeId: gauge.id, issueTimeMs: times[i], source: 'default', requestHash: id, idempotencyKey: null, status: 'corrected', modelVersionId: null, seed: 1, input: {}, output: JSON.stringify(view), etag: `"${id}"`, summary: [], percentiles } as Parameters<typeof insertRun>[1]);
  }
  console.log(`node ${process.version}, ${os.cpus()[0]?.model ?? 'cpu'} (${os.cpus().length} cores shared with other work)`);
  console.log(`${nRuns} stored runs × ${H} lead times (${M} raw + ${M} corrected members, ${K} quantiles, ${THRESHOLDS.length} thresholds), stored in ${((performance.now() - t1) / 1000).toFixed(1)} s`);
  const phases = (clock: StageClock) => Object.entries(clock.ms).map(([k, ms]) => `${k} ${ms.toFixed(0)}`).join(', ');
  const load = () => os.loadavg().map((x) => x.toFixed(1)).join(' ');
  // The worker pool the service uses (one worker here), started before timing so its start-up is not counted.
  const pool = new CorrectionPool(1, 4);
  await pool.verify({ thresholds: [], stepMs: DAY, attentionLevel: 0.3, fitting: null, observations: { times: new Float64Array(0), values: new Float64Array(0) }, runs: [], records: packRecords([]) });
  // How long the event loop is held: the longest gap between 5 ms ticks while a verification runs.
  const blocked = () => {
    let last = performance.now();
    let worst = 0;
    const timer = setInterval(() => {
      const now = performance.now();
      worst = Math.max(worst, now - last - 5);
      last = now;
    }, 5);
    return () => {
      clearInterval(timer);
      // A hold that lasts to the end is seen here, not by a tick.
      return Math.max(worst, performance.now() - last - 5);
    };
  };
  const once = async (label: string, runner: CorrectionPool | null) => {
    const cpu0 = process.cpuUsage();
    const stop = blocked();
    const clock = new StageClock();
    const a = performance.now();
    const v = await verifyStoredRuns(db, gauge, {}, clock, runner);
    const wall = performance.now() - a;
    const worst = stop();
    const cpu = process.cpuUsage(cpu0);
    console.log(
      `${label}: wall ${wall.toFixed(0)} ms (goal under 1000 ms), CPU time of the process (all threads) ${((cpu.user + cpu.system) / 1000).toFixed(0)} ms, event loop held at most ${worst.toFixed(0)} ms; ${v.comparison.cases.used} cases, ${v.warningScores?.runs ?? 0} runs in the warnings; load average ${load()}`,
    );
    console.log(`  phases (ms): ${phases(clock)}`);
    return v;
  };
  // Runs stored before records existed (as insertRun alone leaves them): the first verification builds every record.
  await once('first verification (builds the records of runs stored without one)', pool);
  // Each from the records again: the answer kept from the previous one is dropped first.
  for (let r = 0; r < 3; r++) {
    forgetVerificationAnswers();
    await once(`verification ${r + 1} from the records, aggregation in the worker pool`, pool);
  }
  forgetVerificationAnswers();
  await once('verification from the records, aggregation on the main thread', null);
  // Nothing changed since: the kept answer.
  for (let r = 0; r < 2; r++) await once(`verification ${r + 1} with nothing changed (kept answer)`, pool);
  // One observation revised (a valid time of 10 runs): a new key, aggregated again.
  const last = nHist + nRuns - 5;
  await upsertObservations(db, gauge.id, Float64Array.of(times[last]), Float64Array.of(flow[last] * 1.5), null);
  await once('verification after one observation was revised', pool);
  await pool.close();
} finally {
  await db.close();
  await admin.query(`drop database if exists ${name} with (force)`);
  await admin.end();
}
