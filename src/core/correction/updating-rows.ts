// Feature rows of a run's members at the observation's time (ageSteps before issue), laid out as
// the continuous-simulation rows the residual model was trained on (lead_hours 0), so the member's
// corrected value there, and so its issue-time error, can be computed at serving.
import { writeFeatureRow } from '../features/feature-row.ts';
import { FeatureInputError, featureCount, type FeatureSpec } from '../features/feature-spec.ts';
import type { RunForcing, RunInput } from '../features/features.ts';
import { isSequenceSpec, type SequenceSpec } from '../features/sequence-spec.ts';
import { servingWindows } from '../features/windows.ts';

export interface ObservationTimeInputs {
  rows: Float32Array;
  nRows: number;
  nFeatures: number;
  /** Each member's simulated value at the observation's time. */
  simAt: Float64Array;
}

/** The model's inputs at the observation's time, for flat-row and sequence models alike. */
export function observationTimeInputs(spec: FeatureSpec | SequenceSpec, run: RunInput, ageSteps: number): ObservationTimeInputs {
  return isSequenceSpec(spec) ? observationTimeWindows(spec, run, ageSteps) : observationTimeRows(spec, run, ageSteps);
}

/**
 * The run as seen from the observation's time: issued one step before it, with the observation's
 * step as its only lead time (every series cut there; indices into them are unchanged).
 */
export function runAtObservation(run: RunInput, ageSteps: number, stepSeconds: number): RunInput {
  const cut = (s: ArrayLike<number>): number[] => Array.prototype.slice.call(s, 0, s.length - run.nLeads - ageSteps) as number[];
  const forcings: Record<string, RunForcing> = {};
  for (const [name, f] of Object.entries(run.forcings ?? {})) {
    const perMember = f.length > 0 && typeof f[0] !== 'number' && f[0] !== null;
    forcings[name] = perMember ? Array.from(f as ArrayLike<number>[], cut) : cut(f as ArrayLike<number>);
  }
  return { issueTime: run.issueTime - (ageSteps + 1) * stepSeconds * 1000, nLeads: 1, members: run.members.map(cut), forcings, issueObservation: null };
}

/** Windows ending at the observation's time, one per member, laid out as the serving windows. */
export function observationTimeWindows(spec: SequenceSpec, run: RunInput, ageSteps: number): ObservationTimeInputs {
  const w = servingWindows(spec, runAtObservation(run, ageSteps, spec.stepSeconds));
  const simAt = Float64Array.from(run.members, (sim) => Number(sim[sim.length - run.nLeads - 1 - ageSteps]));
  return { rows: w.rows, nRows: w.nRows, nFeatures: w.nFeatures, simAt };
}

export function observationTimeRows(spec: FeatureSpec, run: RunInput, ageSteps: number): ObservationTimeInputs {
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
