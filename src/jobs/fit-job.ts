import { buildRawArchive, fitModel, type FitJobParams, type RawArchiveJobParams } from '../services/fit.ts';
import type { JobHandler } from './runner.ts';

/** Fits a residual model (src/services/fit.ts). */
export const fitJob: JobHandler = (job, { db, progress, signal }) =>
  fitModel(db, { gaugeId: job.gaugeId!, createdBy: job.createdBy }, job.params as unknown as FitJobParams, progress, signal);

/** Builds the raw members' error archive alone, so degraded mode works before any model is fitted. */
export const rawArchiveJob: JobHandler = (job, { db, progress }) => buildRawArchive(db, { gaugeId: job.gaugeId! }, job.params as unknown as RawArchiveJobParams, progress);
