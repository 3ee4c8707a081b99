// "The corrected member", defined once and used by serving (src/models/correct-run.ts), the error
// archives (src/models/residual-evaluation.ts, src/models/reforecast-evaluation.ts) and hindcasts
// (src/models/hindcast-compute.ts).
//
// A residual model predicts the raw model's residual (observed − simulated) in flow units, so a
// member is corrected as simulated + residual, clipped at zero (flows are never negative).
//
// A bundle of K residual models gives each member K corrected values, each clipped on its own
// first. The stochastic stage takes all K·M of them (every model, every member); wherever one value
// per member is needed (the run's corrected ensemble, validation scores, the cases of the error
// archives, the hindcast's corrected column) it is the mean over the K clipped values. The order
// matters where clipping bites: simulated 2 with residuals −5 and +1 gives (0 + 3)/2 = 1.5, whereas
// clipping the mean residual's sum would give max(0, 2 − 2) = 0. Serving has always clipped each
// model's value first; this module makes the archives do the same, so the errors an archive holds
// are errors of the very values the stage is later given.

/** max(0, simulated + residual); NaN when either is missing (NaN). Callers decide what an infinite residual means. */
export function correctedMember(simulated: number, residual: number): number {
  return Math.max(0, simulated + residual);
}

