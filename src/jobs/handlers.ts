import { refreshAllGaugeStatuses } from '../services/drift.ts';
import { fitJob, rawArchiveJob } from './fit-job.ts';
import { hindcastJob } from './hindcast-job.ts';
import { jobTable, type ScheduledTask } from './runner.ts';

/** Every kind of background job the service runs. */
export const jobHandlers = jobTable([fitJob, rawArchiveJob, hindcastJob]);

/** What the runner repeats on its own: the drift status of every gauge, 30 s after start, then every 10 minutes (observations also trigger one per gauge). */
export const jobSchedule: ScheduledTask[] = [{ name: 'drift status refresh', firstMs: 30_000, everyMs: 10 * 60_000, run: (db, log) => refreshAllGaugeStatuses(db, log) }];
