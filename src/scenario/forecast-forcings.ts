// Forecast forcings: the true future weather degraded by errors that grow with lead time,
// standing in for a weather forecast (invented demo scheme, no source):
//   temperature: random-walk error, e(L) = e(L − 1) + N(0, tempStepSd²) → sd ≈ tempStepSd·√L
//   precipitation: mean-preserving lognormal factor with log-sd precipLogSd0 + precipLogSdSlope·L,
//                  plus spurious light rain on dry days with probability spuriousRate·L.
import { roundTo } from './weather-generator.ts';
import type { Variates } from './random-variates.ts';

export interface ForecastNoise {
  readonly tempStepSd: number;
  readonly precipLogSd0: number;
  readonly precipLogSdSlope: number;
  readonly spuriousRate: number;
  readonly spuriousMeanMm: number;
}

export const DEFAULT_FORECAST_NOISE: ForecastNoise = {
  tempStepSd: 0.6,
  precipLogSd0: 0.2,
  precipLogSdSlope: 0.07,
  spuriousRate: 0.02,
  spuriousMeanMm: 2,
};

/** Fills outP/outT (length = horizon) from the true values truthP/truthT (same length), lead L = index + 1. */
export function perturbForecastForcings(
  variates: Variates,
  truthP: ArrayLike<number>,
  truthT: ArrayLike<number>,
  outP: Float64Array,
  outT: Float64Array,
  noise: ForecastNoise = DEFAULT_FORECAST_NOISE,
): void {
  let tempError = 0;
  for (let k = 0; k < outP.length; k++) {
    const lead = k + 1;
    tempError += noise.tempStepSd * variates.normal();
    outT[k] = roundTo(truthT[k] + tempError, 0.1);
    const sd = noise.precipLogSd0 + noise.precipLogSdSlope * lead;
    let p = truthP[k] * Math.exp(sd * variates.normal() - 0.5 * sd * sd);
    if (truthP[k] === 0 && variates.uniform() < noise.spuriousRate * lead) p += variates.gamma(0.8, noise.spuriousMeanMm / 0.8);
    outP[k] = roundTo(p, 0.1);
  }
}
