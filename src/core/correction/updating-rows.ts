// Feature rows of a run's members at the observation's time (ageSteps before issue), laid out as
// the continuous-simulation rows the residual model was trained on (lead_hours 0), so the member's
// corrected value there, and so its issue-time error, can be computed at serving.
import { writeFeatureRow } from '../features/feature-row.ts';
import { FeatureInputError, featureCount, type FeatureSpec } from '../features/feature-spec.ts';
import type { RunInput } from '../features/features.ts';

export function observationTimeRows(spec: FeatureSpec, run: RunInput, ageSteps: number): { rows: Float32Array; nRows: number; nFeatures: number; simAt: Float64Array } {
  const nF = featureCount(spec);
  const M = run.members.length;
  const rows = new Float32Array(M * nF);
  const simAt = new Float64Array(M);
  const forcingAt = new Int32Array(spec.forcings.length);
  const forcingRow: ArrayLike<number>[] = new Array(spec.forcings.length);
  const validTime = run.issueTime - ageSteps * spec.stepSeconds * 1000;
  for (let m = 0; m < M; m++) {
    const sim = run.members[m];
    const at = sim.length - run.nLeads - 1 - ageSteps;
    spec.forcings.forEach((f, fi) => {
      const given = run.forcings?.[f.name];
      if (given === undefined) throw new FeatureInputError(`forcings.${f.name}`, 'missing');
      const series = (Array.isArray(given) && given.length > 0 && typeof given[0] !== 'number' && given[0] !== null ? (given as ArrayLike<number>[])[m] : given) as ArrayLike<number>;
      forcingRow[fi] = series;
      forcingAt[fi] = series.length - run.nLeads - 1 - ageSteps;
    });
    if (at < spec.simLags || !writeFeatureRow(spec, rows, m * nF, sim, at, forcingRow, forcingAt, validTime, 0, 0)) {
      throw new FeatureInputError(`members[${m}].values`, `missing input for the residual model at the observation's time (${ageSteps} step(s) before issue)`);
    }
    simAt[m] = Number(sim[at]);
  }
  return { rows, nRows: M, nFeatures: nF, simAt };
}
