import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { getJob, listJobs, requestCancel } from '../store/jobs-repo.ts';
import { addRoute, type Services } from './context.ts';
import { conflict, invalid, notFound } from '../services/problem.ts';
import { decodeCursor, encodeCursor, NextCursor, pageQuery } from './pagination.ts';
import { GaugeId, JobAnswer } from './schemas.ts';

const JobParams = z.object({ id: z.string() });
const JobsQuery = z.strictObject({ gauge: GaugeId.optional(), ...pageQuery(50, 500) });
/** Where a page of jobs ended (newest first) and for which gauge filter. */
const JobsCursor = z.strictObject({ before: z.string().regex(/^\d{1,18}$/), gauge: GaugeId.nullable() });

export async function jobRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;
  addRoute(app, services, { method: 'GET', url: '/jobs', summary: 'Background jobs (fits, archives, hindcasts), newest first, a page at a time (limit, cursor → next)', tag: 'jobs', role: 'read', query: JobsQuery, response: z.object({ jobs: z.array(JobAnswer), next: NextCursor }) }, async (req) => {
    const { limit, cursor } = req.query;
    const gauge = req.query.gauge ?? null;
    const after = cursor === undefined ? null : decodeCursor(cursor, JobsCursor);
    if (after && after.gauge !== gauge) throw invalid([{ path: 'query.cursor', message: `the cursor is for ${after.gauge ? `gauge=${after.gauge}` : 'all gauges'}; ask with the same gauge filter` }]);
    const rows = await listJobs(db, gauge, after?.before ?? null, limit + 1);
    const jobs = rows.slice(0, limit);
    return { jobs, next: rows.length > limit ? encodeCursor({ before: jobs[jobs.length - 1].id, gauge }) : null };
  });
  addRoute(app, services, { method: 'GET', url: '/jobs/:id', summary: 'One job: status, stage, percent done, result or error', tag: 'jobs', role: 'read', params: JobParams, response: JobAnswer }, async (req) => {
    const { id } = req.params;
    const job = await getJob(db, id);
    if (!job) throw notFound(`no job ${id}`);
    return job;
  });
  addRoute(app, services, { method: 'POST', url: '/jobs/:id/cancel', summary: 'Ask a job to stop; a queued job is cancelled at once', tag: 'jobs', role: 'admin', params: JobParams, response: JobAnswer, status: 202 }, async (req, reply) => {
    const { id } = req.params;
    const job = await requestCancel(db, id);
    if (!job) {
      const ended = await getJob(db, id);
      if (!ended) throw notFound(`no job ${id}`);
      throw conflict(`job ${id} already ended (${ended.status}); nothing was changed`);
    }
    reply.code(202);
    return job;
  });
}
