// The invented river the verification benches share: daily flow as a seasonal log-AR(1) over 20 years
// of history and then the runs' issue days and horizon. Same seed, so every bench sees the same data;
// the returned generator goes on to draw the runs' members.
import { createPrng, type Prng } from '../src/core/prng.ts';

/** Lead times, members per ensemble, stage quantiles per lead. */
export const H = 10;
export const M = 20;
export const K = 100;
export const DAY = 86_400_000;
export const THRESHOLDS = [
  { label: '2-year flow', value: 90 },
  { label: '10-year flow', value: 140 },
  { label: '50-year flow', value: 190 },
];

/** z: the log-flow anomaly (AR(1) part) the flow is made from. */
export function benchRiver(nRuns: number): { g: Prng; nHist: number; n: number; times: Float64Array; z: Float64Array; flow: Float64Array } {
  const g = createPrng(7);
  const nHist = 20 * 365;
  const n = nHist + nRuns + H + 1;
  const t0 = Date.UTC(2000, 0, 1);
  const times = Float64Array.from({ length: n }, (_, i) => t0 + i * DAY);
  const z = new Float64Array(n);
  for (let i = 1; i < n; i++) z[i] = 0.85 * z[i - 1] + 0.35 * g.normal();
  const flow = Float64Array.from(z, (x, i) => 50 * Math.exp(x + 0.5 * Math.sin((2 * Math.PI * i) / 365.25)));
  return { g, nHist, n, times, z, flow };
}
