/**
 * Stochastic error stage timing: 51 members × 240 lead times × 1000 trajectories, 7 quantiles,
 * 3 thresholds, with realistic archives, plus the service's own shape (pooled validation errors of
 * 8 members, log, ±60 days, 107 quantiles). Target: median under 15 ms on one core.
 * Run: npx tsx bench/stochastic.ts [runs] [only cases whose name contains this]
 * Data are invented (a synthetic seasonal river with multiplicative, autocorrelated errors).
 */
import os from 'node:os';
import {
  buildArchiveFromReforecasts,
  buildArchiveFromSeries,
  createPrng,
  createStochasticWorkspace,
  runStochasticStage,
  type ErrorArchive,
  type StochasticOptions,
} from '../src/core/index.ts';
import { makeFeatureSpec } from '../src/core/features/features.ts';
import type { ArchiveSeries } from '../src/core/archive-types.ts';
import { evaluateResidualModel } from '../src/models/residual-evaluation.ts';

const runs = Number(process.argv[2] ?? 40);
const nMembers = 51;
const nLeads = 240;
const g = createPrng(2024);

function flowOn(day: number): number {
  return 40 + 30 * Math.sin((2 * Math.PI * day) / 365.25) + 10 * Math.abs(g.normal());
}

// (a) Lead-free archive: 20 years of daily corrected flow and observations.
function seriesArchive(transform: 'none' | 'log' | 'boxcox'): ErrorArchive {
  const S = 20 * 365;
  const corrected = new Float64Array(S);
  const observed = new Float64Array(S);
  const dayOfYear = new Uint16Array(S);
  let ar = 0;
  for (let i = 0; i < S; i++) {
    dayOfYear[i] = (i % 365) + 1;
    corrected[i] = flowOn(i);
    ar = 0.8 * ar + 0.6 * g.normal() * 0.15;
    observed[i] = corrected[i] * Math.exp(ar);
  }
  return buildArchiveFromSeries({
    corrected,
    observed,
    dayOfYear,
    templateLength: nLeads,
    transform: transform === 'log' ? { kind: 'log' } : transform === 'boxcox' ? { kind: 'boxcox', lambda: 0.3 } : { kind: 'none' },
  });
}

// (b) Reforecast archive: 300 issues × 240 lead times.
function reforecastArchive(): ErrorArchive {
  const nIssues = 300;
  const corrected = new Float64Array(nIssues * nLeads);
  const observed = new Float64Array(nIssues * nLeads);
  const dayOfYear = new Uint16Array(nIssues * nLeads);
  for (let i = 0; i < nIssues; i++) {
    let ar = 0;
    for (let h = 0; h < nLeads; h++) {
      const day = i * 7 + Math.floor(h / 24);
      const k = i * nLeads + h;
      dayOfYear[k] = (day % 365) + 1;
      corrected[k] = flowOn(day);
      ar = 0.95 * ar + 0.3 * g.normal() * (1 + h / 120);
      observed[k] = Math.max(0, corrected[k] + ar);
    }
  }
  return buildArchiveFromReforecasts({ nIssues, nLeads, corrected, observed, dayOfYear });
}

// (c) As the service builds it: validation-period errors of the corrected members (8 of 51 kept,
// pooled), log transform, through evaluateResidualModel with a stand-in residual predictor.
async function serviceArchive(): Promise<ErrorArchive> {
  const day = 86400_000;
  const warm = 30;
  const S = warm + 6 * 365 + 1;
  const t0 = Date.UTC(2017, 11, 2);
  const times = Float64Array.from({ length: S }, (_, i) => t0 + i * day);
  const observed = new Float64Array(S);
  let ar = 0;
  for (let i = 0; i < S; i++) {
    ar = 0.9 * ar + 0.45 * g.normal();
    // Seasonal cycle with a snowmelt peak in spring and low flow in late summer; short gaps.
    const d = (2 * Math.PI * ((i + 335) % 365)) / 365.25;
    observed[i] = i % 320 < 4 ? NaN : Math.max(0.5, (30 + 25 * Math.sin(d - 1.2) + 10 * Math.sin(2 * d)) * Math.exp(0.35 * ar));
  }
  const members = Array.from({ length: nMembers }, (_, m) => {
    let e = 0;
    const bias = 0.1 * g.normal();
    const values = new Float64Array(S);
    for (let i = 0; i < S; i++) {
      e = 0.85 * e + 0.2 * g.normal();
      const o = Number.isNaN(observed[i]) ? observed[i - 4] : observed[i];
      values[i] = o * Math.exp(bias + e);
    }
    return { id: `m${m}`, values };
  });
  const series: ArchiveSeries = { stepSeconds: 86400, times, observed, forcings: {}, members };
  const spec = makeFeatureSpec({ stepSeconds: 86400, simLags: 3 });
  // Stand-in for the residual model: a small correction from the current simulated flow.
  const predictor = async (rows: Float32Array, nRows: number, nF: number) => Float32Array.from({ length: nRows }, (_, r) => -0.05 * rows[r * nF]);
  const ev = await evaluateResidualModel(series, spec, { fromMs: times[warm], toMs: times[S - 1] + day }, [predictor], { transform: { kind: 'log' }, templateLength: nLeads });
  return ev.correctedArchive;
}

