/**
 * Hindcast through the service: 30 years of daily data, 50 members, 10-day horizon, 1000
 * trajectories per issue, through the real pipeline — a hindcast job (POST /gauges/:id/hindcasts)
 * that reads the archive from the store and runs, in a worker thread, the feature rows → the
 * fitted version's ONNX residual model in onnxruntime → the stochastic stage with the version's
 * error archive → the side-by-side verification, the ensemble-size study and the advice.
 * Goal: the hindcast job under 60 s on this machine.
 *
 * Setup (timed, but not part of the goal): the demo scenario (invented data) loaded through the
 * API, and a residual model fitted by the fit job. The store is the embedded one in memory, or a
 * PostgreSQL server with BENCH_DATABASE_URL (a fresh database is created and dropped).
 * With --per-issue, the same hindcast also runs with the reforecast-mode correction path (feature
 * rows built per issue × member × lead and batched through onnxruntime), using the members'
 * simulations as daily "reforecasts": what a reforecast archive or a lead-time feature costs.
 * Run: npx tsx bench/hindcast-service.ts [years=30] [members=50] [--per-issue]
 */
import { randomBytes } from 'node:crypto';
import pg from 'pg';
import { buildApp } from '../src/api/app.ts';
import { loadConfig } from '../src/config.ts';
import { jobHandlers } from '../src/jobs/handlers.ts';
import type { HindcastOutput } from '../src/models/hindcast-compute.ts';
import { runCompute } from '../src/workers/run-compute.ts';
import { JobRunner } from '../src/jobs/runner.ts';
import { loadArchiveSeries } from '../src/store/archive-series.ts';
import { getGauge } from '../src/store/gauges-repo.ts';
import { modelParts, getModelVersion, versionArchive } from '../src/store/models-repo.ts';
import { loadScenarioArchive, type Send } from '../src/scenario/load-archive.ts';
import { buildScenario } from '../src/scenario/scenario.ts';
import type { Db } from '../src/store/db.ts';
import { openEmbedded } from '../src/store/embedded-driver.ts';
import { migrate } from '../src/store/migrate.ts';
import { openPostgres } from '../src/store/postgres-driver.ts';

const args = process.argv.slice(2).filter((a) => !a.startsWith('--'));
const perIssue = process.argv.includes('--per-issue');
const years = Number(args[0] ?? 30);
const members = Number(args[1] ?? 50);
const H = 10;
const N = 1000;

async function openStore(): Promise<{ db: Db; kind: string; close: () => Promise<void> }> {
  const server = process.env.BENCH_DATABASE_URL;
  if (!server) {
    const db = await openEmbedded(null);
    await migrate(db);
    return { db, kind: 'embedded (in memory)', close: () => db.close() };
  }
  const name = `sft_bench_${randomBytes(4).toString('hex')}`;
  const admin = new pg.Client({ connectionString: server });
  await admin.connect();
  await admin.query(`create database ${name}`);
  await admin.end();
  const u = new URL(server);
  u.pathname = `/${name}`;
  const db = openPostgres(u.toString(), 5);
  await migrate(db);
  return {
    db,
    kind: 'PostgreSQL server',
    async close() {
      await db.close();
      const c = new pg.Client({ connectionString: server });
      await c.connect();
      await c.query(`drop database if exists ${name} with (force)`);
      await c.end();
    },
  };
}

const s = (ms: number) => `${(ms / 1000).toFixed(2)} s`;
const quiet = { info() {}, warn() {}, error() {} } as never;

