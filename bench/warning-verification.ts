/**
 * Verification of 5,000 stored runs, the computation alone (no database): each run has 20 raw and
 * 20 corrected members, 100 stage quantiles and the issued probabilities for 3 thresholds over 10
 * daily lead times; the warning verification (Brier parts, reliability diagrams with 200
 * resamples, ROC, value, attention flag, CRPS skill vs climatology and persistence, tw-CRPS, flow
 * classes, differences, 500 block-bootstrap replicates) and the side-by-side comparison run as
 * GET /gauges/:id/verification runs them. Goal: under 1 s. Prints figures; asserts nothing.
 * Run: npx tsx bench/warning-verification.ts [runs] [replicates]
 * Data are invented (a seasonal log-AR(1) river; members scattered around the truth).
 */
import os from 'node:os';
import { benchRiver, DAY, H, K, M, THRESHOLDS } from './verification-bench-river.ts';
import {
  createComparison,
  createWarningVerification,
  midpointProbs,
  warningReferences,
  warningRunFromStored,
  type StoredRunForWarnings,
} from '../src/core/verification/index.ts';

const nRuns = Number(process.argv[2] ?? 5000);
const replicates = Number(process.argv[3] ?? 500);
const { g, nHist, n, times, z, flow } = benchRiver(nRuns);
const obsByTime = new Map<number, number>();
for (let i = 0; i < n; i++) obsByTime.set(times[i], flow[i]);

// Stored runs as the store hands them over (plain arrays, as decoded from JSON and float32 bytes).
const probs = midpointProbs(K);
const stored: StoredRunForWarnings[] = [];
for (let s = 0; s < nRuns; s++) {
  const i = nHist + s;
  const member = (scale: number) => {
    const v: number[] = [];
    let e = z[i];
    for (let k = 0; k < H; k++) {
      e = 0.85 * e + 0.35 * g.normal();
      v.push(Math.round(scale * 50 * Math.exp(e + 0.5 * Math.sin((2 * Math.PI * (i + k + 1)) / 365.25)) * 1e4) / 1e4);
    }
    return { values: v };
  };
  const raw = Array.from({ length: M }, () => member(1.2));
  const corrected = Array.from({ length: M }, () => member(1));
  const percentiles: number[][] = [];
  for (let k = 0; k < H; k++) {
    const col = corrected.map((m) => m.values[k]).sort((a, b) => a - b);
    percentiles.push(Array.from(probs, (p) => col[Math.min(M - 1, Math.floor(p * M))] * (0.9 + 0.2 * p)));
  }
  const thresholds = THRESHOLDS.map((t) => {
    const exceedance = percentiles.map((q) => q.filter((x) => x > t.value).length / K);
    return { exceedance, anyTime: Math.min(1, Math.max(...exceedance) * 1.2) };
  });
  stored.push({ issueMs: times[i], validMs: Array.from({ length: H }, (_, k) => times[i + k + 1]), raw, corrected, percentiles, thresholds });
}

function once(): { total: number; cpu: number; warnings: number; comparison: number; cases: number } {
  const cpu0 = process.cpuUsage();
  const a = performance.now();
  const refs = warningReferences(times, flow, { cutoffMs: stored[0].issueMs, fitting: { fromMs: times[0], toMs: times[nHist - 1] }, thresholds: THRESHOLDS.map((t) => t.value), horizon: H, stepMs: DAY });
  const w = createWarningVerification({
    sources: ['raw', 'corrected', 'stochastic'],
    thresholds: THRESHOLDS,
    attentionLevel: 0.3,
    climatology: refs.climatology,
    climatologicalRates: refs.climatologicalRates,
    stepMs: DAY,
    replicates,
  });
  const comparison = createComparison({ seed: 1, thresholds: THRESHOLDS.map((t) => t.value), includeStochastic: true });
  let compMs = 0;
  for (const r of stored) {
    const run = warningRunFromStored(r, (t) => obsByTime.get(t) ?? NaN, obsByTime.get(r.issueMs) ?? NaN);
    w.addRun(run);
    const c0 = performance.now();
    for (let k = 0; k < H; k++) {
      comparison.add({
        lead: k,
        observation: run.observed[k],
        raw: r.raw.map((m) => m.values[k]),
        corrected: r.corrected.map((m) => m.values[k]),
        stochasticQuantiles: { probs, values: r.percentiles[k] },
      });
    }
    compMs += performance.now() - c0;
  }
  const b = performance.now();
  const rep = w.result();
  const c = performance.now();
  comparison.result();
  compMs += performance.now() - c;
  const end = performance.now();
  const cpu = process.cpuUsage(cpu0);
  return { total: end - a, cpu: (cpu.user + cpu.system) / 1000, warnings: end - a - compMs, comparison: compMs, cases: rep.cases + 0 * (c - b) };
}

console.log(`node ${process.version}, ${os.cpus()[0]?.model ?? 'cpu'} (${os.cpus().length} cores shared with other work)`);
console.log(`${nRuns} stored runs × ${H} lead times, ${M} raw + ${M} corrected members, ${K} quantiles, ${THRESHOLDS.length} thresholds, ${replicates} bootstrap replicates`);
const results = [];
for (let i = 0; i < Number(process.env.REPEAT ?? 4); i++) results.push(once());
const fmt = (x: number) => `${x.toFixed(0)} ms`;
results.forEach((r, i) => console.log(`run ${i + 1}${i === 0 ? ' (cold)' : ''}: wall ${fmt(r.total)} (CPU time of this process ${fmt(r.cpu)}) = warnings ${fmt(r.warnings)} + side-by-side comparison ${fmt(r.comparison)}; ${r.cases} cases`));
const warmRuns = results.length > 1 ? results.slice(1) : results;
const median = (x: number[]) => x.sort((a, b) => a - b)[(x.length - 1) >> 1];
console.log(
  `median of the warm runs: wall ${fmt(median(warmRuns.map((r) => r.total)))}, CPU ${fmt(median(warmRuns.map((r) => r.cpu)))} (goal under 1000 ms); load average ${os.loadavg().map((x) => x.toFixed(1)).join(' ')} on ${os.cpus().length} cores`,
);
