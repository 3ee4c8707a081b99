// The demo scenario: an invented snowy upland catchment with 20 years of synthetic weather,
// a "true" flow with observation noise, a raw parameter ensemble that is biased and too narrow,
// and forecast runs / reforecasts from each member's state at issue time. Pure computation,
// seeded and reproducible: the same options always give the same numbers.
import { DAY_MS, dayOfYearUtc, isoUtc } from './calendar.ts';
import { SNOW_STATE, meanAnnualSnowfall } from './cemaneige.ts';
import { catchmentStep, createCatchmentModel, initialCatchmentState, runCatchment } from './catchment-model.ts';
import type { CatchmentForcings, CatchmentModel, CatchmentParameters } from './catchment-model.ts';
import { perturbForecastForcings } from './forecast-forcings.ts';
import { mmPerDayToCubicMetresPerSecond } from './flow-units.ts';
import { drawParameterCloud, memberId } from './member-parameters.ts';
import { oudinPeAt } from './oudin-pe.ts';
import { createVariates, mixSeed } from './random-variates.ts';
import { annualMaxima, fitGumbelLMoments, gumbelReturnLevel } from './return-levels.ts';
import {
  CLIMATE,
  GAUGE_INFO,
  HORIZON_STEPS,
  MEMBER_CLOUD,
  OBSERVATION_NOISE,
  RETURN_PERIODS,
  SCENARIO_START_MS,
  SPINUP_START_MS,
  TRUE_PARAMETERS,
  WARMUP_STEPS,
} from './scenario-setup.ts';
import { generateWeather } from './weather-generator.ts';

export interface ScenarioOptions {
  /** Integer in [0, 2^53 − 1], default 1. */
  readonly seed?: number;
  /** Whole calendar years from 2005-01-01, default 20 (2–100). */
  readonly years?: number;
  /** Raw-ensemble size, default 40 (1–500). */
  readonly members?: number;
}

export interface Threshold {
  readonly label: string;
  /** m³/s */
  readonly value: number;
}

export interface GaugeDefinition {
  readonly id: string;
  readonly name: string;
  readonly river: string;
  readonly catchmentAreaKm2: number;
  readonly timeStep: 'P1D';
  readonly timeZone: 'UTC';
  readonly flowUnit: 'm3/s';
  /** Always null in the demo: an invented catchment has no place on a map. */
  readonly location: null;
  /** Strictly increasing by value. */
  readonly thresholds: Threshold[];
}

/** precipitation in mm per step, air_temperature in °C. */
export interface ForcingSeries {
  readonly precipitation: number[];
  readonly air_temperature: number[];
}

export interface ForecastMember {
  readonly id: string;
  /** m³/s: warmupSteps simulated values up to and including the issue step, then the horizon. */
  readonly values: number[];
  readonly warmupSteps: number;
}

export interface ForecastRun {
  /** times[issueTimeIndex] of the scenario (RFC 3339 UTC). */
  readonly issueTime: string;
  readonly issueTimeIndex: number;
  /** Valid time of each value: warm-up steps then lead times 1..horizonSteps (P1D apart). */
  readonly times: string[];
  readonly warmupSteps: number;
  readonly horizonSteps: number;
  readonly members: ForecastMember[];
  /** Past (true, warm-up) then future (forecast, noisier with lead time); same layout as values. */
  readonly forcings: ForcingSeries;
}

export interface ReforecastOptions {
  /** First issue index, default: three years before `toIndex`. */
  readonly fromIndex?: number;
  /** Last issue index, default: the last one whose whole horizon has observations. */
  readonly toIndex?: number;
  /** Default 7 (weekly). */
  readonly everySteps?: number;
}