const members = new Float64Array(nMembers * nLeads);
for (let m = 0; m < nMembers; m++) for (let h = 0; h < nLeads; h++) members[m * nLeads + h] = 50 + 20 * Math.sin(h / 30) + 5 * g.normal();
const dayOfYear = Uint16Array.from({ length: nLeads }, (_, h) => ((120 + Math.floor(h / 24)) % 365) + 1);
// Service case: daily leads from day 121, members near that season's flow.
const serviceMembers = new Float64Array(nMembers * nLeads);
for (let m = 0; m < nMembers; m++) for (let h = 0; h < nLeads; h++) serviceMembers[m * nLeads + h] = Math.max(0.5, (45 - 20 * Math.sin(h / 60)) * Math.exp(0.15 * g.normal()));
const serviceDayOfYear = Uint16Array.from({ length: nLeads }, (_, h) => ((120 + h) % 365) + 1);
// 7 asked for plus 100 midpoint percentiles, as runs store them for verification.
const serviceProbs = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, ...Array.from({ length: 100 }, (_, i) => (i + 0.5) / 100)];

interface BenchCase {
  name: string;
  archive: ErrorArchive;
  options: Partial<StochasticOptions>;
  members?: Float64Array;
  dayOfYear?: Uint16Array;
}
const cases: BenchCase[] = [];
const t0 = performance.now();
const lf = seriesArchive('none');
const lfLog = seriesArchive('log');
const lfBoxCox = seriesArchive('boxcox');
const rf = reforecastArchive();
const svc = await serviceArchive();
const buildMs = performance.now() - t0;
cases.push({ name: 'lead-free 20 y daily, additive', archive: lf, options: {} });
cases.push({ name: 'lead-free 20 y daily, log, ±30 d', archive: lfLog, options: { seasonalWindowDays: 30 } });
cases.push({ name: 'lead-free 20 y daily, Box–Cox 0.3', archive: lfBoxCox, options: {} });
cases.push({ name: 'reforecast 240 × 300, additive', archive: rf, options: {} });
cases.push({ name: 'lead-free additive, no shuffle', archive: lf, options: { shuffle: false } });
cases.push({
  name: 'service: 8 members pooled, log, ±60 d, 107 q',
  archive: svc,
  options: { seasonalWindowDays: 60, probs: serviceProbs },
  members: serviceMembers,
  dayOfYear: serviceDayOfYear,
});

const only = process.argv[3];
const ws = createStochasticWorkspace();
const rows: string[][] = [];
for (const c of cases) {
  if (only && !c.name.includes(only)) continue;
  const times: number[] = [];
  const cpu: number[] = [];
  for (let r = 0; r < runs + 3; r++) {
    const c0 = process.cpuUsage();
    const s = performance.now();
    runStochasticStage(
      c.archive,
      { members: c.members ?? members, nMembers, nLeads, dayOfYear: c.dayOfYear ?? dayOfYear },
      { seed: r, nDraws: 1000, thresholds: [60, 80, 100], ...c.options },
      ws,
    );
    const e = performance.now() - s;
    const c1 = process.cpuUsage(c0);
    if (r >= 3) {
      // first runs warm the JIT
      times.push(e);
      cpu.push((c1.user + c1.system) / 1000);
    }
  }
  const q = (xs: number[], p: number) => {
    const s = [...xs].sort((a, b) => a - b);
    return s[Math.min(s.length - 1, Math.floor(p * s.length))].toFixed(2);
  };
  rows.push([c.name, String(c.archive.predictor.length), String(c.archive.templateStart.length), q(times, 0.5), q(times, 0.9), q(cpu, 0.5), q(cpu, 0.9)]);
}

const head = ['case (51 members × 240 leads × 1000 draws, 7 q unless said, 3 thr)', 'cases', 'templates', 'wall median ms', 'wall p90 ms', 'CPU median ms', 'CPU p90 ms'];
const widths = head.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
const line = (r: string[]) => r.map((v, i) => (i === 0 ? v.padEnd(widths[i]) : v.padStart(widths[i]))).join(' | ');
// CPU time (process.cpuUsage, this process only) is shown beside wall time because the machine may be
// shared: under load, wall time includes waiting for a core.
console.log(`runs per case: ${runs} (after 3 warm-up runs); archive build total ${buildMs.toFixed(0)} ms; node ${process.version}; load average ${os.loadavg()[0].toFixed(2)} on ${os.availableParallelism()} cores`);
console.log(line(head));
console.log(widths.map((w) => '-'.repeat(w)).join('-|-'));
for (const r of rows) console.log(line(r));
