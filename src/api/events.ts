import type { ServerResponse } from 'node:http';
import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { latestRunEventId, runEventsAfter, type RunEvent } from '../store/forecasts-repo.ts';
import { invalid } from '../services/problem.ts';
import { tokenActive } from '../store/tokens-repo.ts';
import { addRoute, type Services } from './context.ts';
import type { RunAnnouncement } from './forecast-events.ts';

/** What a client should wait before reconnecting (the `retry:` field, milliseconds). */
export const RETRY_MS = 5_000;
/** A client that missed more runs than this is told to reload (event `resync`) instead of being sent them all. */
export const REPLAY_LIMIT = 500;
/** How long a stream trusts that its token is still active before asking the store again. */
const RECHECK_MS = 5_000;

const EventId = z.string().regex(/^\d{1,18}$/, 'must be an event id sent by this service (digits)');
const EventsQuery = z.strictObject({
  ticket: z.string().max(200).optional().describe('a stream ticket from POST /stream-tickets, for browsers (EventSource cannot send a header); used up on opening'),
  lastEventId: EventId.optional().describe('resume after this event; the Last-Event-ID header wins (EventSource sends it on its own reconnections)'),
});

/**
 * Server-sent events: one `forecast` event per new run, from any service instance. Each event's
 * `id:` is the run's event number in the store, so a client that reconnects with Last-Event-ID is
 * first sent every run stored after that event (after a restart too, and on any instance).
 * A stream lives only as long as its token: it is closed when the token is revoked (announced by
 * the store) and, should that announcement be missed, when a send finds the token no longer active.
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

  addRoute(
    app,
    services,
    {
      method: 'GET',
      url: '/events',
      summary: 'Server-sent events: `ready` (id: newest run event) on a fresh stream, then `forecast` per new run (id: its event number); Last-Event-ID resumes from the store; browsers open it with ?ticket=; the stream closes (event `revoked`) when its token is revoked',
      tag: 'forecasts',
      role: 'read',
      acceptsStreamTicket: true,
      query: EventsQuery,
      responseTypes: ['text/event-stream'],
    },
    async (req, reply) => {
      const header = req.headers['last-event-id'];
      const headerId = Array.isArray(header) ? header[0] : header;
      if (headerId !== undefined && headerId !== '' && !EventId.safeParse(headerId).success) {
        throw invalid([{ path: 'headers.last-event-id', message: 'must be digits, as sent in an event id' }], 'Last-Event-ID is not an event id of this service');
      }
      const resumeFrom = headerId ? headerId : req.query.lastEventId;

      reply.hijack();
      const res = reply.raw;
      const tokenId = req.principal?.tokenId ?? null;
      res.writeHead(200, { 'content-type': 'text/event-stream', 'cache-control': 'no-cache', connection: 'keep-alive', 'x-accel-buffering': 'no' });
      res.write(`retry: ${RETRY_MS}\n: connected\n\n`);
      open.add(res);
      services.events.openStreams++;
      let closed = false;
      const revoked = () => {
        if (closed) return;
        res.end('event: revoked\ndata: {"detail":"the access token of this stream was revoked"}\n\n');
        cleanUp();
      };

      // Everything after `sent` has not been written yet; live announcements that arrive while the
      // store is read are held back and written after the replay, each run once.
      let sent: bigint | null = resumeFrom === undefined ? null : BigInt(resumeFrom);
      let held: RunAnnouncement[] | null = [];
      const write = (a: RunAnnouncement) => {
        if (res.writableEnded) return;
        if (a.eventId !== undefined) {
          const n = BigInt(a.eventId);
          if (sent !== null && n <= sent) return;
          sent = n;
        }
        res.write(formatRunEvent(a));
      };
      // With a token, each live event is sent only while the token is still active (checks are
      // shared and cached, so events keep their order).
      const live = (a: RunAnnouncement) => {
        if (held) held.push(a);
        else if (tokenId === null) write(a);
        else void stillActive(tokenId).then((active) => (closed ? undefined : active ? write(a) : revoked()));
      };
      const unsubscribe = services.events.subscribe(live);
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
        services.events.openStreams--;
        if (tokenId !== null) {
          const set = byToken.get(tokenId);
          set?.delete(revoked);
          if (set && !set.size) byToken.delete(tokenId);
        }
      }
      req.raw.on('close', cleanUp);

      try {
        if (sent === null) {
          // A fresh stream starts with `ready`, whose id is the newest event stored: a client that
          // reconnects from there misses nothing even if no run arrives in between.
          const latest = (await latestRunEventId(services.db)) ?? '0';
          sent = BigInt(latest);
          if (!res.writableEnded) res.write(`id: ${latest}\nevent: ready\ndata: ${JSON.stringify({ latestEventId: latest })}\n\n`);
        } else {
          const replay = await runEventsAfter(services.db, sent, REPLAY_LIMIT);
          const latest = replay.latest ?? '0';
          // Too much was missed to send run by run, or the id is ahead of the store (restored from a
          // backup, or another service's): the client reloads what it shows and counts from here.
          const reason = replay.more ? `more than ${REPLAY_LIMIT} runs were stored since event ${resumeFrom}; reload` : sent > BigInt(latest) ? `event ${resumeFrom} is newer than any stored (${latest}); reload` : null;
          if (reason) {
            sent = BigInt(latest);
            if (!res.writableEnded) res.write(`id: ${latest}\nevent: resync\ndata: ${JSON.stringify({ reason })}\n\n`);
          } else {
            for (const e of replay.events) write(e);
          }
        }
      } catch (err) {
        req.log.error({ err }, 'event replay failed');
        res.end();
        return;
      }
      const pending = held ?? [];
      held = null;
      for (const a of pending) live(a);
    },
  );
}

/** One run as a text/event-stream event; the id is omitted for announcements without one. */
export function formatRunEvent(a: RunAnnouncement | RunEvent): string {
  const data = { gaugeId: a.gaugeId, runId: a.runId, issueTime: a.issueTime };
  return `${a.eventId !== undefined ? `id: ${a.eventId}\n` : ''}event: forecast\ndata: ${JSON.stringify(data)}\n\n`;
}
