// Timings of the feature builder and one Bayesian-optimisation step (printed, never asserted).
// Run: npx tsx bench/features-tuning.ts
import { createPrng } from '../src/core/prng.ts';
import { continuousRows, makeFeatureSpec, servingRows } from '../src/core/features/features.ts';
import { latinHypercube } from '../src/models/tuning/latin-hypercube.ts';
import { proposeNext } from '../src/models/tuning/propose-next.ts';

function time(fn: () => unknown, repeat = 5): number {
  let best = Infinity;
  for (let r = 0; r < repeat; r++) {
    const t0 = performance.now();
    fn();
    best = Math.min(best, performance.now() - t0);
  }
  return best;
}

const rng = createPrng(1);
const series = (n: number): Float64Array => Float64Array.from({ length: n }, () => 10 + rng.nextFloat() * 100);
const spec = makeFeatureSpec({
  stepSeconds: 86400,
  forcings: [{ name: 'precipitation', lags: 3 }, { name: 'air_temperature', lags: 1 }],
  leadTime: true,
  issueError: true,
});
const rows: { task: string; ms: string }[] = [];

const n = 20 * 365;
const t0 = Date.UTC(2000, 0, 1);
const cont = {
  times: Float64Array.from({ length: n }, (_, i) => t0 + i * 86_400_000),
  sim: series(n), obs: series(n),
  forcings: { precipitation: series(n), air_temperature: series(n) },
};
rows.push({ task: `continuousRows, 20 y daily (${n} rows × 20 features)`, ms: time(() => continuousRows(spec, cont)).toFixed(2) });

for (const [members, leads] of [[50, 15], [50, 240]]) {
  const run = {
    issueTime: t0, nLeads: leads,
    members: Array.from({ length: members }, () => series(leads + 9)),
    forcings: { precipitation: series(leads + 3), air_temperature: series(leads + 1) },
    issueObservation: 42,
  };
  const out = new Float32Array(members * leads * 20);
  rows.push({ task: `servingRows ${members} members × ${leads} leads`, ms: time(() => servingRows(spec, run, out), 20).toFixed(3) });
}

for (const [trials, d] of [[10, 3], [25, 3], [25, 6], [50, 6]]) {
  const pts = latinHypercube(trials, d, createPrng(2));
  const values = Array.from({ length: trials }, (_, i) => Math.sin(7 * pts[i * d]) + pts[i * d + 1] ** 2);
  rows.push({ task: `proposeNext: ${trials} trials, ${d} parameters`, ms: time(() => proposeNext(pts, d, values, createPrng(3)), 3).toFixed(1) });
}
console.table(rows);
