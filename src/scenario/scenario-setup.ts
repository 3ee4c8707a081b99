// Fixed ingredients of the demo scenario. Everything here is invented for the demo: the river,
// the gauge, the climate and the "true" parameters. Names are made up and refer to no real place.
import type { CatchmentParameters } from './catchment-model.ts';
import type { ParameterCloud } from './member-parameters.ts';
import type { Climate } from './weather-generator.ts';

export const GAUGE_INFO = {
  id: 'corvane-stillmere-bridge',
  name: 'Corvane at Stillmere Bridge',
  river: 'Corvane',
  catchmentAreaKm2: 342,
  timeStep: 'P1D',
  timeZone: 'UTC',
  flowUnit: 'm3/s',
  // No coordinates: the catchment is invented and must not be placeable on a real river.
  location: null,
} as const;

/**
 * Mid-latitude snowy upland: ≈ 1.1 m/yr precipitation, winter mean ≈ −3 °C, summer ≈ 14 °C.
 * The latitude is only the input of the extraterrestrial radiation in the evaporation formula.
 */
export const CLIMATE: Climate = {
  latitudeDeg: 46.6,
  wetAfterDry: { mean: 0.3, amplitude: 0.05, peakDay: 330 },
  wetAfterWet: { mean: 0.63, amplitude: 0.05, peakDay: 330 },
  wetDayMeanMm: { mean: 7, amplitude: 2, peakDay: 210 },
  amountShape: 0.75,
  temperature: { mean: 5.5, amplitude: 9, peakDay: 200 },
  anomalyPersistence: 0.75,
  anomalySd: 3,
};

/** Parameters of the "true" catchment. */
export const TRUE_PARAMETERS: CatchmentParameters = { x1: 320, x2: -0.4, x3: 95, x4: 1.6, ctg: 0.25, kf: 3.8 };

/** The raw ensemble's parameter cloud: too large stores, slower response, more loss, slower melt. */
export const MEMBER_CLOUD: ParameterCloud = {
  center: { x1: 480, x2: -0.9, x3: 150, x4: 2.2, ctg: 0.45, kf: 2.8 },
  logSd: { x1: 0.05, x3: 0.05, x4: 0.04, kf: 0.05 },
  sd: { x2: 0.08, ctg: 0.03 },
};

/** Multiplicative observation error: lognormal, AR(1) in log space. */
export const OBSERVATION_NOISE = { logSd: 0.08, persistence: 0.5, missingRate: 0.004, gapLength: 6 } as const;

export const SCENARIO_START_MS = Date.UTC(2005, 0, 1);
/** Spin-up before the exposed period, so stores and snowpack start in equilibrium. */
export const SPINUP_START_MS = Date.UTC(2004, 0, 1);
export const HORIZON_STEPS = 10;
export const WARMUP_STEPS = 10;
/** Demo thresholds: return levels of the annual maximum flow, named by their return period. */
export const RETURN_PERIODS = [
  { label: '2-year flow', years: 2 },
  { label: '10-year flow', years: 10 },
  { label: '50-year flow', years: 50 },
] as const;
