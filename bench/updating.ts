/**
 * Issue-time updating on the demo scenario (invented data): the residual model and its updater
 * are fitted on the archive up to a cut-off with the demo's settings ("auto" updating, 30-step
 * templates, 40,000 training rows) but one untuned model instead of a tuned bundle of three, to
 * keep the bench short; then a
 * reforecast-mode hindcast over the years after it, which the model never saw: daily runs of the
 * 40 members from their states at issue time, driven by perturbed forecast forcings. Prints the
 * CRPS of the stochastic stage per lead without and with updating (on the observation at issue
 * time), the gain with its sampling error, the 95 % interval coverage, and whether each goal is
 * met. Goals (from the issue that asked for updating): lead-1 CRPS at least 40 % lower, lead 3 at
 * least 15 % lower, no lead worse beyond its sampling error (2 standard errors), 95 % coverage
 * within 0.93–0.97 at every lead. Printed, never asserted; nothing here is tuned to it.
 * With --past-runs, weekly past runs of the validation period are given to the fit as stored
 * reforecasts would be (they join the updater's training, scoring and archive).
 * With --on, the fit asks for updating at every lead time instead of auto (for comparison).
 * Run: npx tsx bench/updating.ts [hindcastYears=3] [--past-runs] [--on]
 */
import { archiveToBytes } from '../src/core/stochastic/archive-codec.ts';
import { computeHindcast } from '../src/models/hindcast-compute.ts';
import { defaultPeriods } from '../src/services/fit.ts';
import { fitResidualModel } from '../src/models/residual-fit.ts';
import type { ArchiveSeries, ReforecastSet } from '../src/core/archive-types.ts';
import { buildScenario } from '../src/scenario/scenario.ts';

const args = process.argv.slice(2).filter((a) => !a.startsWith('--'));
const withPastRuns = process.argv.includes('--past-runs');
const mode = process.argv.includes('--on') ? ('on' as const) : ('auto' as const);
const hindcastYears = Number(args[0] ?? 3);
const H = 10;
const t0 = performance.now();
const s = buildScenario({ seed: 1 });
const n = s.times.length;
const timesMs = Float64Array.from(s.times, (t) => Date.parse(t));
const cut = n - Math.round(hindcastYears * 365) - 30;
const toSeries = (end: number): ArchiveSeries => ({
  stepSeconds: 86400,
  times: timesMs.slice(0, end),
  observed: Float64Array.from(s.observedFlow.slice(0, end), (v) => (v === null ? NaN : v)),
  forcings: { precipitation: Float64Array.from(s.forcings.precipitation.slice(0, end)), air_temperature: Float64Array.from(s.forcings.air_temperature.slice(0, end)) },
  members: s.memberIds.map((id) => ({ id, values: Float64Array.from(s.memberSimulations[id].slice(0, end)) })),
});
const fitSeries = toSeries(cut);
const periods = defaultPeriods(fitSeries);
const day = (ms: number) => new Date(ms).toISOString().slice(0, 10);
console.log(`updating: ${mode}${withPastRuns ? ', with past runs' : ''}`);
console.log(`scenario: ${n} days, ${s.memberIds.length} members; fit on ${s.times[0].slice(0, 10)} … ${s.times[cut - 1].slice(0, 10)} (validation from ${day(periods.validation.fromMs)})`);

let reforecasts: ReforecastSet | null = null;
if (withPastRuns) {
  const fromIndex = timesMs.findIndex((t) => t >= periods.validation.fromMs);
  const runs = s.reforecasts({ fromIndex, toIndex: cut - 1 - H, everySteps: 7 });
  const ids = [...s.memberIds].sort();
  const values = new Float64Array(runs.length * ids.length * H).fill(NaN);
  runs.forEach((r, u) => r.members.forEach((m) => {
    const j = ids.indexOf(m.id);
    for (let h = 0; h < H; h++) values[(u * ids.length + j) * H + h] = m.values[m.warmupSteps + h];
  }));
  // With the forecast forcings each run was driven by, so their feature rows carry the forcing error.
  const forcings: Record<string, Float64Array> = {};
  for (const name of ['precipitation', 'air_temperature'] as const) {
    forcings[name] = new Float64Array(runs.length * H);
    runs.forEach((r, u) => {
      for (let h = 0; h < H; h++) forcings[name][u * H + h] = r.forcings[name][r.warmupSteps + h];
    });
  }
  reforecasts = { issueTimes: Float64Array.from(runs, (r) => Date.parse(r.issueTime)), nLeads: H, memberIds: ids, values, forcings };
  console.log(`past runs given to the fit: ${runs.length} weekly runs issued in the validation period`);
}
const fit = await fitResidualModel(fitSeries, {
  reforecasts,
  ...periods,
  trainer: 'gradient-boosting',
  params: { nRounds: 250, learningRate: 0.08, maxDepth: 5, patience: 20 },
  tuning: null,
  bundle: 1,
  seed: 1,
  simLags: 9,
  forcings: [
    { name: 'air_temperature', lags: 3 },
    { name: 'precipitation', lags: 3 },
  ],
  seasonal: true,
  transform: { kind: 'log' },
  templateLength: 30,
  maxTrainRows: 40_000,
  updating: { mode, leads: H, leadBands: null, history: 2, trees: true, seed: 1, maxTrainRows: 40_000 },
});
const tFit = performance.now();
const u = fit.updating;
if (!u) throw new Error(`no updating fitted: ${fit.updatingError}`);
console.log(`\nsources: pseudo-forecasts ${JSON.stringify(u.sources.pseudoForecasts)}, past runs ${JSON.stringify(u.sources.pastRuns)}; auto also checked on past runs: ${u.checkedOnPastRuns}`);
console.log(`updater: ${u.model ? `${u.model.method}, AR(1) φ = ${u.model.ar1.toFixed(3)}` : `off (${u.reason})`}; best candidate on the held-out block: ${u.best}; served: ${u.served}`);
console.log(`blocks: fit ${u.blocks.fit.from.slice(0, 10)}…${u.blocks.fit.to.slice(0, 10)}, early stopping ${u.blocks.earlyStopping.from.slice(0, 10)}…, held out ${u.blocks.heldOut.from.slice(0, 10)}…${u.blocks.heldOut.to.slice(0, 10)} (${u.blocks.heldOut.issues} issues, ${u.members} members)`);
console.log('candidates, CRPS of the members per lead on the held-out block (m3/s):');
console.table(
  u.candidates.map((c) => ({ candidate: c.name, mean: c.meanCrps?.toFixed(3), ...Object.fromEntries(c.byLead.map((l) => [`L${l.lead}`, l.crps?.toFixed(3)])) })),
);
if (u.sources.pastRuns.heldOut > 0) {
  console.log('the same on the past runs issued in the held-out block:');
  console.table(u.candidates.filter((c) => c.pastRuns).map((c) => ({ candidate: c.name, mean: c.pastRuns!.meanCrps?.toFixed(3), ...Object.fromEntries(c.pastRuns!.byLead.map((l) => [`L${l.lead}`, l.crps?.toFixed(3)])) })));
}
console.log(`lead times updated: ${u.leads.filter((l) => l.on).map((l) => l.lead).join(', ') || 'none'}`);
if (!u.model || !u.archive) {
  console.log('updating is off for this version: nothing to hindcast with it');
  process.exit(0);
}

