// Bytes of a forecast answer with members=all|corrected|none, for a run the size of an hourly
// 51-member × 240-lead ensemble (the demo's daily runs are 40 × 10): the same view builder and
// trimming the service uses; values are a smooth invented rise with member spread.
// Usage: npx tsx bench/forecast-sizes.ts [members] [leads]
import { gzipSync } from 'node:zlib';
import { buildForecastView, withMembers } from '../src/services/forecast-view.ts';

const M = Number(process.argv[2] ?? 51);
const H = Number(process.argv[3] ?? 240);
const probs = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95];
const thresholds = [
  { label: '2-year flow', value: 85.2 },
  { label: '10-year flow', value: 121.5 },
  { label: '50-year flow', value: 164.8 },
];
const flow = (m: number, k: number) => 40 + 60 * Math.exp(-(((k - H / 3) / (H / 6)) ** 2)) * (0.7 + (0.6 * m) / M) + Math.sin(m * 7.1 + k * 0.3);
const raw = new Float64Array(M * H).map((_, i) => flow(Math.floor(i / H), i % H) * 1.08);
const corrected = new Float64Array(M * H).map((_, i) => flow(Math.floor(i / H), i % H));
const quantiles = new Float64Array(H * probs.length).map((_, i) => 40 + (i % probs.length) * 5 + Math.floor(i / probs.length) * 0.123);
const exceedance = new Float64Array(thresholds.length * H).map((_, i) => ((i * 37) % 1000) / 1000);
const view = buildForecastView({
  id: '00000000-0000-4000-8000-000000000000',
  gauge: { id: 'corvane-stillmere-bridge', name: 'Corvane at Stillmere Bridge', timeStep: 'PT1H', stepSeconds: 3600, thresholds },
  issueTimeMs: Date.parse('2024-05-01T00:00:00Z'),
  createdAt: '2024-05-01T00:00:05.000Z',
  source: 'bench',
  status: 'corrected',
  degradedReason: null,
  modelVersion: { id: '1', label: 'trees' },
  seed: 1,
  nDraws: 1000,
  attentionLevel: 0.3,
  probs,
  nLeads: H,
  memberIds: Array.from({ length: M }, (_, m) => `m${String(m).padStart(2, '0')}`),
  raw,
  corrected,
  quantiles,
  exceedance,
  anyTime: thresholds.map((_, j) => exceedance[j * H]),
  firstLikelyLead: thresholds.map(() => null),
  recent: { times: [], observed: [] },
  timings: { featuresMs: 1, inferenceMs: 1, stochasticMs: 1, totalMs: 3 },
});
const stored = JSON.stringify(view);
console.log(`run of ${M} members × ${H} lead times, ${probs.length} quantiles, ${thresholds.length} thresholds`);
console.log('members    bytes  gzip bytes');
for (const m of ['all', 'corrected', 'none'] as const) {
  const body = withMembers(stored, m);
  console.log(`${m.padEnd(9)} ${String(body.length).padStart(7)} ${String(gzipSync(body).length).padStart(10)}`);
}
