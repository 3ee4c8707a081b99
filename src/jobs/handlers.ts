import { fitJob, rawArchiveJob } from './fit-job.ts';
import { hindcastJob } from './hindcast-job.ts';
import type { JobHandler } from './runner.ts';

/** Every kind of background job the service runs. */
export const jobHandlers: Record<string, JobHandler> = {
  fit: fitJob,
  'raw-archive': rawArchiveJob,
  hindcast: hindcastJob,
};
