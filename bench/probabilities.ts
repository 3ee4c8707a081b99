/**
 * Do the probabilities hold? The demo scenario (invented Corvane catchment, 20 years daily, 40
 * members) loaded through the API into the embedded store, with weekly past runs over the fitting
 * years; a residual model fitted on the years before the last three (its calibration and
 * validation periods end there); then every other
 * day of the last three years posted as a raw run (POST /gauges/:id/runs, 1000 trajectories) and
 * scored against the scenario's observations, which the fit never saw.
 * Prints per lead: alpha reliability index (Renard et al. 2010) of the PIT, 95 % interval coverage,
 * CRPS (from 20 midpoint quantiles, 2·mean quantile score); per threshold: mean "any time in the
 * horizon" probability against the observed frequency, with a reliability table.
 * Goals (issue "probabilities that hold"): alpha ≥ 0.95 at every lead; 95 % coverage within
 * 0.94–0.96; any-time ratio mean probability / observed frequency within 0.9–1.1 per threshold;
 * CRPS no worse than before the change (run this script on both trees to compare).
 * Run: npx tsx bench/probabilities.ts [years=20] [members=40] [every=2] [seed=1]
 */
import { buildApp } from '../src/api/app.ts';
import { loadConfig } from '../src/config.ts';
import { alphaIndex } from '../src/core/scores/alpha-index.ts';
import { jobHandlers } from '../src/jobs/handlers.ts';
import { JobRunner } from '../src/jobs/runner.ts';
import { loadScenarioArchive, type Send } from '../src/scenario/load-archive.ts';
import { buildScenario } from '../src/scenario/scenario.ts';
import { openEmbedded } from '../src/store/embedded-driver.ts';
import { migrate } from '../src/store/migrate.ts';

const args = process.argv.slice(2);
const years = Number(args[0] ?? 20);
const members = Number(args[1] ?? 40);
const every = Number(args[2] ?? 2);
const seed = Number(args[3] ?? 1);
const HELD_OUT_DAYS = 3 * 365;
const LEVELS = Array.from({ length: 20 }, (_, i) => (i + 0.5) / 20); // 0.025 … 0.975
const quiet = { info() {}, warn() {}, error() {} } as never;