// Hindcast: daily issues after the cut-off (+30 days), reforecasts from the scenario's runs.
const first = cut + 30;
const last = n - 1 - H;
const issues: number[] = [];
for (let i = first; i <= last; i++) issues.push(i);
const M = s.memberIds.length;
const values = new Float64Array(issues.length * M * H);
issues.forEach((i, j) => {
  const run = s.forecastRun(i);
  run.members.forEach((m, k) => {
    for (let h = 0; h < H; h++) values[(j * M + k) * H + h] = m.values[run.warmupSteps + h];
  });
});
const tRuns = performance.now();
const out = await computeHindcast(
  {
    series: toSeries(n),
    issueIndex: Int32Array.from(issues),
    reforecast: { values },
    model: { spec: fit.spec, parts: fit.parts.map((p) => p.onnx) },
    archive: archiveToBytes(fit.evaluation.correctedArchive),
    settings: {
      mode: 'reforecast',
      horizon: H,
      seed: 1,
      nDraws: 1000,
      seasonalWindowDays: 60,
      thresholds: s.gauge.thresholds.map((t) => t.value),
      leadRange: null,
      sizeStudy: { sources: [], sizes: [], repeats: 1, caseFraction: null, targetCases: 1 },
    },
    updating: { model: u.model, archive: archiveToBytes(u.archive.archive) },
  },
  () => {},
  () => false,
);
const tHind = performance.now();
const rows = out.updating!.byLead;
console.log(`\nreforecast-mode hindcast ${s.times[first].slice(0, 10)} … ${s.times[last].slice(0, 10)}: ${out.issues.used} daily issues × ${M} members, 1000 trajectories (never seen by the fit)`);
const f = (x: number | null, d = 3) => (x === null ? '–' : x.toFixed(d));
console.table(
  rows.map((r) => ({
    lead: r.lead,
    'CRPS raw': f(r.crps.raw),
    'corrected': f(r.crps.corrected),
    'updated members': f(r.crps.updated),
    'stochastic': f(r.crps.stochastic),
    'stochastic+updating': f(r.crps.stochasticUpdated),
    'gain %': f(r.gain.relative === null ? null : 100 * r.gain.relative, 1),
    'gain ± 2 SE': `${f(r.gain.mean)} ± ${f(r.gain.se === null ? null : 2 * r.gain.se)}`,
    'cov95 without': f(r.coverage95.stochastic),
    'cov95 with': f(r.coverage95.stochasticUpdated),
  })),
);
const goal = (ok: boolean, what: string) => console.log(`${ok ? 'MET    ' : 'NOT MET'}  ${what}`);
const rel = (k: number) => rows[k - 1].gain.relative ?? -Infinity;
goal(rel(1) >= 0.4, `lead-1 CRPS at least 40 % lower with updating (${f(100 * rel(1), 1)} %)`);
goal(rel(3) >= 0.15, `lead-3 CRPS at least 15 % lower with updating (${f(100 * rel(3), 1)} %)`);
const worse = rows.filter((r) => r.gain.mean !== null && r.gain.se !== null && r.gain.mean < -2 * r.gain.se);
goal(worse.length === 0, `no lead worse beyond its sampling error (2 SE)${worse.length ? `: worse at ${worse.map((r) => r.lead).join(', ')}` : ''}`);
const badCov = rows.filter((r) => r.coverage95.stochasticUpdated === null || r.coverage95.stochasticUpdated < 0.93 || r.coverage95.stochasticUpdated > 0.97);
goal(badCov.length === 0, `95 % interval coverage within 0.93–0.97 at every lead (with updating)${badCov.length ? `: outside at ${badCov.map((r) => `${r.lead} (${f(r.coverage95.stochasticUpdated)})`).join(', ')}` : ''}`);
console.log(`\ntimes: fit ${((tFit - t0) / 1000).toFixed(1)} s, runs ${((tRuns - tFit) / 1000).toFixed(1)} s, hindcast ${((tHind - tRuns) / 1000).toFixed(1)} s`);
