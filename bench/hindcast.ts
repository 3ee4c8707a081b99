/**
 * Hindcast benchmark: 30 years of daily issues (10,950), 50 members, 10 daily lead times,
 * 1000 stochastic trajectories per issue, then the full side-by-side verification (raw,
 * corrected, stochastic), an ensemble-size study, the stochastic-stage advice and a drift
 * check. Goal: under 60 s on this machine.
 * Run: npx tsx bench/hindcast.ts [years]
 *
 * Data are invented: a seasonal river with log-normal, lead-growing forecast errors; raw
 * members are biased (+15 %) and too narrow. The correction is a fixed multiplicative bias
 * removal standing in for the residual model (the ONNX trees in production). The error archive
 * comes from a separate 10-year validation period of the same process.
 */
import {
  adviseStochasticStage,
  buildArchiveFromReforecasts,
  createComparison,
  createPrng,
  createStochasticWorkspace,
  driftReferenceFrom,
  runHindcast,
  watchDrift,
  type VerificationCase,
} from '../src/core/index.ts';

const years = Number(process.argv[2] ?? 30);
const nIssues = Math.round(years * 365);
const M = 50;
const H = 10;
const N = 1000;
const BIAS = Math.log(1.15);

interface Period {
  raw: Float64Array; // [(issue·M + member)·H + lead]
  observed: Float64Array; // [issue·H + lead]
  dayOfYear: Uint16Array; // [issue·H + lead]
}

function period(issues: number, seed: number): Period {
  const g = createPrng(seed);
  // Daily observed flow: seasonal mean × exp(AR(1)), over the issues plus the horizon.
  const days = issues + H + 1;
  const q = new Float64Array(days);
  let ar = 0;
  for (let d = 0; d < days; d++) {
    ar = 0.9 * ar + 0.25 * g.normal();
    q[d] = (60 + 45 * Math.sin((2 * Math.PI * (d - 80)) / 365.25)) * Math.exp(ar);
  }
  const raw = new Float64Array(issues * M * H);
  const observed = new Float64Array(issues * H);
  const dayOfYear = new Uint16Array(issues * H);
  for (let i = 0; i < issues; i++) {
    let common = 0;
    for (let h = 0; h < H; h++) {
      const valid = i + h + 1;
      observed[i * H + h] = q[valid];
      dayOfYear[i * H + h] = (valid % 365) + 1;
      // Error shared by all members (the part the ensemble does not see), growing with lead.
      common = 0.8 * common + (0.06 + 0.02 * h) * g.normal();
      const sdMember = 0.3 * (0.08 + 0.04 * h); // too narrow on purpose
      for (let m = 0; m < M; m++) raw[(i * M + m) * H + h] = q[valid] * Math.exp(BIAS + common + sdMember * g.normal());
    }
  }
  return { raw, observed, dayOfYear };
}

const correct = (raw: Float64Array, _issue: number, out: Float64Array): void => {
  const f = Math.exp(-BIAS);
  for (let i = 0; i < raw.length; i++) out[i] = raw[i] * f;
};

const rows: [string, string][] = [];
const t0 = performance.now();
const validation = period(3650, 1);
const hindcast = period(nIssues, 2);
const tData = performance.now();

// Archive: errors of the corrected ensemble mean in the validation period, log space.
const corrMean = new Float64Array(3650 * H);
const buf = new Float64Array(M * H);
const out = new Float64Array(M * H);
for (let i = 0; i < 3650; i++) {
  buf.set(validation.raw.subarray(i * M * H, (i + 1) * M * H));
  correct(buf, i, out);
  for (let h = 0; h < H; h++) {
    let s = 0;
    for (let m = 0; m < M; m++) s += out[m * H + h];
    corrMean[i * H + h] = s / M;
  }
}
const archive = buildArchiveFromReforecasts({
  nIssues: 3650,
  nLeads: H,
  corrected: corrMean,
  observed: validation.observed,
  dayOfYear: validation.dayOfYear,
  transform: { kind: 'log' },
});
const tArchive = performance.now();