const db = await openEmbedded(null);
await migrate(db);
const app = await buildApp({ db, config: loadConfig({ AUTH: 'off', DATA_DIR: '/tmp/sft-bench-unused', MAX_TRAJECTORIES: '5000' }) });
const send: Send = async (method, url, body) => {
  const res = await app.inject({ method, url, ...(body === undefined ? {} : { payload: body as object }) });
  return { status: res.statusCode, body: res.body ? JSON.parse(res.body) : null };
};
const runner = new JobRunner(db, jobHandlers, quiet, 60_000);
try {
  const t0 = performance.now();
  const scenario = buildScenario({ seed, years, members });
  const gaugeId = scenario.gauge.id;
  await loadScenarioArchive(send, scenario);
  const n = scenario.times.length;
  const H = scenario.horizonSteps;
  const heldOutFrom = n - HELD_OUT_DAYS;
  const split = Math.floor(heldOutFrom * 0.6);
  // Past runs, weekly, over the fitting years (as a forecast system would have kept them).
  const past = scenario.reforecasts({ fromIndex: split, toIndex: heldOutFrom - H - 1, everySteps: 7 });
  for (let i = 0; i < past.length; i += 20) {
    const res = await send('POST', `/gauges/${gaugeId}/reforecasts`, {
      unit: 'm3/s',
      // Each past run with the forecast forcings it was driven by (lead times only), so the per-lead
      // archive and the lead growth see the forecast-forcing error.
      runs: past.slice(i, i + 20).map((r) => ({
        issueTime: r.issueTime,
        members: r.members.map((m) => ({ id: m.id, values: m.values.slice(m.warmupSteps) })),
        forcings: { precipitation: r.forcings.precipitation.slice(r.warmupSteps), air_temperature: r.forcings.air_temperature.slice(r.warmupSteps) },
      })),
    });
    if (res.status >= 300) throw new Error(`reforecasts: ${JSON.stringify(res.body)}`);
  }
  const fit = await send('POST', `/gauges/${gaugeId}/models/fit`, {
    params: { nRounds: 250, patience: 20 },
    maxTrainRows: 40_000,
    templateLength: 30,
    calibration: { from: scenario.times[0], to: scenario.times[split] },
    validation: { from: scenario.times[split], to: scenario.times[heldOutFrom] },
  });
  if (fit.status !== 202) throw new Error(JSON.stringify(fit.body));
  await runner.drain();
  const job = (await send('GET', `/jobs/${(fit.body as { id: string }).id}`)).body as { status: string; error: string; result: { versionId: string } };
  if (job.status !== 'succeeded') throw new Error(`fit ${job.status}: ${job.error}`);
  const tFit = performance.now();

  const thresholds = scenario.gauge.thresholds;
  const pit: number[][] = Array.from({ length: H }, () => []);
  const inside95 = new Float64Array(H);
  const crps = new Float64Array(H);
  const cases = new Float64Array(H);
  const below = Array.from({ length: H }, () => ({ stage: 0, members: 0, shift: 0 }));
  const anyTime = thresholds.map(() => ({ p: [] as number[], o: [] as number[] }));
  let runs = 0;
  for (let i = heldOutFrom; i < n - H - 1; i += every) {
    const run = scenario.forecastRun(i);
    const res = await send('POST', `/gauges/${gaugeId}/runs`, {
      issueTime: run.issueTime,
      unit: 'm3/s',
      warmupSteps: run.warmupSteps,
      members: run.members.map((m) => ({ id: m.id, values: m.values })),
      forcings: { precipitation: run.forcings.precipitation, air_temperature: run.forcings.air_temperature },
      trajectories: 1000,
      quantiles: LEVELS,
      source: 'bench',
    });
    if (res.status !== 201) throw new Error(`run ${run.issueTime}: ${JSON.stringify(res.body)}`);
    const f = res.body as { quantiles: { values: number[][] }; thresholds: { anyTime: number }[]; ensemble: { corrected: { values: number[] }[] | null } };
    runs++;
    const obs = Array.from({ length: H }, (_, h) => scenario.observedFlow[i + 1 + h]);
    for (let h = 0; h < H; h++) {
      const y = obs[h];
      if (y === null) continue;
      const q = LEVELS.map((_, l) => f.quantiles.values[l][h]);
      // PIT: the level at y on the quantile curve (linear between levels; uniform in a tail).
      let u: number;
      if (y <= q[0]) u = Math.random() * LEVELS[0];
      else if (y >= q[q.length - 1]) u = LEVELS[q.length - 1] + Math.random() * (1 - LEVELS[q.length - 1]);
      else {
        let l = 0;
        while (q[l + 1] < y) l++;
        const w = q[l + 1] > q[l] ? (y - q[l]) / (q[l + 1] - q[l]) : Math.random();
        u = LEVELS[l] + w * (LEVELS[l + 1] - LEVELS[l]);
      }
      pit[h].push(u);
      // Where the centre sits: the stage's median (mean of the 0.475 and 0.525 levels) and the
      // corrected members' median, each against the observation.
      const stageMedian = (q[9] + q[10]) / 2;
      const cm = (f.ensemble.corrected ?? []).map((m) => m.values[h]).sort((a, b) => a - b);
      const memberMedian = cm.length ? (cm[(cm.length - 1) >> 1] + cm[cm.length >> 1]) / 2 : NaN;
      below[h].stage += y < stageMedian ? 1 : 0;
      below[h].members += y < memberMedian ? 1 : 0;
      below[h].shift += Math.log((stageMedian + 0.1) / (memberMedian + 0.1));
      if (y >= q[0] && y <= q[q.length - 1]) inside95[h]++;
      // CRPS ≈ (2/K)·Σ quantile scores at the K midpoint levels.
      let s = 0;
      for (let l = 0; l < LEVELS.length; l++) s += ((y < q[l] ? 1 : 0) - LEVELS[l]) * (q[l] - y);
      crps[h] += (2 * s) / LEVELS.length;
      cases[h]++;
    }
    thresholds.forEach((t, j) => {
      const exceeded = obs.some((y) => y !== null && y > t.value);
      if (!exceeded && obs.some((y) => y === null)) return; // unknown: a missing day might have exceeded
      anyTime[j].p.push(f.thresholds[j].anyTime);
      anyTime[j].o.push(exceeded ? 1 : 0);
    });
  }
  const tRuns = performance.now();
  const ok = (b: boolean) => (b ? 'met' : 'MISSED');
  console.log(`Scenario seed ${seed}. Held-out period: the last ${HELD_OUT_DAYS} days of ${years} years, ${runs} runs (every ${every} days), ${members} members, 1000 trajectories`);
  console.log(`setup and fit ${((tFit - t0) / 1000).toFixed(1)} s, runs ${((tRuns - tFit) / 1000).toFixed(1)} s; ${past.length} past runs loaded`);
  const version = (await send('GET', `/gauges/${gaugeId}/models/${job.result.versionId}`)).body as { archives: Record<string, unknown>[] };
  for (const a of version.archives) console.log(`archive ${a.kind}/${a.leadMode}: ${JSON.stringify({ cases: a.cases, templates: a.templates, neighbours: a.neighbours, leadScale: a.leadScale, forcingPaths: a.forcingPaths })}`);
  console.log('');
  console.log('| lead | cases | alpha (goal ≥ 0.95) | 95 % coverage (goal 0.94–0.96) | CRPS (m3/s) | mean PIT | PIT histogram (10 bins, %) |');
  console.log('|---|---|---|---|---|---|---|');
  for (let h = 0; h < H; h++) {
    const a = alphaIndex(pit[h]);
    const c = inside95[h] / cases[h];
    const bins = new Array(10).fill(0);
    for (const u of pit[h]) bins[Math.min(9, Math.floor(u * 10))]++;
    const meanPit = pit[h].reduce((x, y) => x + y, 0) / pit[h].length;
    console.log(`| ${h + 1} | ${cases[h]} | ${a.toFixed(3)} ${ok(a >= 0.95)} | ${c.toFixed(3)} ${ok(c >= 0.94 && c <= 0.96)} | ${(crps[h] / cases[h]).toFixed(3)} | ${meanPit.toFixed(3)} | ${bins.map((b) => Math.round((100 * b) / pit[h].length)).join(' ')} |`);
  }
  console.log('');
  console.log('| lead | observed below the stage median | observed below the corrected members\' median | mean log(stage median / members\' median) |');
  console.log('|---|---|---|---|');
  for (let h = 0; h < H; h++) console.log(`| ${h + 1} | ${(below[h].stage / cases[h]).toFixed(3)} | ${(below[h].members / cases[h]).toFixed(3)} | ${(below[h].shift / cases[h]).toFixed(4)} |`);
  const meanCrps = crps.reduce((a, b) => a + b, 0) / cases.reduce((a, b) => a + b, 0);
  console.log(`mean CRPS over leads: ${meanCrps.toFixed(4)} m3/s`);
  console.log('');
  console.log('| threshold | runs | events | mean any-time probability | observed frequency | ratio (goal 0.9–1.1) |');
  console.log('|---|---|---|---|---|---|');
  thresholds.forEach((t, j) => {
    const { p, o } = anyTime[j];
    const mp = p.reduce((a, b) => a + b, 0) / p.length;
    const mo = o.reduce((a, b) => a + b, 0) / o.length;
    const ratio = mo > 0 ? mp / mo : NaN;
    console.log(`| ${t.label} (${t.value}) | ${p.length} | ${o.reduce((a, b) => a + b, 0)} | ${mp.toFixed(4)} | ${mo.toFixed(4)} | ${Number.isFinite(ratio) ? ratio.toFixed(2) : 'n/a (no event)'} ${Number.isFinite(ratio) ? ok(ratio >= 0.9 && ratio <= 1.1) : ''} |`);
  });
  console.log('');
  console.log('Reliability of the any-time probability (all thresholds pooled):');
  console.log('| forecast probability | runs × thresholds | mean forecast | observed frequency |');
  console.log('|---|---|---|---|');
  const edges = [0, 0.02, 0.1, 0.3, 0.5, 0.7, 0.9, 1.0001];
  for (let b = 0; b + 1 < edges.length; b++) {
    let k = 0;
    let sp = 0;
    let so = 0;
    anyTime.forEach(({ p, o }) =>
      p.forEach((x, i) => {
        if (x >= edges[b] && x < edges[b + 1]) {
          k++;
          sp += x;
          so += o[i];
        }
      }),
    );
    console.log(`| ${edges[b].toFixed(2)}–${Math.min(1, edges[b + 1]).toFixed(2)} | ${k} | ${k ? (sp / k).toFixed(3) : '–'} | ${k ? (so / k).toFixed(3) : '–'} |`);
  }
} finally {
  await runner.stop();
  await app.close();
  await db.close();
}
