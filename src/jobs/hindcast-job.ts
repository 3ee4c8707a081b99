import { runHindcast } from '../services/hindcast.ts';
import type { HindcastJobParams } from '../services/hindcast-params.ts';
import type { JobHandler } from './runner.ts';

/** Runs a hindcast (src/services/hindcast.ts). */
export const hindcastJob: JobHandler = (job, { db, progress, signal }) =>
  runHindcast(db, { id: job.id, gaugeId: job.gaugeId! }, job.params as unknown as HindcastJobParams, progress, signal);
