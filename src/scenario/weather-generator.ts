// Synthetic daily weather with a seasonal cycle, wet spells and persistent temperature anomalies.
// Precipitation occurrence: two-state (dry/wet) first-order Markov chain, amounts gamma
// distributed on wet days — the classic Richardson (1981, Water Resour. Res. 17) structure
// (from memory). Temperature: seasonal cosine plus an AR(1) anomaly. Seasonal parameters vary
// as mean + amplitude · cos(2π (day − peakDay) / 365.25). PE from Oudin et al. (2005).
import { oudinPeAt } from './oudin-pe.ts';
import type { Variates } from './random-variates.ts';

export interface SeasonalCycle {
  readonly mean: number;
  readonly amplitude: number;
  /** Day of year of the maximum. */
  readonly peakDay: number;
}

export interface Climate {
  readonly latitudeDeg: number;
  /** P(wet today | dry yesterday). */
  readonly wetAfterDry: SeasonalCycle;
  /** P(wet today | wet yesterday). */
  readonly wetAfterWet: SeasonalCycle;
  /** Mean amount on a wet day (mm). */
  readonly wetDayMeanMm: SeasonalCycle;
  /** Gamma shape of wet-day amounts (< 1 gives the usual skew). */
  readonly amountShape: number;
  /** Mean daily air temperature (°C). */
  readonly temperature: SeasonalCycle;
  /** Lag-one autocorrelation of the temperature anomaly. */
  readonly anomalyPersistence: number;
  /** Stationary standard deviation of the temperature anomaly (°C). */
  readonly anomalySd: number;
}

export interface Weather {
  /** mm/d, rounded to 0.1 mm. */
  readonly precipitation: Float64Array;
  /** °C, rounded to 0.1 °C. */
  readonly airTemperature: Float64Array;
  /** mm/d, Oudin formula from the rounded temperature. */
  readonly potentialEvaporation: Float64Array;
}

export function seasonal(c: SeasonalCycle, dayOfYear: number): number {
  return c.mean + c.amplitude * Math.cos((2 * Math.PI * (dayOfYear - c.peakDay)) / 365.25);
}

export function roundTo(x: number, step: number): number {
  return Math.round(x / step) * step;
}

export function generateWeather(variates: Variates, dayOfYear: ArrayLike<number>, climate: Climate): Weather {
  const n = dayOfYear.length;
  const precipitation = new Float64Array(n);
  const airTemperature = new Float64Array(n);
  const potentialEvaporation = new Float64Array(n);
  const phi = climate.anomalyPersistence;
  const innovationSd = climate.anomalySd * Math.sqrt(1 - phi * phi);
  let wet = false;
  let anomaly = climate.anomalySd * variates.normal();
  for (let i = 0; i < n; i++) {
    const doy = dayOfYear[i];
    const pWet = seasonal(wet ? climate.wetAfterWet : climate.wetAfterDry, doy);
    wet = variates.uniform() < pWet;
    if (wet) {
      const mean = seasonal(climate.wetDayMeanMm, doy);
      precipitation[i] = roundTo(variates.gamma(climate.amountShape, mean / climate.amountShape), 0.1);
    }
    anomaly = phi * anomaly + innovationSd * variates.normal();
    const t = roundTo(seasonal(climate.temperature, doy) + anomaly, 0.1);
    airTemperature[i] = t;
    potentialEvaporation[i] = oudinPeAt(climate.latitudeDeg, doy, t);
  }
  return { precipitation, airTemperature, potentialEvaporation };
}
