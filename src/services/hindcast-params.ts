// What a hindcast job is asked to do, stored as the job's parameters. Its own module because two
// use cases make them: a request (src/services/hindcast.ts checks it) and the drift watch, which
// asks for the hindcast that measures a version's level (src/services/drift.ts).
import type { SourceName } from '../core/verification/index.ts';

/** Parameters of a hindcast job, as stored with the job. */
export interface HindcastJobParams {
  /** 'auto' (reference jobs): reforecast when the period holds at least 20 stored runs, else simulation. */
  mode: 'simulation' | 'reforecast' | 'auto';
  versionId: string;
  /** Issue-time window [from, to); null = the version's validation period. */
  from: string | null;
  to: string | null;
  /** Lead times (steps); null = 10 (simulation) or the longest stored (reforecast), within the archive's reach. */
  horizon: number | null;
  /** Simulation mode: one issue every n steps. */
  everySteps: number;
  trajectories: number;
  seed: number;
  seasonalWindowDays: number | null;
  /** 1-based lead steps kept by the verification; null = open. */
  minLead: number | null;
  maxLead: number | null;
  sizeStudy: { sources: SourceName[]; sizes: number[]; repeats: number; caseFraction: number | null };
  /** 'drift-reference' when the drift watch started it to measure the version's validation level. */
  purpose: 'request' | 'drift-reference';
  /** Store the stochastic stage's coverage and CRPS as the version's drift-watch level (refused when the period overlaps calibration). */
  setDriftLevel: boolean;
}

/** The hindcast that measures a version's level: its validation period, reforecasts when there are enough. */
export function referenceHindcastParams(versionId: string, horizon: number | null): HindcastJobParams {
  return {
    mode: 'auto',
    versionId,
    from: null,
    to: null,
    horizon,
    everySteps: 1,
    trajectories: 1000,
    seed: 1,
    seasonalWindowDays: 60,
    minLead: null,
    maxLead: null,
    sizeStudy: { sources: [], sizes: [], repeats: 1, caseFraction: null },
    purpose: 'drift-reference',
    setDriftLevel: true,
  };
}