const store = await openStore();
const app = await buildApp({ db: store.db, config: loadConfig({ AUTH: 'off', DATA_DIR: '/tmp/sft-bench-unused', MAX_TRAJECTORIES: '5000' }) });
const send: Send = async (method, url, body) => {
  const res = await app.inject({ method, url, ...(body === undefined ? {} : { payload: body as object }) });
  return { status: res.statusCode, body: res.body ? JSON.parse(res.body) : null };
};
const runner = new JobRunner(store.db, jobHandlers, quiet, 60_000);
const rows: [string, string][] = [];
try {
  let t = performance.now();
  const scenario = buildScenario({ seed: 1, years, members });
  const gaugeId = scenario.gauge.id;
  rows.push(['setup: scenario data (invented)', s(performance.now() - t)]);
  t = performance.now();
  await loadScenarioArchive(send, scenario);
  rows.push([`setup: load through the API into the ${store.kind} store`, s(performance.now() - t)]);

  t = performance.now();
  const fit = await send('POST', `/gauges/${gaugeId}/models/fit`, {
    params: { nRounds: 150, learningRate: 0.1, maxDepth: 5, patience: 20 },
    templateLength: 30,
    simLags: 9,
    forcingLags: 3,
    maxTrainRows: 200_000,
  });
  await runner.drain();
  const fitJob = (await send('GET', `/jobs/${(fit.body as { id: string }).id}`)).body as { status: string; error: string; result: { versionId: string } };
  if (fitJob.status !== 'succeeded') throw new Error(`fit failed: ${fitJob.error}`);
  rows.push(['setup: fit job (gradient boosting → ONNX, archive)', s(performance.now() - t)]);

  // The whole record: every day an issue, from the first with the warm-up to the last with a full horizon.
  const from = scenario.times[0];
  const to = scenario.times[scenario.times.length - H - 1];
  t = performance.now();
  const started = await send('POST', `/gauges/${gaugeId}/hindcasts`, { mode: 'simulation', from, to, horizon: H, trajectories: N });
  if (started.status !== 202) throw new Error(`hindcast refused: ${JSON.stringify(started.body)}`);
  const jobId = (started.body as { id: string }).id;
  await runner.drain();
  const jobMs = performance.now() - t;
  const h = (await send('GET', `/gauges/${gaugeId}/hindcasts/${jobId}`)).body as Record<string, any>;
  if (h.status !== 'succeeded') throw new Error(`hindcast ${h.status}: ${h.error}`);
  const r = h.result;
  const tm = r.timings as { correctionMs: number; stageMs: number; verificationMs: number; reportMs: number; totalMs: number };
  rows.push(['hindcast: reading the archive, starting the worker, storing the result', s(jobMs - tm.totalMs)]);
  rows.push([`hindcast: correction (${r.correction}, ${r.models} ONNX model(s))`, s(tm.correctionMs)]);
  rows.push([`hindcast: stochastic stage (${r.issues.used} issues × ${r.members.length} members × ${H} leads, ${N} trajectories)`, `${s(tm.stageMs)} (${(tm.stageMs / r.issues.used).toFixed(2)} ms per issue)`]);
  rows.push(['hindcast: verification, streamed (3 forecasts + size study)', s(tm.verificationMs)]);
  rows.push(['hindcast: report and advice', s(tm.reportMs)]);
  rows.push(['hindcast job, end to end (POST → succeeded)', `${s(jobMs)} (goal < 60 s)`]);

  if (perIssue) {
    // Same issues, model and archive; the members' simulations passed as reforecasts force the per-issue path.
    const gauge = (await getGauge(store.db, gaugeId))!;
    const version = (await getModelVersion(store.db, gaugeId, fitJob.result.versionId))!;
    const archive = (await versionArchive(store.db, version.id, 'corrected'))!;
    const series = await loadArchiveSeries(store.db, gaugeId, gauge.stepSeconds);
    const n = series.times.length;
    const issueIndex = Int32Array.from({ length: n - H - 1 }, (_, i) => i);
    const M = series.members.length;
    const values = new Float64Array(issueIndex.length * M * H);
    for (let i = 0; i < issueIndex.length; i++) for (let m = 0; m < M; m++) for (let k = 0; k < H; k++) values[(i * M + m) * H + k] = series.members[m].values[i + k + 1];
    const t1 = performance.now();
    const out = await runCompute<HindcastOutput>({
      kind: 'hindcast',
      input: {
        series,
        issueIndex,
        reforecast: { values },
        model: { spec: version.featureSpec, parts: await modelParts(store.db, version.id) },
        archive: archive.bytes,
        settings: {
          mode: 'reforecast',
          horizon: H,
          seed: 1,
          nDraws: N,
          seasonalWindowDays: 60,
          thresholds: gauge.thresholds.map((x) => x.value),
          leadRange: null,
          sizeStudy: { sources: ['corrected', 'stochastic'], sizes: [5, 10, 25, 50, 100], repeats: 20, caseFraction: null, targetCases: 20_000 },
        },
      },
    }).result;
    const all = performance.now() - t1;
    rows.push([`per-issue path: correction (${out.correction}, ${out.issues.used * M * H} feature rows)`, s(out.timings.correctionMs)]);
    rows.push(['per-issue path: stage + verification + report', s(out.timings.stageMs + out.timings.verificationMs + out.timings.reportMs)]);
    rows.push(['per-issue path: compute worker, end to end (no store reads)', s(all)]);
    const same = Math.abs(out.report.corrected.crps.crps! - r.comparison.corrected.crps.crps) < 1e-9;
    rows.push(['per-issue path: corrected CRPS equals the per-valid-time path', same ? 'yes' : `no (${out.report.corrected.crps.crps} vs ${r.comparison.corrected.crps.crps})`]);
  }

  console.log(`Hindcast job: ${years} years daily, ${members} members, ${H} lead times, ${N} trajectories; ${r.cases.verified} cases verified; store: ${store.kind}`);
  console.log('');
  console.log('| step | time |');
  console.log('|---|---|');
  for (const [a, b] of rows) console.log(`| ${a} | ${b} |`);
  const f = (x: number | null, d = 3) => (x === null || x === undefined ? 'n/a' : x.toFixed(d));
  console.log('');
  console.log('| forecast | CRPS | fair CRPS | Hersbach rel. | alpha | PIT cov. 90 % | band width 90 % | MAE median | spread |');
  console.log('|---|---|---|---|---|---|---|---|---|');
  for (const src of [r.comparison.raw, r.comparison.corrected, r.comparison.stochastic]) {
    const iv = src.intervals.find((i: { level: number }) => i.level === 0.9);
    console.log(`| ${src.source} | ${f(src.crps.crps)} | ${f(src.crps.fairCrps)} | ${f(src.crps.hersbach.reliability)} | ${f(src.alphaIndex)} | ${f(iv.pitCoverage)} | ${f(iv.meanWidth, 1)} | ${f(src.median.mae)} | ${src.spread.class} |`);
  }
  for (const study of r.sizeStudy ?? []) {
    console.log('');
    console.log(`Size study, ${study.source} (${study.repeats} draws per case, ${(study.caseFraction * 100).toFixed(1)} % of cases):`);
    console.log('| members | CRPS | fair CRPS | width 95 % | alpha |');
    console.log('|---|---|---|---|---|');
    for (const row of study.rows) console.log(`| ${row.size} | ${f(row.crps)} | ${f(row.fairCrps)} | ${f(row.meanWidth, 1)} | ${f(row.alphaIndex)} |`);
  }
  console.log('');
  console.log(`Advice: ${r.advice.recommendation}`);
  for (const reason of r.advice.reasons) console.log(`  - ${reason}`);
  for (const w of r.warnings) console.log(`Warning: ${w}`);
} finally {
  await runner.stop();
  await app.close();
  await store.close();
}
