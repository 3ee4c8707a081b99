/**
 * One verification case: a forecast for one valid time at one lead time, with the observation
 * and the three forecasts to compare side by side.
 *
 * The stochastic stage is best verified from its samples (trajectory values at this lead):
 * their empirical CDF is exactly what the stage predicts. When only quantiles are stored they
 * must sit at the K midpoint levels (i − 0.5)/K, i = 1 … K (see midpointProbs); the K values
 * are then scored as a K-member "quantile ensemble". Its CRPS tends to the CRPS of the
 * continuous forecast as K grows (1000 midpoint quantiles of N(0, 1) match the closed form to
 * 1e-4 relative — properscoring 0.1's own test, tests/test_crps.py). Other quantile levels (for example
 * the seven default levels 0.05 … 0.95) are refused: they do not describe the whole
 * distribution, so CRPS, PIT and Brier scores from them would be biased.
 */
export type SourceName = 'raw' | 'corrected' | 'stochastic';

export const SOURCE_NAMES: readonly SourceName[] = ['raw', 'corrected', 'stochastic'];

export interface QuantileForecast {
  /** Probability levels, (i − 0.5)/K for i = 1 … K. */
  probs: ArrayLike<number>;
  /** Quantile values at those levels (m³/s). */
  values: ArrayLike<number>;
}

export interface VerificationCase {
  /** Lead-time index (0 = first lead). */
  lead: number;
  /** Observed flow at the valid time (m³/s); null = not observed (case skipped). */
  observation: number | null;
  /** Raw ensemble members (m³/s); null/NaN members are left out. */
  raw: ArrayLike<number | null>;
  /** Corrected members (m³/s). */
  corrected: ArrayLike<number | null>;
  /** Stochastic-stage samples at this lead (m³/s). */
  stochastic?: ArrayLike<number | null> | null;
  /** Stochastic-stage quantiles, used only when `stochastic` samples are absent. */
  stochasticQuantiles?: QuantileForecast | null;
  /** Carried for the caller (RFC 3339, UTC); only watchDrift's `since` reads validTime. */
  validTime?: string;
  issueTime?: string;
}

/** Midpoint probability levels (i − 0.5)/k, i = 1 … k: the levels a quantile ensemble needs. */
export function midpointProbs(k: number): Float64Array {
  if (!Number.isInteger(k) || k < 1) throw new RangeError(`k must be a positive integer, got ${k}`);
  const p = new Float64Array(k);
  for (let i = 0; i < k; i++) p[i] = (i + 0.5) / k;
  return p;
}

/** True when probs are the midpoint levels (i − 0.5)/K (to 1e-9, any K ≥ 1). */
export function isMidpointGrid(probs: ArrayLike<number>): boolean {
  const k = probs.length;
  if (k === 0) return false;
  for (let i = 0; i < k; i++) if (!(Math.abs(probs[i] - (i + 0.5) / k) <= 1e-9)) return false;
  return true;
}

// The check runs once per distinct probs array, not once per case.
const checked = new WeakSet<object>();

/** Values of one source in a case (null when the case does not carry it). */
export function sourceValues(c: VerificationCase, source: SourceName): ArrayLike<number | null> | null {
  if (source === 'raw') return c.raw;
  if (source === 'corrected') return c.corrected;
  if (c.stochastic) return c.stochastic;
  const q = c.stochasticQuantiles;
  if (!q) return null;
  if (q.probs.length !== q.values.length) throw new RangeError('stochasticQuantiles: probs and values differ in length');
  const key = q.probs as object;
  if (typeof key !== 'object' || !checked.has(key)) {
    if (!isMidpointGrid(q.probs)) {
      throw new RangeError(
        'stochasticQuantiles must sit at the midpoint levels (i − 0.5)/K (see midpointProbs); store samples or such quantiles to verify the stochastic stage',
      );
    }
    if (typeof key === 'object') checked.add(key);
  }
  return q.values;
}
