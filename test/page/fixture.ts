// Invented, contract-shaped data for the page test (see the forecast read contract: GET /overview,
// GET /gauges/:id/forecasts/latest). The numbers only need to look like a forecast; they are made
// self-consistent (quantiles and probabilities computed from the trajectories with the project's
// core functions) so the page shows a coherent picture. Nothing here is checked against outside values.
import type { ForecastView } from '../../src/services/forecast-view.ts';
import { createPrng } from '../../src/core/prng.ts';
import { exceedanceProbability } from '../../src/core/scores/exceedance.ts';
import { quantiles } from '../../src/core/scores/quantile.ts';

export const CAUTION =
  'Guidance only: computed forecasts carry uncertainty. Flood warnings are decided by the responsible local authority.';
export const PROBABILITIES = [0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95];

export type Member = ForecastView['ensemble']['raw'][number];
export type ThresholdForecast = ForecastView['thresholds'][number];

/** The service's forecast shape, with the corrected members always present (the fixture makes no degraded run). */
export type Forecast = Omit<ForecastView, 'ensemble'> & { ensemble: { raw: Member[]; corrected: Member[] } };

export interface OverviewGauge {
  id: string;
  name: string;
  timeZone: string;
  status: 'ok' | 'drifting' | 'no-forecast' | 'insufficient-data';
  latest: null | { id: string; issueTime: string; status: 'corrected' | 'degraded' };
  thresholds: { label: string; value: number; maxExceedance: number | null; anyTime: number | null; attention: boolean }[];
}

export interface Overview {
  caution: string;
  gauges: OverviewGauge[];
}

export interface ForecastOptions {
  gaugeId: string;
  gaugeName: string;
  issueTime: string;
  seed: number;
  /** Flow at issue time, m³/s. */
  base: number;
  /** Peak of the forecast rise relative to base (1 = no rise). */
  peak: number;
  thresholds: { label: string; value: number }[];
  degradedReason?: string;
  members?: number;
  leads?: number;
  trajectories?: number;
  attentionLevel?: number;
}

const DAY_MS = 86_400_000;
const iso = (ms: number) => new Date(ms).toISOString().replace('.000Z', 'Z');
const round = (v: number, digits: number) => Math.round(v * 10 ** digits) / 10 ** digits;

/** A daily forecast run in the contract's shape. */
export function makeForecast(o: ForecastOptions): Forecast {
  const nMembers = o.members ?? 24;
  const nLeads = o.leads ?? 10;
  const nTraj = o.trajectories ?? 400;
  const attentionLevel = o.attentionLevel ?? 0.3;
  const rng = createPrng(o.seed);
  const issueMs = Date.parse(o.issueTime);
  const degraded = o.degradedReason !== undefined;

  // A rise to a peak on day 3-4, then a recession; the raw members run low and close together.
  const shape = Array.from({ length: nLeads }, (_, j) => {
    const t = j + 1;
    return 1 + (o.peak - 1) * (t / 3.5) ** 2 * Math.exp(2 * (1 - t / 3.5));
  });
  const raw: Member[] = [];
  const corrected: Member[] = [];
  for (let m = 0; m < nMembers; m++) {
    const rawScale = 0.78 * Math.exp(rng.normal(0, 0.05));
    const corrScale = Math.exp(rng.normal(0, 0.12));
    const id = `m${String(m + 1).padStart(2, '0')}`;
    raw.push({ id, values: shape.map((k) => round(o.base * k * rawScale, 3)) });
    corrected.push({
      id,
      values: shape.map((k, j) => round(o.base * k * (degraded ? rawScale : corrScale * Math.exp(rng.normal(0, 0.02 * (j + 1)))), 3)),
    });
  }

  // Trajectories: each member with a lead-correlated multiplicative error growing with lead time.
  const traj = Array.from({ length: nTraj }, (_, r) => {
    const member = corrected[r % nMembers].values as number[];
    let e = 0;
    return member.map((v, j) => {
      e = 0.8 * e + rng.normal(0, 0.06 + 0.015 * j);
      return v * Math.exp(e);
    });
  });
  const column = (j: number) => traj.map((t) => t[j]);
  const qv = PROBABILITIES.map(() => new Array<number>(nLeads));
  for (let j = 0; j < nLeads; j++) {
    const q = quantiles(column(j), PROBABILITIES);
    PROBABILITIES.forEach((_, i) => (qv[i][j] = round(q[i], 3)));
  }
  const leadTimes = Array.from({ length: nLeads }, (_, j) => `P${j + 1}D`);
  const thresholds = o.thresholds.map((t): ThresholdForecast => {
    const exceedance = leadTimes.map((_, j) => round(exceedanceProbability(column(j), t.value), 4));
    const anyTime = round(traj.filter((tr) => tr.some((v) => v > t.value)).length / nTraj, 4);
    const first = exceedance.findIndex((p) => p > 0.5);
    return { ...t, exceedance, anyTime, firstLikelyLeadTime: first < 0 ? null : leadTimes[first], attention: anyTime >= attentionLevel };
  });

  const recentTimes = Array.from({ length: 7 }, (_, k) => iso(issueMs - (6 - k) * DAY_MS));
  const observed = recentTimes.map((_, k) => (k === 2 ? null : round(o.base * (0.85 + 0.025 * k) * Math.exp(rng.normal(0, 0.03)), 2)));

  return {
    id: `run-${o.gaugeId}-${o.seed}`,
    gaugeId: o.gaugeId,
    gaugeName: o.gaugeName,
    issueTime: o.issueTime,
    createdAt: iso(issueMs + 192_000),
    source: 'demo',
    unit: 'm3/s',
    timeStep: 'P1D',
    caution: CAUTION,
    status: degraded ? 'degraded' : 'corrected',
    degradedReason: degraded ? o.degradedReason! : null,
    modelVersion: degraded ? null : { id: '12', label: 'trees-2024-11' },
    seed: o.seed,
    trajectories: nTraj,
    attentionLevel,
    leadTimes,
    validTimes: leadTimes.map((_, j) => iso(issueMs + (j + 1) * DAY_MS)),
    quantiles: { probabilities: PROBABILITIES, values: qv },
    thresholds,
    ensemble: { raw, corrected },
    recent: { times: recentTimes, observed },
    timings: { featuresMs: 1.2, inferenceMs: 3.4, stochasticMs: 9.8, totalMs: 20.1 },
  };
}

/** The overview entry of a gauge, from its latest forecast (or none). */
export function overviewEntry(
  g: { id: string; name: string; timeZone?: string; status: OverviewGauge['status']; thresholds: { label: string; value: number }[] },
  latest: Forecast | null,
): OverviewGauge {
  return {
    id: g.id,
    name: g.name,
    timeZone: g.timeZone ?? 'UTC',
    status: g.status,
    latest: latest ? { id: latest.id, issueTime: latest.issueTime, status: latest.status } : null,
    thresholds: g.thresholds.map((t) => {
      const f = latest?.thresholds.find((x) => x.label === t.label);
      return {
        label: t.label,
        value: t.value,
        maxExceedance: f ? Math.max(...f.exceedance) : null,
        anyTime: f ? f.anyTime : null,
        attention: f ? f.attention : false,
      };
    }),
  };
}
