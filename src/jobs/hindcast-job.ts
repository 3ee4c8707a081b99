import { runHindcast } from '../services/hindcast.ts';
import { HindcastJobParams } from '../services/hindcast-params.ts';
import { defineJob } from './runner.ts';

/** Runs a hindcast (src/services/hindcast.ts). */
export const hindcastJob = defineJob('hindcast', HindcastJobParams, (params, job, { db, progress, signal, hold }) =>
  runHindcast(db, { id: job.id, gaugeId: job.gaugeId!, hold }, params, progress, signal),
);