export interface Scenario {
  readonly seed: number;
  readonly gauge: GaugeDefinition;
  /** Day starts, RFC 3339 UTC; value i is the mean (flow) or total (precipitation) over [times[i], times[i] + 1 d). */
  readonly times: string[];
  readonly units: { readonly flow: 'm3/s'; readonly precipitation: 'mm'; readonly air_temperature: 'degC' };
  /** m³/s, null where the record is missing. */
  readonly observedFlow: (number | null)[];
  readonly forcings: ForcingSeries;
  readonly memberIds: string[];
  /** m³/s, continuous simulations driven by the true forcings, one per parameter set. */
  readonly memberSimulations: Record<string, number[]>;
  readonly memberParameters: Record<string, CatchmentParameters>;
  /** Noise-free truth, for diagnostics and tests (flow m³/s, snowpack mm water equivalent). */
  readonly truth: { readonly parameters: CatchmentParameters; readonly flow: number[]; readonly snowpackMm: number[] };
  /** How the thresholds were derived. */
  readonly thresholdBasis: string;
  readonly warmupSteps: number;
  readonly horizonSteps: number;
  forecastRun(issueTimeIndex: number): ForecastRun;
  reforecasts(options?: ReforecastOptions): ForecastRun[];
}

const STREAM = { weather: 1, observation: 2, missing: 3, members: 4, forecast: 5 } as const;
const CHECKPOINT_EVERY = 32;

// Flows are rounded to 0.1 L/s: plenty for a demo, and keeps payloads short.
const roundFlow = (x: number): number => Math.round(x * 1e4) / 1e4;

function intOption(name: string, value: number | undefined, fallback: number, min: number, max: number): number {
  const v = value ?? fallback;
  if (!Number.isInteger(v) || v < min || v > max) throw new RangeError(`${name} must be an integer in [${min}, ${max}], got ${String(value)}`);
  return v;
}

