// Snow routine (CemaNeige, one layer) feeding GR4J: the conceptual model behind the demo.
// One state array per model: [snowpack G, thermal state eTG, GR4J state (S, R, UH1, UH2)].
import { SNOW_FLUX_COUNT, SNOW_STATE, SNOW_STATE_SIZE, cemaneigeStep, createCemaNeige } from './cemaneige.ts';
import type { CemaNeigeModel, CemaNeigeParameters } from './cemaneige.ts';
import { GR4J_FLUX_COUNT, GR4J_STATE, createGr4j, gr4jStep, initGr4jState, unitHydrographContent } from './gr4j.ts';
import type { Gr4jInitialFill, Gr4jModel } from './gr4j.ts';
import type { Gr4jParameters } from './gr4j-parameters.ts';

export interface CatchmentParameters extends Gr4jParameters, CemaNeigeParameters {}

export interface CatchmentModel {
  readonly snow: CemaNeigeModel;
  readonly gr4j: Gr4jModel;
  readonly stateSize: number;
}

/** Daily forcings; PE in mm/d, P in mm/d, T in °C. */
export interface CatchmentForcings {
  readonly precipitation: ArrayLike<number>;
  readonly airTemperature: ArrayLike<number>;
  readonly potentialEvaporation: ArrayLike<number>;
}

/** Combined flux record: snow fluxes first, GR4J fluxes from this offset. */
export const GR4J_FLUX_OFFSET = SNOW_FLUX_COUNT;
export const CATCHMENT_FLUX_COUNT = SNOW_FLUX_COUNT + GR4J_FLUX_COUNT;
export const GR4J_STATE_OFFSET = SNOW_STATE_SIZE;

/** Validates all six parameters (RangeError on any out of range). */
export function createCatchmentModel(params: CatchmentParameters, annualSnowfallMm: number): CatchmentModel {
  const snow = createCemaNeige({ ctg: params.ctg, kf: params.kf }, annualSnowfallMm);
  const gr4j = createGr4j({ x1: params.x1, x2: params.x2, x3: params.x3, x4: params.x4 });
  return { snow, gr4j, stateSize: SNOW_STATE_SIZE + gr4j.stateSize };
}

/** Fresh state: no snow, eTG = 0, GR4J stores partly filled. */
export function initialCatchmentState(model: CatchmentModel, fill: Gr4jInitialFill = {}): Float64Array {
  const state = new Float64Array(model.stateSize);
  initGr4jState(model.gr4j, state, GR4J_STATE_OFFSET, fill);
  return state;
}

/** Water stored in snowpack + production store + routing store + UHs (mm). */
export function catchmentStorage(model: CatchmentModel, state: Float64Array): number {
  return (
    state[SNOW_STATE.snowpack] +
    state[GR4J_STATE_OFFSET + GR4J_STATE.productionStore] +
    state[GR4J_STATE_OFFSET + GR4J_STATE.routingStore] +
    unitHydrographContent(model.gr4j, state, GR4J_STATE_OFFSET)
  );
}

/** One daily step; returns Q (mm/d). `flux` (CATCHMENT_FLUX_COUNT long) is optional. */
export function catchmentStep(
  model: CatchmentModel,
  state: Float64Array,
  p: number,
  t: number,
  pe: number,
  flux?: Float64Array,
): number {
  const liquid = cemaneigeStep(model.snow, state, 0, p, t, flux, 0);
  return gr4jStep(model.gr4j, state, GR4J_STATE_OFFSET, liquid, pe, flux, GR4J_FLUX_OFFSET);
}

/**
 * Steps indices [from, to) of the forcings, writing Q (mm/d) into flowOut[i] when given.
 * When `checkpoints` is given, a copy of the state *before* step i is stored for every
 * i ≡ 0 (mod checkpointEvery), so later runs can restart cheaply from any step.
 */
export function runCatchment(
  model: CatchmentModel,
  state: Float64Array,
  forcings: CatchmentForcings,
  from: number,
  to: number,
  flowOut?: Float64Array,
  checkpoints?: { readonly every: number; readonly store: Float64Array[] },
): void {
  const { precipitation: p, airTemperature: t, potentialEvaporation: pe } = forcings;
  for (let i = from; i < to; i++) {
    if (checkpoints !== undefined && i % checkpoints.every === 0) checkpoints.store[i / checkpoints.every] = state.slice();
    const q = catchmentStep(model, state, p[i], t[i], pe[i]);
    if (flowOut !== undefined) flowOut[i] = q;
  }
}
