/**
 * The verification of 5,000 stored runs from their verification records, the computation alone (no
 * database, one thread): what the worker does for GET /gauges/:id/verification (core
 * verifyStoredRecords). Each run: 20 raw and 20 corrected members, 100 stage quantiles, 3
 * thresholds, 10 daily lead times; 20 years of daily observations before them. Prints figures
 * with the load average; asserts nothing.
 * Run: npx tsx bench/verification-records.ts [runs] [repeats]
 * Data are invented (a seasonal log-AR(1) river; members scattered around the truth).
 */
import os from 'node:os';
import { benchRiver, DAY, H, K, M, THRESHOLDS } from './verification-bench-river.ts';
import { midpointProbs } from '../src/core/verification/index.ts';
import { buildRunRecord, packRecords } from '../src/core/verification/run-record.ts';
import { verifyStoredRecords, type StoredRunMeta } from '../src/core/verification/stored-verification.ts';

const nRuns = Number(process.argv[2] ?? 5000);
const repeats = Number(process.argv[3] ?? 4);
const { g, nHist, times, z, flow } = benchRiver(nRuns);
const probs = midpointProbs(K);
const metas: StoredRunMeta[] = [];
const records: Uint8Array[] = [];
for (let s = 0; s < nRuns; s++) {
  const i = nHist + s;
  const member = (scale: number) => {
    const v: number[] = [];
    let e = z[i];
    for (let k = 0; k < H; k++) {
      e = 0.85 * e + 0.35 * g.normal();
      v.push(scale * 50 * Math.exp(e + 0.5 * Math.sin((2 * Math.PI * (i + k + 1)) / 365.25)));
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
  const issued = THRESHOLDS.map((t) => {
    const exceedance = percentiles.map((q) => q.filter((x) => x > t.value).length / K);
    return { ...t, exceedance, anyTime: Math.min(1, Math.max(...exceedance) * 1.2) };
  });
  metas.push({ id: `run-${s}`, issueMs: times[i], source: 'default', status: 'corrected', modelVersionId: null });
  records.push(buildRunRecord({ validMs: Array.from({ length: H }, (_, k) => times[i + k + 1]), raw, corrected, percentiles, updated: false, issued }, THRESHOLDS));
}
console.log(`node ${process.version}, ${os.cpus()[0]?.model ?? 'cpu'} (${os.cpus().length} cores shared with other work); ${nRuns} runs × ${H} lead times, records ${(records.reduce((a, b) => a + b.byteLength, 0) / 1e6).toFixed(1)} MB`);
for (let r = 0; r < repeats; r++) {
  const a = performance.now();
  const out = verifyStoredRecords({
    thresholds: THRESHOLDS,
    stepMs: DAY,
    attentionLevel: 0.3,
    fitting: { fromMs: times[0], toMs: times[nHist - 1] },
    observations: { times, values: flow },
    runs: metas,
    records: packRecords(records),
  });
  const wall = performance.now() - a;
  console.log(
    `run ${r + 1}: wall ${wall.toFixed(0)} ms (${Object.entries(out.ms).map(([k, ms]) => `${k} ${ms.toFixed(0)}`).join(', ')}); ${out.comparison.cases.used} cases; load average ${os.loadavg().map((x) => x.toFixed(1)).join(' ')}`,
  );
}
