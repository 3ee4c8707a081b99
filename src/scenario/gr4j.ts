// GR4J daily rainfall-runoff model (Perrin, Michel & Andréassian 2003, J. Hydrol. 279, 275–289,
// Appendix A). Equation numbers below are from memory and may be off by one or two:
//   interception: Pn = P − E, En = 0 if P ≥ E, else Pn = 0, En = E − P          (eqs. 1–2)
//   store inflow   Ps = X1 (1 − (S/X1)²) tanh(Pn/X1) / (1 + S/X1 tanh(Pn/X1))      (eq. 3)
//   store evap.    Es = S (2 − S/X1) tanh(En/X1) / (1 + (1 − S/X1) tanh(En/X1))    (eq. 4)
//   percolation    Perc = S {1 − [1 + (4/9 · S/X1)^4]^(−1/4)}                       (eq. 5)
//   Pr = Perc + (Pn − Ps); 90 % routed by UH1 into the routing store, 10 % by UH2    (eqs. 6–14)
//   exchange       F = X2 (R/X3)^(7/2)                                             (eq. 15)
//   routing store  R = max(0, R + Q9 + F); Qr = R {1 − [1 + (R/X3)^4]^(−1/4)}      (eqs. 16–17)
//   direct flow    Qd = max(0, Q1 + F); Q = Qr + Qd                                (eqs. 18–19)
// The exchange F is applied to both branches, so the potential total is 2F; where a branch
// would go negative it is clipped and the actual exchange is what was really taken. With the
// actual exchange the water balance closes exactly:
//   Σ P = Σ AE + Σ Q + Δ(S + R + UH contents) − Σ actual exchange.
// Cross-read (not copied) against a public reference implementation for the order of operations.
import { checkGr4jParameters, type Gr4jParameters } from './gr4j-parameters.ts';
import { uh1Ordinates, uh2Ordinates } from './unit-hydrograph.ts';

/** Indices into a GR4J flux record (all mm over the step). */
export const GR4J_FLUX = {
  netRainfall: 0, // Pn
  netEvaporationDemand: 1, // En
  storeInflow: 2, // Ps
  storeEvaporation: 3, // Es
  actualEvaporation: 4, // AE = Es + interception min(P, E)
  percolation: 5, // Perc
  effectiveRainfall: 6, // Pr
  uh1Outflow: 7, // Q9
  uh2Outflow: 8, // Q1
  potentialExchange: 9, // F (per branch)
  actualExchange: 10, // actual total over both branches (> 0 gain)
  routedFlow: 11, // Qr
  directFlow: 12, // Qd
  flow: 13, // Q
} as const;
export const GR4J_FLUX_COUNT = 14;

/** State layout, relative to the model's base offset in a state array. */
export const GR4J_STATE = { productionStore: 0, routingStore: 1, unitHydrographs: 2 } as const;

export interface Gr4jModel {
  readonly params: Gr4jParameters;
  readonly uh1: Float64Array;
  readonly uh2: Float64Array;
  /** Number of state slots: S, R, then UH1 and UH2 pending water. */
  readonly stateSize: number;
}

const ROUTED_SHARE = 0.9; // 90/10 split of Pr (paper)
const PERC_FACTOR = 4 / 9; // (4/9)^4 in the percolation law (paper)

/** Validates the parameters (throws RangeError outside the published ranges) and precomputes the UH ordinates. */
export function createGr4j(params: Gr4jParameters): Gr4jModel {
  checkGr4jParameters(params);
  const uh1 = uh1Ordinates(params.x4);
  const uh2 = uh2Ordinates(params.x4);
  return { params: { ...params }, uh1, uh2, stateSize: 2 + uh1.length + uh2.length };
}

export interface Gr4jInitialFill {
  /** S0 / X1, default 0.3 (a common starting fill, from memory). */
  readonly production?: number;
  /** R0 / X3, default 0.5 (a common starting fill, from memory). */
  readonly routing?: number;
}

/** Writes an initial state at `base` (UHs empty). */
export function initGr4jState(model: Gr4jModel, state: Float64Array, base = 0, fill: Gr4jInitialFill = {}): void {
  state.fill(0, base, base + model.stateSize);
  state[base + GR4J_STATE.productionStore] = (fill.production ?? 0.3) * model.params.x1;
  state[base + GR4J_STATE.routingStore] = (fill.routing ?? 0.5) * model.params.x3;
}

