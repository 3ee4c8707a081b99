import type { ServerResponse } from 'node:http';
import type { FastifyInstance } from 'fastify';
import { addRoute, type Services } from './context.ts';

/** Server-sent events: one `forecast` event per new run, from any service instance. */
export async function eventRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const open = new Set<ServerResponse>();
  // Streams never go idle, so they are ended before the server waits for connections to close.
  app.addHook('preClose', async () => {
    for (const res of open) res.end(': the service is shutting down\n\n');
    open.clear();
  });

  addRoute(app, services, { method: 'GET', url: '/events', summary: 'Server-sent events announcing each new run (event: forecast)', tag: 'forecasts', role: 'read', responseTypes: ['text/event-stream'] }, async (req, reply) => {
    reply.hijack();
    const res = reply.raw;
    res.writeHead(200, { 'content-type': 'text/event-stream', 'cache-control': 'no-cache', connection: 'keep-alive', 'x-accel-buffering': 'no' });
    res.write(': connected\n\n');
    open.add(res);
    const unsubscribe = services.events.subscribe((a) => {
      res.write(`event: forecast\ndata: ${JSON.stringify(a)}\n\n`);
    });
    const keepAlive = setInterval(() => res.write(': keep-alive\n\n'), 15_000);
    req.raw.on('close', () => {
      clearInterval(keepAlive);
      unsubscribe();
      open.delete(res);
    });
  });
}
