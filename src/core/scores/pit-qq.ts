import { finiteSorted } from './alpha-index.ts';

/**
 * Predictive QQ plot (coverage-probability plot) data: sorted PIT values against the uniform
 * plotting positions t/(n + 1), the same convention as alphaIndex. A calibrated forecast lies
 * on the diagonal; an S shape means too wide, an inverted S too narrow, offset means bias.
 */
export function pitQQ(pit: ArrayLike<number>): { uniform: Float64Array; pit: Float64Array } {
  const sorted = finiteSorted(pit);
  const n = sorted.length;
  const uniform = new Float64Array(n);
  for (let t = 1; t <= n; t++) uniform[t - 1] = t / (n + 1);
  return { uniform, pit: sorted };
}
