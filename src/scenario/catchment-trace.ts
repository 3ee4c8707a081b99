// Full record of a snow + GR4J run: every flux and store per step, for water-balance checks.
import { SNOW_FLUX, SNOW_STATE } from './cemaneige.ts';
import { GR4J_FLUX, GR4J_STATE } from './gr4j.ts';
import { unitHydrographContent } from './gr4j.ts';
import {
  CATCHMENT_FLUX_COUNT,
  GR4J_FLUX_OFFSET,
  GR4J_STATE_OFFSET,
  catchmentStep,
  catchmentStorage,
} from './catchment-model.ts';
import type { CatchmentForcings, CatchmentModel } from './catchment-model.ts';

/** Fluxes in mm/d, stores in mm at the end of each step. */
export interface CatchmentTrace {
  readonly precipitation: Float64Array;
  readonly rain: Float64Array;
  readonly snowfall: Float64Array;
  readonly melt: Float64Array;
  readonly actualEvaporation: Float64Array;
  readonly percolation: Float64Array;
  readonly potentialExchange: Float64Array;
  readonly actualExchange: Float64Array;
  readonly flow: Float64Array;
  readonly snowpack: Float64Array;
  readonly productionStore: Float64Array;
  readonly routingStore: Float64Array;
  readonly unitHydrographContent: Float64Array;
  /** Total storage before the first step (mm). */
  readonly initialStorage: number;
}

export function traceCatchment(model: CatchmentModel, state: Float64Array, forcings: CatchmentForcings): CatchmentTrace {
  const n = forcings.precipitation.length;
  const mk = () => new Float64Array(n);
  const tr = {
    precipitation: mk(), rain: mk(), snowfall: mk(), melt: mk(), actualEvaporation: mk(), percolation: mk(),
    potentialExchange: mk(), actualExchange: mk(), flow: mk(), snowpack: mk(), productionStore: mk(),
    routingStore: mk(), unitHydrographContent: mk(), initialStorage: catchmentStorage(model, state),
  };
  const flux = new Float64Array(CATCHMENT_FLUX_COUNT);
  const g = GR4J_FLUX_OFFSET;
  for (let i = 0; i < n; i++) {
    const p = forcings.precipitation[i];
    catchmentStep(model, state, p, forcings.airTemperature[i], forcings.potentialEvaporation[i], flux);
    tr.precipitation[i] = p;
    tr.rain[i] = flux[SNOW_FLUX.rain];
    tr.snowfall[i] = flux[SNOW_FLUX.snowfall];
    tr.melt[i] = flux[SNOW_FLUX.melt];
    tr.actualEvaporation[i] = flux[g + GR4J_FLUX.actualEvaporation];
    tr.percolation[i] = flux[g + GR4J_FLUX.percolation];
    tr.potentialExchange[i] = flux[g + GR4J_FLUX.potentialExchange];
    tr.actualExchange[i] = flux[g + GR4J_FLUX.actualExchange];
    tr.flow[i] = flux[g + GR4J_FLUX.flow];
    tr.snowpack[i] = state[SNOW_STATE.snowpack];
    tr.productionStore[i] = state[GR4J_STATE_OFFSET + GR4J_STATE.productionStore];
    tr.routingStore[i] = state[GR4J_STATE_OFFSET + GR4J_STATE.routingStore];
    tr.unitHydrographContent[i] = unitHydrographContent(model.gr4j, state, GR4J_STATE_OFFSET);
  }
  return tr;
}
