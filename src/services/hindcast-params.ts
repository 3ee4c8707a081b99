// What a hindcast job is asked to do, stored as the job's parameters. Its own module because two
// use cases make them: a request (src/services/hindcast.ts checks it) and the drift watch, which
// asks for the hindcast that measures a version's level (src/services/drift.ts).
import { z } from 'zod';

/** Parameters of a hindcast job, as stored with the job (read back through this schema). */
export const HindcastJobParams = z.object({
  /** 'auto' (reference jobs): reforecast when the period holds at least 20 stored runs, else simulation. */
  mode: z.enum(['simulation', 'reforecast', 'auto']),
  versionId: z.string(),
  /** Issue-time window [from, to); null = the version's validation period. */
  from: z.string().nullable(),
  to: z.string().nullable(),
  /** Lead times (steps); null = 10 (simulation) or the longest stored (reforecast), within the archive's reach. */
  horizon: z.number().int().nullable(),
  /** Simulation mode: one issue every n steps. */
  everySteps: z.number().int(),
  trajectories: z.number().int(),
  seed: z.number().int(),
  seasonalWindowDays: z.number().nullable(),
  /** 1-based lead steps kept by the verification; null = open. */
  minLead: z.number().int().nullable(),
  maxLead: z.number().int().nullable(),
  sizeStudy: z.object({ sources: z.array(z.enum(['raw', 'corrected', 'stochastic'])), sizes: z.array(z.number().int()), repeats: z.number().int(), caseFraction: z.number().nullable() }),
  /** 'drift-reference' when the drift watch started it to measure the version's validation level. */
  purpose: z.enum(['request', 'drift-reference']),
  /** Store the stochastic stage's coverage and CRPS as the version's drift-watch level (refused when the period overlaps calibration). */
  setDriftLevel: z.boolean(),
  /** Attention level the warnings are scored at (config ATTENTION_LEVEL when requested; jobs stored before it: 0.3, its default). */
  attentionLevel: z.number().min(0).max(1).default(0.3),
});
export type HindcastJobParams = z.output<typeof HindcastJobParams>;

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
    attentionLevel: 0.3,
  };
}
