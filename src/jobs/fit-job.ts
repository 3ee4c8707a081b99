import { buildRawArchive, fitModel, FitJobParams, RawArchiveJobParams } from '../services/fit.ts';
import { defineJob } from './runner.ts';

/** Fits a residual model (src/services/fit.ts). */
export const fitJob = defineJob('fit', FitJobParams, (params, job, { db, progress, signal, hold }) =>
  fitModel(db, { gaugeId: job.gaugeId!, createdBy: job.createdBy, hold }, params, progress, signal),
);

/** Builds the raw members' error archive alone, so degraded mode works before any model is fitted. */
export const rawArchiveJob = defineJob('raw-archive', RawArchiveJobParams, (params, job, { db, progress, hold }) => buildRawArchive(db, { gaugeId: job.gaugeId!, hold }, params, progress));
