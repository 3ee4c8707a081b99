import type { Queryable } from '../store/db.ts';

/** How a job's work reports its stage and percent done; the answer says whether it was asked to stop. */
export type JobProgress = (stage: string, percent: number) => Promise<boolean>;

/**
 * Checks, inside the transaction that stores a job's results, that this instance still holds the
 * job (throws otherwise, rolling the transaction back); absent when the work runs outside a job.
 */
export type JobHold = (tx: Queryable) => Promise<void>;
