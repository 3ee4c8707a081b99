import type { FastifyRequest } from 'fastify';
import { z } from 'zod';
import type { Queryable } from '../store/db.ts';
import { getGauge, type Gauge } from '../store/gauges-repo.ts';
import type { Window } from '../store/archive-repo.ts';
import { badRequest, notFound } from '../services/problem.ts';
import { GaugeId } from './schemas.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

export const GaugeParams = z.object({ id: GaugeId });

/** The gauge the route's (already parsed) params name, or 404. */
export async function requireGauge(db: Queryable, { id }: { id: string }, forUpdate = false): Promise<Gauge> {
  const gauge = await getGauge(db, id, forUpdate);
  if (!gauge) throw notFound(`no gauge ${id}`);
  return gauge;
}

/** JSON or CSV, decided by the request's content type. */
export function bodyFormat(req: FastifyRequest): 'json' | 'csv' {
  const type = (req.headers['content-type'] ?? '').split(';')[0].trim().toLowerCase();
  if (type === 'text/csv' || type === 'text/plain') {
    if (typeof req.body !== 'string') throw badRequest('the CSV body is empty');
    return 'csv';
  }
  return 'json';
}

/** CSV when asked by ?format=csv or an Accept header preferring text/csv. */
export function wantsCsv(req: FastifyRequest, format?: string): boolean {
  if (format) return format === 'csv';
  const accept = req.headers.accept ?? '';
  return accept.includes('text/csv') && !accept.includes('application/json');
}

/** The store's window for a parsed time-window query. */
export function readWindow(q: { from?: string; to?: string; format?: 'json' | 'csv' }): { window: Window; format?: 'json' | 'csv' } {
  const window: Window = {
    fromMs: q.from ? rfc3339Ms(q.from) : undefined,
    toMs: q.to ? rfc3339Ms(q.to) : undefined,
  };
  return { window, format: q.format };
}