export function buildScenario(options: ScenarioOptions = {}): Scenario {
  const seed = intOption('seed', options.seed, 1, 0, Number.MAX_SAFE_INTEGER);
  const years = intOption('years', options.years, 20, 2, 100);
  const memberCount = intOption('members', options.members, 40, 1, 500);
  const area = GAUGE_INFO.catchmentAreaKm2;

  // Internal index 0 is the spin-up start; exposed index i is internal i + spinup.
  const spinup = Math.round((SCENARIO_START_MS - SPINUP_START_MS) / DAY_MS);
  const n = Math.round((Date.UTC(2005 + years, 0, 1) - SCENARIO_START_MS) / DAY_MS);
  const simulated = spinup + n;
  const total = simulated + HORIZON_STEPS; // extra true weather so forecasts can be issued on the last day
  const timesMs = new Float64Array(total);
  const doy = new Int16Array(total);
  for (let i = 0; i < total; i++) {
    timesMs[i] = SPINUP_START_MS + i * DAY_MS;
    doy[i] = dayOfYearUtc(timesMs[i]);
  }

  const weather = generateWeather(createVariates(seed, STREAM.weather), doy, CLIMATE);
  const annualSnow = meanAnnualSnowfall(weather.precipitation.subarray(0, simulated), weather.airTemperature.subarray(0, simulated));
  const forcings: CatchmentForcings = weather;

  // Truth.
  const truthModel = createCatchmentModel(TRUE_PARAMETERS, annualSnow);
  const truthState = initialCatchmentState(truthModel);
  const truthFlow: number[] = new Array(n);
  const snowpack: number[] = new Array(n);
  for (let i = 0; i < simulated; i++) {
    const q = catchmentStep(truthModel, truthState, weather.precipitation[i], weather.airTemperature[i], weather.potentialEvaporation[i]);
    if (i >= spinup) {
      truthFlow[i - spinup] = mmPerDayToCubicMetresPerSecond(q, area);
      snowpack[i - spinup] = truthState[SNOW_STATE.snowpack];
    }
  }

  // Observations: truth × mean-one lognormal AR(1) error, a few missing days and one gap.
  const obsVariates = createVariates(seed, STREAM.observation);
  const missVariates = createVariates(seed, STREAM.missing);
  const { logSd, persistence, missingRate, gapLength } = OBSERVATION_NOISE;
  const observedFlow: (number | null)[] = new Array(n);
  const gapStart = Math.floor(missVariates.uniform() * (n - gapLength));
  let e = obsVariates.normal();
  for (let i = 0; i < n; i++) {
    if (i > 0) e = persistence * e + Math.sqrt(1 - persistence * persistence) * obsVariates.normal();
    const value = roundFlow(truthFlow[i] * Math.exp(logSd * e - 0.5 * logSd * logSd));
    const missing = missVariates.uniform() < missingRate || (i >= gapStart && i < gapStart + gapLength);
    observedFlow[i] = missing ? null : value;
  }

  // Thresholds from the truth's annual maxima (Gumbel, L-moments).
  const exposedMs = timesMs.subarray(spinup, simulated);
  const fit = fitGumbelLMoments(annualMaxima(truthFlow, exposedMs));
  const thresholds: Threshold[] = RETURN_PERIODS.map((r) => ({ label: r.label, value: Math.round(gumbelReturnLevel(fit, r.years) * 10) / 10 }));
  for (let k = 1; k < thresholds.length; k++) {
    if (!(thresholds[k].value > thresholds[k - 1].value)) throw new Error('thresholds not strictly increasing');
  }

  // Raw ensemble: continuous simulations with checkpoints for forecast restarts.
  const memberSets = drawParameterCloud(createVariates(seed, STREAM.members), MEMBER_CLOUD, memberCount);
  const memberIds = memberSets.map((_, k) => memberId(k, memberCount));
  const models: CatchmentModel[] = [];
  const checkpointStores: Float64Array[][] = [];
  const memberSimulations: Record<string, number[]> = {};
  const memberParameters: Record<string, CatchmentParameters> = {};
  const flowMm = new Float64Array(simulated);
  for (let k = 0; k < memberCount; k++) {
    const model = createCatchmentModel(memberSets[k], annualSnow);
    const state = initialCatchmentState(model);
    const store: Float64Array[] = [];
    runCatchment(model, state, forcings, 0, simulated, flowMm, { every: CHECKPOINT_EVERY, store });
    if (simulated % CHECKPOINT_EVERY === 0) store.push(state.slice());
    const sim: number[] = new Array(n);
    for (let i = 0; i < n; i++) sim[i] = roundFlow(mmPerDayToCubicMetresPerSecond(flowMm[spinup + i], area));
    models.push(model);
    checkpointStores.push(store);
    memberSimulations[memberIds[k]] = sim;
    memberParameters[memberIds[k]] = memberSets[k];
  }

  const times: string[] = new Array(n);
  for (let i = 0; i < n; i++) times[i] = isoUtc(timesMs[spinup + i]);
  const round1 = (x: number) => Math.round(x * 10) / 10;

  const forecastRun = (issueTimeIndex: number): ForecastRun => {
    if (!Number.isInteger(issueTimeIndex) || issueTimeIndex < WARMUP_STEPS - 1 || issueTimeIndex > n - 1) {
      throw new RangeError(`issueTimeIndex must be an integer in [${WARMUP_STEPS - 1}, ${n - 1}], got ${String(issueTimeIndex)}`);
    }
    const issue = spinup + issueTimeIndex; // internal index of the issue step
    const firstWarm = issue - WARMUP_STEPS + 1;
    const steps = WARMUP_STEPS + HORIZON_STEPS;

    const futureP = new Float64Array(HORIZON_STEPS);
    const futureT = new Float64Array(HORIZON_STEPS);
    perturbForecastForcings(
      createVariates(mixSeed(seed % 2 ** 32, Math.floor(seed / 2 ** 32), issueTimeIndex), STREAM.forecast),
      weather.precipitation.subarray(issue + 1, issue + 1 + HORIZON_STEPS),
      weather.airTemperature.subarray(issue + 1, issue + 1 + HORIZON_STEPS),
      futureP,
      futureT,
    );
    const futurePe = new Float64Array(HORIZON_STEPS);
    for (let k = 0; k < HORIZON_STEPS; k++) futurePe[k] = oudinPeAt(CLIMATE.latitudeDeg, doy[issue + 1 + k], futureT[k]);

    const members: ForecastMember[] = [];
    for (let m = 0; m < memberCount; m++) {
      const store = checkpointStores[m];
      const c = Math.min(Math.floor((issue + 1) / CHECKPOINT_EVERY), store.length - 1);
      const state = store[c].slice();
      runCatchment(models[m], state, forcings, c * CHECKPOINT_EVERY, issue + 1);
      const sim = memberSimulations[memberIds[m]];
      const values: number[] = new Array(steps);
      for (let k = 0; k < WARMUP_STEPS; k++) values[k] = sim[issueTimeIndex - WARMUP_STEPS + 1 + k];
      for (let k = 0; k < HORIZON_STEPS; k++) {
        const q = catchmentStep(models[m], state, futureP[k], futureT[k], futurePe[k]);
        values[WARMUP_STEPS + k] = roundFlow(mmPerDayToCubicMetresPerSecond(q, area));
      }
      members.push({ id: memberIds[m], values, warmupSteps: WARMUP_STEPS });
    }

    const runTimes: string[] = new Array(steps);
    const precipitation: number[] = new Array(steps);
    const airTemperature: number[] = new Array(steps);
    for (let k = 0; k < steps; k++) {
      runTimes[k] = isoUtc(timesMs[firstWarm + k]);
      const past = k < WARMUP_STEPS;
      precipitation[k] = round1(past ? weather.precipitation[firstWarm + k] : futureP[k - WARMUP_STEPS]);
      airTemperature[k] = round1(past ? weather.airTemperature[firstWarm + k] : futureT[k - WARMUP_STEPS]);
    }
    return {
      issueTime: times[issueTimeIndex],
      issueTimeIndex,
      times: runTimes,
      warmupSteps: WARMUP_STEPS,
      horizonSteps: HORIZON_STEPS,
      members,
      forcings: { precipitation, air_temperature: airTemperature },
    };
  };

  const reforecasts = (opts: ReforecastOptions = {}): ForecastRun[] => {
    const lastVerifiable = n - 1 - HORIZON_STEPS;
    const toIndex = intOption('toIndex', opts.toIndex, lastVerifiable, WARMUP_STEPS - 1, n - 1);
    const fromIndex = intOption('fromIndex', opts.fromIndex, Math.max(WARMUP_STEPS - 1, toIndex - 3 * 365), WARMUP_STEPS - 1, toIndex);
    const every = intOption('everySteps', opts.everySteps, 7, 1, n);
    const runs: ForecastRun[] = [];
    for (let i = fromIndex; i <= toIndex; i += every) runs.push(forecastRun(i));
    return runs;
  };

  const precipitation: number[] = new Array(n);
  const airTemperature: number[] = new Array(n);
  for (let i = 0; i < n; i++) {
    precipitation[i] = round1(weather.precipitation[spinup + i]);
    airTemperature[i] = round1(weather.airTemperature[spinup + i]);
  }

  return {
    seed,
    gauge: { ...GAUGE_INFO, thresholds },
    times,
    units: { flow: 'm3/s', precipitation: 'mm', air_temperature: 'degC' },
    observedFlow,
    forcings: { precipitation, air_temperature: airTemperature },
    memberIds,
    memberSimulations,
    memberParameters,
    truth: { parameters: { ...TRUE_PARAMETERS }, flow: truthFlow.map(roundFlow), snowpackMm: snowpack.map(round1) },
    thresholdBasis:
      `Gumbel (EV1) fitted by L-moments to the ${years} calendar-year maxima of the noise-free true flow; ` +
      RETURN_PERIODS.map((r) => `"${r.label}" = ${r.years}-year return level`).join(', ') +
      '; rounded to 0.1 m3/s',
    warmupSteps: WARMUP_STEPS,
    horizonSteps: HORIZON_STEPS,
    forecastRun,
    reforecasts,
  };
}
