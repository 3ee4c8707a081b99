import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { getJob, listJobs, requestCancel } from '../store/jobs-repo.ts';
import { addRoute, type Services } from './context.ts';
import { conflict, notFound } from '../services/problem.ts';
import { GaugeId } from './schemas.ts';

const JobParams = z.object({ id: z.string() });
const JobsQuery = z.strictObject({ gauge: GaugeId.optional() });

export async function jobRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;
  addRoute(app, services, { method: 'GET', url: '/jobs', summary: 'Recent background jobs (fits, archives, hindcasts)', tag: 'jobs', role: 'read', query: JobsQuery }, async (req) => {
    const { gauge } = req.query;
    return { jobs: await listJobs(db, gauge) };
  });
  addRoute(app, services, { method: 'GET', url: '/jobs/:id', summary: 'One job: status, stage, percent done, result or error', tag: 'jobs', role: 'read', params: JobParams }, async (req) => {
    const { id } = req.params;
    const job = await getJob(db, id);
    if (!job) throw notFound(`no job ${id}`);
    return job;
  });
  addRoute(app, services, { method: 'POST', url: '/jobs/:id/cancel', summary: 'Ask a job to stop; a queued job is cancelled at once', tag: 'jobs', role: 'admin', params: JobParams }, async (req, reply) => {
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
