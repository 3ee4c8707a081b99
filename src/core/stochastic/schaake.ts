/**
 * Schaake shuffle (Clark et al. 2004): at each lead time, the n sampled values are reordered
 * so that their ranks across trajectories equal the ranks of n historical template
 * trajectories; each lead's set of values (its marginal) is kept exactly.
 * Layout of samples, template and result: lead-major, [lead·nDraws + draw].
 * Ties in the template are broken by draw index (stable), so repeated templates map to
 * neighbouring ranks.
 */
export function schaakeShuffle(
  samples: ArrayLike<number>,
  template: ArrayLike<number>,
  nDraws: number,
  nLeads: number,
): Float64Array {
  const size = nDraws * nLeads;
  if (samples.length !== size || template.length !== size) throw new RangeError('samples and template must hold nDraws × nLeads values');
  const out = new Float64Array(size);
  const sorted = new Float64Array(nDraws);
  const order = new Int32Array(nDraws);
  for (let h = 0; h < nLeads; h++) {
    const base = h * nDraws;
    for (let j = 0; j < nDraws; j++) {
      sorted[j] = samples[base + j];
      order[j] = j;
    }
    sorted.sort();
    order.sort((p, q) => template[base + p] - template[base + q] || p - q);
    // The trajectory whose template value has rank r receives the r-th smallest sample.
    for (let r = 0; r < nDraws; r++) out[base + order[r]] = sorted[r];
  }
  return out;
}