/** Water held in the two unit hydrographs (mm), part of the storage in the water balance. */
export function unitHydrographContent(model: Gr4jModel, state: Float64Array, base = 0): number {
  let sum = 0;
  const end = base + model.stateSize;
  for (let k = base + GR4J_STATE.unitHydrographs; k < end; k++) sum += state[k];
  return sum;
}

// Adds `input` spread by `ord` to pending water at `start`, returns what leaves now and shifts by one step.
function convolve(state: Float64Array, start: number, ord: Float64Array, input: number): number {
  const n = ord.length;
  for (let k = 0; k < n; k++) state[start + k] += ord[k] * input;
  const out = state[start];
  for (let k = 0; k < n - 1; k++) state[start + k] = state[start + k + 1];
  state[start + n - 1] = 0;
  return out;
}

/**
 * One daily step. `p` and `pe` in mm/d (P here is the liquid input, i.e. rain + melt when a
 * snow routine runs first). Updates the state in place and, when `flux` is given, writes the
 * GR4J_FLUX record at `fluxBase`. Returns Q (mm/d).
 */
export function gr4jStep(
  model: Gr4jModel,
  state: Float64Array,
  base: number,
  p: number,
  pe: number,
  flux?: Float64Array,
  fluxBase = 0,
): number {
  const { x1, x2, x3 } = model.params;
  let s = state[base + GR4J_STATE.productionStore];
  const r0 = state[base + GR4J_STATE.routingStore];

  let pn = 0;
  let en = 0;
  let ps = 0;
  let es = 0;
  let ae = 0;
  if (p >= pe) {
    pn = p - pe;
    ae = pe;
    const tw = Math.tanh(pn / x1);
    const sr = s / x1;
    ps = (x1 * (1 - sr * sr) * tw) / (1 + sr * tw);
    s += ps;
  } else {
    en = pe - p;
    const tw = Math.tanh(en / x1);
    const sr = s / x1;
    es = (s * (2 - sr) * tw) / (1 + (1 - sr) * tw);
    s -= es;
    ae = es + p;
  }
  if (s < 0) s = 0; // rounding guard only: Es ≤ S holds exactly in real arithmetic

  const q = (PERC_FACTOR * s) / x1;
  const q2 = q * q;
  const perc = s * (1 - 1 / Math.sqrt(Math.sqrt(1 + q2 * q2)));
  s -= perc;
  const pr = pn - ps + perc;

  const uhStart = base + GR4J_STATE.unitHydrographs;
  const q9 = convolve(state, uhStart, model.uh1, ROUTED_SHARE * pr);
  const q1 = convolve(state, uhStart + model.uh1.length, model.uh2, (1 - ROUTED_SHARE) * pr);

  const rr = r0 / x3;
  const f = x2 * rr * rr * rr * Math.sqrt(rr);

  let r = r0 + q9 + f;
  let exchange1 = f;
  if (r < 0) {
    exchange1 = -(r0 + q9);
    r = 0;
  }
  const rq = r / x3;
  const rq2 = rq * rq;
  const qr = r * (1 - 1 / Math.sqrt(Math.sqrt(1 + rq2 * rq2)));
  r -= qr;

  let qd = q1 + f;
  let exchange2 = f;
  if (qd < 0) {
    exchange2 = -q1;
    qd = 0;
  }
  const flow = qr + qd;

  state[base + GR4J_STATE.productionStore] = s;
  state[base + GR4J_STATE.routingStore] = r;

  if (flux !== undefined) {
    flux[fluxBase + GR4J_FLUX.netRainfall] = pn;
    flux[fluxBase + GR4J_FLUX.netEvaporationDemand] = en;
    flux[fluxBase + GR4J_FLUX.storeInflow] = ps;
    flux[fluxBase + GR4J_FLUX.storeEvaporation] = es;
    flux[fluxBase + GR4J_FLUX.actualEvaporation] = ae;
    flux[fluxBase + GR4J_FLUX.percolation] = perc;
    flux[fluxBase + GR4J_FLUX.effectiveRainfall] = pr;
    flux[fluxBase + GR4J_FLUX.uh1Outflow] = q9;
    flux[fluxBase + GR4J_FLUX.uh2Outflow] = q1;
    flux[fluxBase + GR4J_FLUX.potentialExchange] = f;
    flux[fluxBase + GR4J_FLUX.actualExchange] = exchange1 + exchange2;
    flux[fluxBase + GR4J_FLUX.routedFlow] = qr;
    flux[fluxBase + GR4J_FLUX.directFlow] = qd;
    flux[fluxBase + GR4J_FLUX.flow] = flow;
  }
  return flow;
}
