// CemaNeige snow routine, one elevation layer, without the later SWE–SCA hysteresis variant
// (Valéry, Andréassian & Perrin 2014, J. Hydrol. 517 (volume from memory), "As simple as possible but not simpler",
// Part 2, section 2 — equations from memory; order of operations cross-read, not copied, from
// a public reference implementation):
//   snow fraction  f(T): 1 at T ≤ −1 °C, 0 at T ≥ 3 °C, linear between — the single-temperature
//                  ramp used with CemaNeige for low/mid-altitude layers (from memory)
//   pack           G ← G + f·P
//   thermal state  eTG ← min(0, CTG·eTG + (1 − CTG)·T)
//   potential melt PotMelt = min(G, Kf·(T − Tmelt)) if eTG = 0 and T > Tmelt (Tmelt = 0 °C), else 0
//   melt           Melt = ((1 − Vmin)·Gratio + Vmin)·PotMelt, Vmin = 0.1,
//                  Gratio = min(1, G / Gthreshold), Gthreshold = 0.9 × mean annual snowfall
//   output         rain + melt goes on to GR4J as its precipitation input.
// Parameter ranges we accept: CTG in [0, 1] (a weighting coefficient, by definition);
// Kf in [0, 12] mm/°C/d — snow degree-day factors compiled by Hock (2003, J. Hydrol. 282)
// span about 2.5–11.6 mm/°C/d (from memory).

export interface CemaNeigeParameters {
  /** Thermal-state weighting coefficient CTG (–). */
  readonly ctg: number;
  /** Degree-day melt factor Kf (mm/°C/d). */
  readonly kf: number;
}

export const CEMANEIGE_RANGES = {
  ctg: { min: 0, max: 1, unit: '-' },
  kf: { min: 0, max: 12, unit: 'mm/°C/d' },
} as const;

export interface CemaNeigeModel {
  readonly params: CemaNeigeParameters;
  /** Gthreshold (mm): pack above which melt runs at full speed. */
  readonly meltThreshold: number;
}

/** Indices into a snow flux record (mm over the step). */
export const SNOW_FLUX = { rain: 0, snowfall: 1, potentialMelt: 2, melt: 3, liquidOutput: 4 } as const;
export const SNOW_FLUX_COUNT = 5;
/** State layout: snowpack G (mm water equivalent), thermal state eTG (°C). */
export const SNOW_STATE = { snowpack: 0, thermalState: 1 } as const;
export const SNOW_STATE_SIZE = 2;

const T_SNOW = -1; // °C, all snow at or below
const T_RAIN = 3; // °C, all rain at or above
const T_MELT = 0; // °C
const MIN_SPEED = 0.1;
const THRESHOLD_SHARE = 0.9;

/** Share of precipitation falling as snow at mean air temperature `t` (°C). */
export function snowFraction(t: number): number {
  if (t <= T_SNOW) return 1;
  if (t >= T_RAIN) return 0;
  return (T_RAIN - t) / (T_RAIN - T_SNOW);
}

/** Mean annual snowfall (mm/yr) of a forcing series, used for Gthreshold. */
export function meanAnnualSnowfall(precipitation: ArrayLike<number>, airTemperature: ArrayLike<number>, stepsPerYear = 365.25): number {
  let sum = 0;
  for (let i = 0; i < precipitation.length; i++) sum += snowFraction(airTemperature[i]) * precipitation[i];
  return precipitation.length === 0 ? 0 : (sum * stepsPerYear) / precipitation.length;
}

export function checkCemaNeigeParameters(p: CemaNeigeParameters): void {
  const problems: string[] = [];
  for (const key of ['ctg', 'kf'] as const) {
    const r = CEMANEIGE_RANGES[key];
    const v = p[key];
    if (typeof v !== 'number' || !Number.isFinite(v) || v < r.min || v > r.max) {
      problems.push(`${key === 'ctg' ? 'CTG' : 'Kf'} = ${String(v)} ${r.unit} is outside [${r.min}, ${r.max}] ${r.unit}`);
    }
  }
  if (problems.length > 0) {
    throw new RangeError(`CemaNeige parameters refused: ${problems.join('; ')} (CTG is a weight in [0, 1]; Kf bound from snow degree-day factors in Hock 2003)`);
  }
}

export function createCemaNeige(params: CemaNeigeParameters, annualSnowfallMm: number): CemaNeigeModel {
  checkCemaNeigeParameters(params);
  if (!(annualSnowfallMm >= 0) || !Number.isFinite(annualSnowfallMm)) {
    throw new RangeError(`mean annual snowfall must be a finite number ≥ 0 mm, got ${annualSnowfallMm}`);
  }
  return { params: { ...params }, meltThreshold: THRESHOLD_SHARE * annualSnowfallMm };
}

/**
 * One step: `p` total precipitation (mm), `t` mean air temperature (°C). Updates the state at
 * `base`, writes SNOW_FLUX at `fluxBase` when `flux` is given, returns rain + melt (mm).
 */
export function cemaneigeStep(
  model: CemaNeigeModel,
  state: Float64Array,
  base: number,
  p: number,
  t: number,
  flux?: Float64Array,
  fluxBase = 0,
): number {
  const { ctg, kf } = model.params;
  const snowfall = snowFraction(t) * p;
  const rain = p - snowfall;
  let g = state[base + SNOW_STATE.snowpack] + snowfall;
  let etg = ctg * state[base + SNOW_STATE.thermalState] + (1 - ctg) * t;
  if (etg > 0) etg = 0;
  let potentialMelt = 0;
  if (etg === 0 && t > T_MELT) potentialMelt = Math.min(g, kf * (t - T_MELT));
  const ratio = model.meltThreshold > 0 ? Math.min(1, g / model.meltThreshold) : 1;
  const melt = ((1 - MIN_SPEED) * ratio + MIN_SPEED) * potentialMelt;
  g -= melt;
  state[base + SNOW_STATE.snowpack] = g;
  state[base + SNOW_STATE.thermalState] = etg;
  const liquid = rain + melt;
  if (flux !== undefined) {
    flux[fluxBase + SNOW_FLUX.rain] = rain;
    flux[fluxBase + SNOW_FLUX.snowfall] = snowfall;
    flux[fluxBase + SNOW_FLUX.potentialMelt] = potentialMelt;
    flux[fluxBase + SNOW_FLUX.melt] = melt;
    flux[fluxBase + SNOW_FLUX.liquidOutput] = liquid;
  }
  return liquid;
}
