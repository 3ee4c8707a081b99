// A stand-in service for the page test: the real page plugin plus the reads the page uses
// (GET /overview, GET /gauges/:id/forecasts/latest, GET /gauges/:id/verification, POST /stream-tickets,
// GET /events?ticket=), answering in the contract's shape
// from fixture data. To be replaced by the real service once those endpoints exist.
import type { ServerResponse } from 'node:http';
import Fastify, { type FastifyInstance, type FastifyRequest } from 'fastify';
import type { Services } from '../../src/api/context.ts';
import { ApiDocs } from '../../src/api/openapi.ts';
import { pageRoutes } from '../../src/api/page.ts';
import { Problem } from '../../src/services/problem.ts';
import { CAUTION, overviewEntry, type Forecast, type OverviewGauge } from './fixture.ts';

export interface GaugeEntry {
  id: string;
  name: string;
  /** IANA time zone the page shows the gauge's times in; UTC when absent. */
  timeZone?: string;
  status: OverviewGauge['status'];
  thresholds: { label: string; value: number }[];
  latest: Forecast | null;
  /** Answer of GET /gauges/:id/verification (404 when absent). */
  verification?: unknown;
}

export interface FixtureServer {
  app: FastifyInstance;
  url: string;
  gauges: Map<string, GaugeEntry>;
  /** Every request URL seen (path and query; a fragment never arrives). */
  seen: string[];
  /** Tickets issued by POST /stream-tickets and not yet used. */
  tickets: Set<string>;
  /** Last-Event-ID (header or lastEventId parameter) of each stream opened, '' when none. */
  resumedFrom: string[];
  /** Number of GET /gauges/:id/forecasts/latest answered per gauge id. */
  latestReads: Map<string, number>;
  openStreams(): number;
  sendEvent(type: string, data: unknown): void;
  dropStreams(): void;
  close(): Promise<void>;
}

/** A small CSV standing in for the service's forecast CSV (its content is the service's business). */
export function fixtureCsv(f: Forecast): string {
  return `lead_time,valid_time,q50 (m3/s)\n${f.leadTimes.map((l, k) => `${l},${f.validTimes[k]},${f.quantiles.values[3][k]}`).join('\n')}\n`;
}

export async function startFixtureServer(readToken: string, gauges: GaugeEntry[]): Promise<FixtureServer> {
  const app = Fastify({ logger: false });
  // The page plugin only uses `docs`; the store and config are not needed here.
  const services = { docs: new ApiDocs() } as unknown as Services;
  const byId = new Map(gauges.map((g) => [g.id, g]));
  const seen: string[] = [];
  const latestReads = new Map<string, number>();
  const streams = new Set<ServerResponse>();
  const tickets = new Set<string>();
  const resumedFrom: string[] = [];
  let eventId = 100;

  app.setErrorHandler((error, request, reply) => {
    const p = error instanceof Problem ? error : new Problem(500, 'internal-error', 'Internal error', (error as Error).message);
    reply.code(p.status).headers(p.headers).type('application/problem+json').send(p.body(request.url));
  });
  app.addHook('onRequest', async (request) => {
    seen.push(request.url);
  });

  const requireRead = (request: FastifyRequest) => {
    if (request.headers.authorization !== `Bearer ${readToken}`) {
      throw new Problem(401, 'unauthorized', 'Unauthorized', 'send a bearer token: Authorization: Bearer <token>', [], {
        'www-authenticate': 'Bearer',
      });
    }
  };

  await app.register(pageRoutes, { services });

  app.get('/overview', async (request) => {
    requireRead(request);
    return { caution: CAUTION, gauges: [...byId.values()].map((g) => overviewEntry(g, g.latest)) };
  });

  app.get('/gauges/:id', async (request) => {
    requireRead(request);
    const { id } = request.params as { id: string };
    const g = byId.get(id);
    if (!g) throw new Problem(404, 'not-found', 'Not found', `no gauge ${id}`);
    return { id: g.id, name: g.name, timeZone: g.timeZone ?? 'UTC', thresholds: g.thresholds, status: g.status };
  });

  app.get('/gauges/:id/forecasts/latest', async (request, reply) => {
    requireRead(request);
    const { id } = request.params as { id: string };
    const g = byId.get(id);
    if (!g) throw new Problem(404, 'not-found', 'Not found', `no gauge ${id}`);
    if (!g.latest) throw new Problem(404, 'not-found', 'Not found', `no forecast for gauge ${id}`);
    if ((request.query as { format?: string }).format === 'csv') {
      reply.type('text/csv; charset=utf-8');
      return fixtureCsv(g.latest);
    }
    latestReads.set(id, (latestReads.get(id) ?? 0) + 1);
    reply.header('etag', `"${g.latest.id}"`);
    return g.latest;
  });

  app.get('/gauges/:id/verification', async (request, reply) => {
    requireRead(request);
    const { id } = request.params as { id: string };
    const g = byId.get(id);
    if (!g || g.verification === undefined) throw new Problem(404, 'not-found', 'Not found', `no verification for gauge ${id}`);
    if ((request.query as { format?: string }).format === 'csv') {
      reply.type('text/csv; charset=utf-8');
      return `gauge,verification\n${id},fixture\n`;
    }
    return g.verification;
  });

  app.post('/stream-tickets', async (request, reply) => {
    requireRead(request);
    const ticket = `stk_fixture_${tickets.size}_${Math.random().toString(36).slice(2)}`;
    tickets.add(ticket);
    reply.code(201);
    return { ticket, expiresAt: new Date(Date.now() + 60_000).toISOString(), url: `/events?ticket=${ticket}` };
  });

  // As the service: only a ticket opens the stream (the page's EventSource sends no header), once.
  app.get('/events', async (request, reply) => {
    const q = request.query as { ticket?: string; lastEventId?: string };
    if (!q.ticket || !tickets.delete(q.ticket)) throw new Problem(401, 'unauthorized', 'Unauthorized', 'the stream ticket is unknown, used or expired');
    const header = request.headers['last-event-id'];
    resumedFrom.push((typeof header === 'string' ? header : q.lastEventId) ?? '');
    reply.hijack();
    const res = reply.raw;
    res.writeHead(200, { 'content-type': 'text/event-stream', 'cache-control': 'no-store', connection: 'keep-alive' });
    res.write(`retry: 5000\n: connected\n\nid: ${eventId}\nevent: ready\ndata: {}\n\n`);
    streams.add(res);
    request.raw.on('close', () => streams.delete(res));
  });

  const url = await app.listen({ host: '127.0.0.1', port: 0 });

  return {
    app,
    url,
    gauges: byId,
    seen,
    tickets,
    resumedFrom,
    latestReads,
    openStreams: () => streams.size,
    sendEvent(type, data) {
      eventId++;
      for (const res of streams) res.write(`id: ${eventId}\nevent: ${type}\ndata: ${JSON.stringify(data)}\n\n`);
    },
    dropStreams() {
      for (const res of streams) res.end();
      streams.clear();
    },
    async close() {
      for (const res of streams) res.end();
      streams.clear();
      await app.close();
    },
  };
}
