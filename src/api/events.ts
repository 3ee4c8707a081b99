import type { ServerResponse } from 'node:http';
import type { FastifyInstance } from 'fastify';
import { tokenActive } from '../store/tokens-repo.ts';
import { addRoute, type Services } from './context.ts';

/** How long a stream trusts that its token is still active before asking the store again. */
const RECHECK_MS = 5_000;

/**
 * Server-sent events: one `forecast` event per new run, from any service instance. A stream lives
 * only as long as its token: it is closed when the token is revoked (announced by the store) and,
 * should that announcement be missed, when a send finds the token no longer active.
 */
export async function eventRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const open = new Set<ServerResponse>();
  /** Open streams by the token that opened them (none when AUTH=off). */
  const byToken = new Map<string, Set<() => void>>();
  const checked = new Map<string, { active: Promise<boolean>; until: number }>();
  const stopRevocations = services.revocations.subscribe((tokenId) => {
    checked.set(tokenId, { active: Promise.resolve(false), until: Infinity });
    for (const close of byToken.get(tokenId) ?? []) close();
  });
  // Streams never go idle, so they are ended before the server waits for connections to close.
  app.addHook('preClose', async () => {
    stopRevocations();
    for (const res of open) res.end(': the service is shutting down\n\n');
    open.clear();
  });

  /** Whether the token may still receive events; one store look-up per token per RECHECK_MS, shared by its streams. */
  function stillActive(tokenId: string): Promise<boolean> {
    const now = Date.now();
    let entry = checked.get(tokenId);
    if (!entry || entry.until < now) {
      entry = { active: tokenActive(services.db, tokenId).catch(() => true), until: now + RECHECK_MS };
      checked.set(tokenId, entry);
    }
    return entry.active;
  }

  addRoute(app, services, { method: 'GET', url: '/events', summary: 'Server-sent events announcing each new run (event: forecast); the stream closes when its token is revoked', tag: 'forecasts', role: 'read', responseTypes: ['text/event-stream'] }, async (req, reply) => {
    reply.hijack();
    const res = reply.raw;
    const tokenId = req.principal?.tokenId ?? null;
    res.writeHead(200, { 'content-type': 'text/event-stream', 'cache-control': 'no-cache', connection: 'keep-alive', 'x-accel-buffering': 'no' });
    res.write(': connected\n\n');
    open.add(res);
    let closed = false;
    const revoked = () => {
      if (closed) return;
      res.end('event: revoked\ndata: {"detail":"the access token of this stream was revoked"}\n\n');
      cleanUp();
    };
    const unsubscribe = services.events.subscribe((a) => {
      if (tokenId === null) {
        res.write(`event: forecast\ndata: ${JSON.stringify(a)}\n\n`);
        return;
      }
      void stillActive(tokenId).then((active) => {
        if (closed) return;
        if (active) res.write(`event: forecast\ndata: ${JSON.stringify(a)}\n\n`);
        else revoked();
      });
    });
    const keepAlive = setInterval(() => {
      if (tokenId === null) res.write(': keep-alive\n\n');
      else void stillActive(tokenId).then((active) => (closed ? undefined : active ? res.write(': keep-alive\n\n') : revoked()));
    }, 15_000);
    if (tokenId !== null) {
      let set = byToken.get(tokenId);
      if (!set) byToken.set(tokenId, (set = new Set()));
      set.add(revoked);
    }
    function cleanUp() {
      if (closed) return;
      closed = true;
      clearInterval(keepAlive);
      unsubscribe();
      open.delete(res);
      if (tokenId !== null) {
        const set = byToken.get(tokenId);
        set?.delete(revoked);
        if (set && !set.size) byToken.delete(tokenId);
      }
    }
    req.raw.on('close', cleanUp);
  });
}
