// A stand-in service for the page test: the real page plugin plus the reads the page uses
// (GET /overview, GET /gauges/:id/forecasts/latest, GET /gauges/:id/verification, GET /events), answering in the contract's shape
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
  /** Number of GET /gauges/:id/forecasts/latest answered per gauge id. */
  latestReads: Map<string, number>;
  openStreams(): number;
  sendEvent(type: string, data: unknown): void;
  dropStreams(): void;
  close(): Promise<void>;
}

export async function startFixtureServer(readToken: string, gauges: GaugeEntry[]): Promise<FixtureServer> {
  const app = Fastify({ logger: false });
  // The page plugin only uses `docs`; the store and config are not needed here.
  const services = { docs: new ApiDocs() } as unknown as Services;
  const byId = new Map(gauges.map((g) => [g.id, g]));
  const seen: string[] = [];
  const latestReads = new Map<string, number>();
  const streams = new Set<ServerResponse>();

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

  app.get('/gauges/:id/forecasts/latest', async (request, reply) => {
    requireRead(request);
    const { id } = request.params as { id: string };
    latestReads.set(id, (latestReads.get(id) ?? 0) + 1);
    const g = byId.get(id);
    if (!g) throw new Problem(404, 'not-found', 'Not found', `no gauge ${id}`);
    if (!g.latest) throw new Problem(404, 'not-found', 'Not found', `no forecast for gauge ${id}`);
    reply.header('etag', `"${g.latest.id}"`);
    return g.latest;
  });

  app.get('/gauges/:id/verification', async (request) => {
    requireRead(request);
    const { id } = request.params as { id: string };
    const g = byId.get(id);
    if (!g || g.verification === undefined) throw new Problem(404, 'not-found', 'Not found', `no verification for gauge ${id}`);
    return g.verification;
  });

  app.get('/events', async (request, reply) => {
    requireRead(request);
    reply.hijack();
    const res = reply.raw;
    res.writeHead(200, { 'content-type': 'text/event-stream', 'cache-control': 'no-store', connection: 'keep-alive' });
    res.write(': connected\n\n');
    streams.add(res);
    request.raw.on('close', () => streams.delete(res));
  });

  const url = await app.listen({ host: '127.0.0.1', port: 0 });

  return {
    app,
    url,
    gauges: byId,
    seen,
    latestReads,
    openStreams: () => streams.size,
    sendEvent(type, data) {
      for (const res of streams) res.write(`event: ${type}\ndata: ${JSON.stringify(data)}\n\n`);
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
