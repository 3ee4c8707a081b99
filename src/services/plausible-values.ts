// What a stored value may be, per gauge. Every value the service stores must be finite and must fit
// a float32 (error archives, model inputs and stored quantiles are float32); beyond that each
// quantity has a plausible range, set on the gauge or derived from its archive.
import type { Gauge } from '../store/gauges-repo.ts';

/** The largest finite float32 (IEEE 754 binary32: (2 − 2⁻²³) × 2¹²⁷). */
export const FLOAT32_MAX = 3.4028234663852886e38;

/**
 * The derived flow cap is this many times the largest flow the gauge's archive holds (observed or
 * simulated) or its highest threshold, whichever is larger. Our own rule: floods of record seldom
 * exceed a few times the largest flow of a long record, so ten times leaves room for a real flood
 * while it still catches unit slips (l/s sent as m³/s is a factor 1000) and garbage such as 1e300.
 */
export const DERIVED_FLOW_MULTIPLE = 10;

/**
 * Default precipitation cap per step, in mm: above the largest rainfall ever measured in one day
 * (about 1,825 mm, Réunion, January 1966; from memory), so it holds for daily and shorter steps.
 */
export const DEFAULT_MAX_PRECIPITATION = 2000;

/**
 * Default air temperature range in °C: wider than the extremes measured at the surface (about
 * −89 °C and +57 °C; from memory).
 */
export const DEFAULT_AIR_TEMPERATURE = { min: -90, max: 60 } as const;

export interface ValueLimit {
  quantity: string;
  unit: string;
  min: number;
  max: number;
  /** Why the maximum is what it is, and how to change it. */
  maxReason: string;
  minReason: string;
}

export interface LimitsInForce {
  maxFlow: { value: number; source: 'gauge' | 'archive' | 'storage' };
  maxPrecipitation: { value: number; source: 'gauge' | 'default' };
  airTemperatureRange: { min: number; max: number; source: 'gauge' | 'default' };
}

export function limitsInForce(g: Gauge): LimitsInForce {
  const basis = Math.max(g.archiveMaxFlow ?? 0, ...g.thresholds.map((t) => t.value).filter(Number.isFinite));
  const maxFlow =
    g.maxFlow !== null
      ? { value: g.maxFlow, source: 'gauge' as const }
      : basis > 0
        ? { value: Math.min(FLOAT32_MAX, DERIVED_FLOW_MULTIPLE * basis), source: 'archive' as const }
        : { value: FLOAT32_MAX, source: 'storage' as const };
  return {
    maxFlow,
    maxPrecipitation: g.maxPrecipitation !== null ? { value: g.maxPrecipitation, source: 'gauge' } : { value: DEFAULT_MAX_PRECIPITATION, source: 'default' },
    airTemperatureRange: g.airTemperatureRange ? { ...g.airTemperatureRange, source: 'gauge' } : { ...DEFAULT_AIR_TEMPERATURE, source: 'default' },
  };
}

const STORAGE = `the largest value the store holds (${FLOAT32_MAX.toExponential(3)})`;

/** The flow limit of a gauge. */
export function flowLimit(g: Gauge): ValueLimit {
  const { maxFlow } = limitsInForce(g);
  const maxReason = {
    gauge: `the gauge's maxFlow of ${maxFlow.value} m3/s (change it with PATCH /gauges/${g.id})`,
    archive: `the gauge's plausible maximum of ${maxFlow.value} m3/s (${DERIVED_FLOW_MULTIPLE} × the largest flow in its archive or its highest threshold; set maxFlow on the gauge to change it)`,
    storage: STORAGE,
  }[maxFlow.source];
  return { quantity: 'flow', unit: 'm3/s', min: 0, max: maxFlow.value, maxReason, minReason: 'flow cannot be negative' };
}

/** The limit of a forcing variable; unknown variables only need to be storable. */
export function forcingLimit(g: Gauge, name: string, unit: string): ValueLimit {
  const limits = limitsInForce(g);
  if (name === 'precipitation') {
    const p = limits.maxPrecipitation;
    const why = p.source === 'gauge' ? `the gauge's maxPrecipitation of ${p.value} mm per step` : `the default maximum of ${p.value} mm per step (set maxPrecipitation on the gauge to change it)`;
    return { quantity: name, unit, min: 0, max: p.value, maxReason: why, minReason: 'precipitation cannot be negative' };
  }
  if (name === 'potential_evaporation') {
    return { quantity: name, unit, min: 0, max: FLOAT32_MAX, maxReason: STORAGE, minReason: 'potential_evaporation cannot be negative' };
  }
  if (name === 'air_temperature') {
    const r = limits.airTemperatureRange;
    const which = r.source === 'gauge' ? "the gauge's airTemperatureRange" : 'the default range (set airTemperatureRange on the gauge to change it)';
    return { quantity: name, unit, min: r.min, max: r.max, maxReason: `the plausible maximum of ${r.max} degC of ${which}`, minReason: `below the plausible minimum of ${r.min} degC of ${which}` };
  }
  return { quantity: name, unit, min: -FLOAT32_MAX, max: FLOAT32_MAX, maxReason: STORAGE, minReason: `below ${STORAGE.replace('largest', 'most negative')}` };
}

/** The problem with one value, or null when it is plausible. */
export function valueProblem(v: number, limit: ValueLimit): string | null {
  if (v < limit.min) return limit.min === 0 ? `${limit.minReason} (${v})` : `${limit.quantity} ${v} ${limit.unit} is ${limit.minReason}`;
  if (v > limit.max) return `${limit.quantity} ${v} ${limit.unit} is above ${limit.maxReason}`;
  return null;
}
