import { climatologicalRates, type ClimatologicalRate } from './climatological-rates.ts';
import { seasonalClimatology, type SeasonalClimatology } from './reference-forecasts.ts';

/**
 * The references of the warning verification from one observation series (times ascending, one
 * value per step, null = missing): the seasonal climatology of everything observed before the
 * first verified issue, and the climatological rates of the fitting period (the Brier-skill
 * reference). Without a fitting period the rates are those of the climatology's observations.
 * Observations are placed on the step grid (stepMs), so a missing row counts as a missing step.
 */
export interface WarningReferences {
  climatology: SeasonalClimatology | null;
  climatologicalRates: ClimatologicalRate[] | null;
  ratesFrom: 'fitting period' | 'observations before the first issue' | null;
}

export function warningReferences(
  times: ArrayLike<number>,
  values: ArrayLike<number | null>,
  o: { cutoffMs: number; fitting: { fromMs: number; toMs: number } | null; thresholds: readonly number[]; horizon: number; stepMs: number; windowDays?: number },
): WarningReferences {
  const climatology = seasonalClimatology(times, values, o.cutoffMs, o.windowDays ?? 15);
  // On the step grid, so a missing row is a missing step and breaks the any-time windows.
  const slice = (from: number, to: number) => {
    const out: (number | null)[] = [];
    let first = -1;
    for (let i = 0; i < times.length; i++) {
      if (!(times[i] >= from && times[i] < to)) continue;
      if (first < 0) first = times[i];
      const step = Math.round((times[i] - first) / o.stepMs);
      while (out.length < step) out.push(null);
      if (out.length === step) out.push(values[i]);
    }
    return out;
  };
  const fit = o.fitting ? slice(o.fitting.fromMs, o.fitting.toMs) : [];
  const usable = (v: (number | null)[]) => v.some((x) => x !== null && Number.isFinite(x));
  const horizon = Math.max(1, o.horizon);
  if (usable(fit)) return { climatology: climatology.size ? climatology : null, climatologicalRates: climatologicalRates(fit, o.thresholds, horizon), ratesFrom: 'fitting period' };
  const before = slice(-Infinity, o.cutoffMs);
  if (usable(before)) return { climatology, climatologicalRates: climatologicalRates(before, o.thresholds, horizon), ratesFrom: 'observations before the first issue' };
  return { climatology: null, climatologicalRates: null, ratesFrom: null };
}
