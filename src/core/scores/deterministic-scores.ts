/**
 * Deterministic scores of a simulated/forecast series against observations. A pair is used only
 * when both values are finite (NaN, null, ±Infinity skipped); `n` reports how many were used.
 *
 * bias = mean(sim − obs) (positive = overestimation); percentBias = 100·Σ(sim − obs)/Σ obs;
 * NSE = 1 − Σ(sim − obs)²/Σ(obs − mean obs)² (Nash & Sutcliffe 1970);
 * KGE = 1 − √((r−1)² + (α−1)² + (β−1)²), α = σ_sim/σ_obs, β = μ_sim/μ_obs (Gupta et al. 2009);
 * KGE' uses γ = (σ_sim/μ_sim)/(σ_obs/μ_obs) in place of α (Kling et al. 2012).
 * Standard deviations are population ones (the ratios do not depend on the divisor).
 * Undefined values (no pairs, constant observations, zero means) are NaN.
 */
export interface DeterministicScores {
  n: number;
  mae: number;
  rmse: number;
  bias: number;
  percentBias: number;
  nse: number;
  kge: number;
  /** Pearson correlation of sim and obs. */
  r: number;
  /** σ_sim/σ_obs. */
  alpha: number;
  /** μ_sim/μ_obs. */
  beta: number;
  kgePrime: number;
  /** (σ_sim/μ_sim)/(σ_obs/μ_obs). */
  gamma: number;
}

function usable(v: number | null): v is number {
  return v !== null && Number.isFinite(v);
}

export function deterministicScores(
  sim: ArrayLike<number | null>,
  obs: ArrayLike<number | null>,
): DeterministicScores {
  if (sim.length !== obs.length) throw new RangeError('sim and obs must have the same length');
  let n = 0;
  let ss = 0;
  let so = 0;
  for (let i = 0; i < sim.length; i++) {
    const s = sim[i];
    const o = obs[i];
    if (!usable(s) || !usable(o)) continue;
    n++;
    ss += s;
    so += o;
  }
  const ms = ss / n;
  const mo = so / n;
  // Second pass on centred values, for accuracy with large flows.
  let absErr = 0;
  let sqErr = 0;
  let sumErr = 0;
  let vs = 0;
  let vo = 0;
  let cov = 0;
  for (let i = 0; i < sim.length; i++) {
    const s = sim[i];
    const o = obs[i];
    if (!usable(s) || !usable(o)) continue;
    const e = s - o;
    absErr += Math.abs(e);
    sqErr += e * e;
    sumErr += e;
    const ds = s - ms;
    const d = o - mo;
    vs += ds * ds;
    vo += d * d;
    cov += ds * d;
  }
  const nan = n === 0;
  const sdS = Math.sqrt(vs / n);
  const sdO = Math.sqrt(vo / n);
  const r = vs > 0 && vo > 0 ? cov / Math.sqrt(vs * vo) : NaN;
  const alpha = vo > 0 ? sdS / sdO : NaN;
  const beta = mo !== 0 ? ms / mo : NaN;
  const gamma = ms !== 0 && mo !== 0 && sdO > 0 ? sdS / ms / (sdO / mo) : NaN;
  return {
    n,
    mae: nan ? NaN : absErr / n,
    rmse: nan ? NaN : Math.sqrt(sqErr / n),
    bias: nan ? NaN : sumErr / n,
    percentBias: nan || so === 0 ? NaN : (100 * sumErr) / so,
    nse: vo > 0 ? 1 - sqErr / vo : NaN,
    kge: 1 - Math.sqrt((r - 1) ** 2 + (alpha - 1) ** 2 + (beta - 1) ** 2),
    r,
    alpha,
    beta,
    kgePrime: 1 - Math.sqrt((r - 1) ** 2 + (gamma - 1) ** 2 + (beta - 1) ** 2),
    gamma,
  };
}
