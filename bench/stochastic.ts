/**
 * Stochastic error stage timing: 51 members × 240 lead times × 1000 trajectories, 7 quantiles,
 * 3 thresholds, with realistic archives. Target: median under 15 ms on one core.
 * Run: npx tsx bench/stochastic.ts [runs]
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

const members = new Float64Array(nMembers * nLeads);
for (let m = 0; m < nMembers; m++) for (let h = 0; h < nLeads; h++) members[m * nLeads + h] = 50 + 20 * Math.sin(h / 30) + 5 * g.normal();
const dayOfYear = Uint16Array.from({ length: nLeads }, (_, h) => ((120 + Math.floor(h / 24)) % 365) + 1);

const cases: { name: string; archive: ErrorArchive; options: Partial<StochasticOptions> }[] = [];
const t0 = performance.now();
const lf = seriesArchive('none');
const lfLog = seriesArchive('log');
const lfBoxCox = seriesArchive('boxcox');
const rf = reforecastArchive();
const buildMs = performance.now() - t0;
cases.push({ name: 'lead-free 20 y daily, additive', archive: lf, options: {} });
cases.push({ name: 'lead-free 20 y daily, log, ±30 d', archive: lfLog, options: { seasonalWindowDays: 30 } });
cases.push({ name: 'lead-free 20 y daily, Box–Cox 0.3', archive: lfBoxCox, options: {} });
cases.push({ name: 'reforecast 240 × 300, additive', archive: rf, options: {} });
cases.push({ name: 'lead-free additive, no shuffle', archive: lf, options: { shuffle: false } });

const ws = createStochasticWorkspace();
const rows: string[][] = [];
for (const c of cases) {
  const times: number[] = [];
  const cpu: number[] = [];
  for (let r = 0; r < runs + 3; r++) {
    const c0 = process.cpuUsage();
    const s = performance.now();
    runStochasticStage(
      c.archive,
      { members, nMembers, nLeads, dayOfYear },
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

const head = ['case (51 members × 240 leads × 1000 draws, 7 q, 3 thr)', 'cases', 'templates', 'wall median ms', 'wall p90 ms', 'CPU median ms', 'CPU p90 ms'];
const widths = head.map((h, i) => Math.max(h.length, ...rows.map((r) => r[i].length)));
const line = (r: string[]) => r.map((v, i) => (i === 0 ? v.padEnd(widths[i]) : v.padStart(widths[i]))).join(' | ');
// CPU time (process.cpuUsage, this process only) is shown beside wall time because the machine may be
// shared: under load, wall time includes waiting for a core.
console.log(`runs per case: ${runs} (after 3 warm-up runs); archive build total ${buildMs.toFixed(0)} ms; node ${process.version}; load average ${os.loadavg()[0].toFixed(2)} on ${os.availableParallelism()} cores`);
console.log(line(head));
console.log(widths.map((w) => '-'.repeat(w)).join('-|-'));
for (const r of rows) console.log(line(r));