const sorted = Float64Array.from(validation.observed).sort();
const thresholds = [sorted[Math.floor(0.9 * sorted.length)], sorted[Math.floor(0.99 * sorted.length)]];
const comparison = createComparison({
  thresholds,
  sizeStudy: { sources: ['corrected'], repeats: 10, caseFraction: 0.1, seed: 5 },
});
// Drift watch input: the last year's cases, copied (the hindcast reuses its buffers).
const lastYear: VerificationCase[] = [];
const lastYearFrom = nIssues - 365;
let verifyMs = 0;
const ws = createStochasticWorkspace();
const summary = runHindcast(
  {
    nIssues,
    nMembers: M,
    nLeads: H,
    raw: hindcast.raw,
    observed: hindcast.observed,
    dayOfYear: hindcast.dayOfYear,
    correct,
    archive,
    stochastic: { seed: 1000, nDraws: N },
  },
  (c, issue) => {
    const a = performance.now();
    comparison.add(c);
    if (issue >= lastYearFrom) {
      lastYear.push({ lead: c.lead, observation: c.observation, raw: c.raw, corrected: c.corrected, stochastic: Float64Array.from(c.stochastic as Float64Array) });
    }
    verifyMs += performance.now() - a;
  },
  ws,
);
const tRun = performance.now();
const report = comparison.result();
const tReport = performance.now();
const advice = adviseStochasticStage(report);
const drift = watchDrift(lastYear, driftReferenceFrom(report));
const tEnd = performance.now();

const f = (x: number | null, d = 3) => (x === null ? 'n/a' : x.toFixed(d));
console.log(`Hindcast: ${summary.issues} issues × ${M} members × ${H} leads, ${N} trajectories; ${summary.cases} cases verified`);
console.log('');
console.log('| step | time |');
console.log('|---|---|');
rows.push(['synthetic data (not part of the goal)', `${((tData - t0) / 1000).toFixed(2)} s`]);
rows.push(['archive build (3650 × 10 reforecast cases)', `${((tArchive - tData) / 1000).toFixed(2)} s`]);
rows.push(['correction + stochastic stage', `${((tRun - tArchive - verifyMs) / 1000).toFixed(2)} s (${((tRun - tArchive - verifyMs) / nIssues).toFixed(2)} ms per issue)`]);
rows.push(['verification, streamed (3 forecasts + size study)', `${(verifyMs / 1000).toFixed(2)} s`]);
rows.push(['report (PIT, Brier, QQ, by lead)', `${((tReport - tRun) / 1000).toFixed(2)} s`]);
rows.push(['advice + drift watch (last year)', `${((tEnd - tReport) / 1000).toFixed(2)} s`]);
rows.push(['total hindcast (archive → advice)', `${((tEnd - tData) / 1000).toFixed(2)} s (goal < 60 s)`]);
for (const [a, b] of rows) console.log(`| ${a} | ${b} |`);
console.log('');
console.log('| forecast | CRPS | fair CRPS | Hersbach rel. | alpha | PIT cov. 90 % | band width 90 % | MAE median | spread |');
console.log('|---|---|---|---|---|---|---|---|---|');
for (const s of [report.raw, report.corrected, report.stochastic!]) {
  const iv = s.intervals.find((i) => i.level === 0.9)!;
  console.log(
    `| ${s.source} | ${f(s.crps.crps)} | ${f(s.crps.fairCrps)} | ${f(s.crps.hersbach.reliability)} | ${f(s.alphaIndex)} | ${f(iv.pitCoverage)} | ${f(iv.meanWidth, 1)} | ${f(s.median.mae)} | ${s.spread.class} |`,
  );
}
console.log('');
console.log('| members | CRPS | fair CRPS | width 95 % | alpha |');
console.log('|---|---|---|---|---|');
for (const r of report.sizeStudy![0].rows) console.log(`| ${r.size} | ${f(r.crps)} | ${f(r.fairCrps)} | ${f(r.meanWidth, 1)} | ${f(r.alphaIndex)} |`);
console.log('');
console.log(`Advice: ${advice.recommendation}`);
for (const r of advice.reasons) console.log(`  - ${r}`);
console.log(`Drift (last year, ${drift.evidence.cases} cases): ${drift.status} — ${drift.reasons.join(' ')}`);
