import { quantileSorted } from '../scores/quantile.ts';

/**
 * Scores by forecast flow class. Cases are grouped by what the forecast said — the terciles of
 * the forecast median over the verified cases, and "forecast median above threshold t" — never by
 * what was observed: selecting on the observation penalises every honest forecast in the
 * selected range and rewards one that always forecasts high there (Lerch et al. 2017, the
 * forecaster's dilemma). Per class: cases, mean CRPS, CRPS skill against the seasonal
 * climatology on the same cases, and the mean error of the median.
 */
export interface FlowClassScores {
  class: string;
  /** Forecast-median range of the class (m³/s); null = open end. */
  from: number | null;
  to: number | null;
  n: number;
  crps: number;
  crpsSkillClimatology: number;
  /** Mean (forecast median − observation). */
  medianBias: number;
}

export function scoresByForecastClass(
  median: ArrayLike<number>,
  observed: ArrayLike<number>,
  crps: ArrayLike<number>,
  climatologyCrps: ArrayLike<number>,
  thresholds: readonly { label: string; value: number }[],
): FlowClassScores[] {
  const ok: number[] = [];
  for (let i = 0; i < median.length; i++) if (Number.isFinite(median[i]) && Number.isFinite(observed[i]) && Number.isFinite(crps[i])) ok.push(i);
  const sorted = Float64Array.from(ok, (i) => median[i]).sort();
  const t1 = quantileSorted(sorted, 1 / 3);
  const t2 = quantileSorted(sorted, 2 / 3);
  const summarise = (name: string, from: number | null, to: number | null, keep: (m: number) => boolean): FlowClassScores => {
    let n = 0;
    let c = 0;
    let cs = 0;
    let cr = 0;
    let bias = 0;
    for (const i of ok) {
      if (!keep(median[i])) continue;
      n++;
      c += crps[i];
      bias += median[i] - observed[i];
      if (Number.isFinite(climatologyCrps[i])) {
        cs += crps[i];
        cr += climatologyCrps[i];
      }
    }
    return { class: name, from, to, n, crps: n ? c / n : NaN, crpsSkillClimatology: cr > 0 ? 1 - cs / cr : NaN, medianBias: n ? bias / n : NaN };
  };
  const out = [
    summarise('lower third of forecast medians', null, t1, (m) => m <= t1),
    summarise('middle third', t1, t2, (m) => m > t1 && m <= t2),
    summarise('upper third', t2, null, (m) => m > t2),
  ];
  for (const t of thresholds) out.push(summarise(`forecast median above ${t.label}`, t.value, null, (m) => m > t.value));
  return out;
}
