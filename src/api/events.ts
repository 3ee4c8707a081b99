import type { ServerResponse } from 'node:http';
import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { latestRunEventId, runEventsAfter, type RunEvent } from '../store/forecasts-repo.ts';
import { invalid } from '../services/problem.ts';
import { addRoute, type Services } from './context.ts';
import type { RunAnnouncement } from './forecast-events.ts';

/** What a client should wait before reconnecting (the `retry:` field, milliseconds). */
export const RETRY_MS = 5_000;
/** A client that missed more runs than this is told to reload (event `resync`) instead of being sent them all. */
export const REPLAY_LIMIT = 500;

const EventId = z.string().regex(/^\d{1,18}$/, 'must be an event id sent by this service (digits)');
const EventsQuery = z.strictObject({
  ticket: z.string().max(200).optional().describe('a stream ticket from POST /stream-tickets, for browsers (EventSource cannot send a header); used up on opening'),
  lastEventId: EventId.optional().describe('resume after this event; the Last-Event-ID header wins (EventSource sends it on its own reconnections)'),
});

/**
 * Server-sent events: one `forecast` event per new run, from any service instance. Each event's
 * `id:` is the run's event number in the store, so a client that reconnects with Last-Event-ID is
 * first sent every run stored after that event (after a restart too, and on any instance).
 */
export async function eventRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const open = new Set<ServerResponse>();
  // Streams never go idle, so they are ended before the server waits for connections to close.
  app.addHook('preClose', async () => {
    for (const res of open) res.end(': the service is shutting down\n\n');
    open.clear();
  });

  addRoute(
    app,
    services,
    {
      method: 'GET',
      url: '/events',
      summary: 'Server-sent events: `ready` (id: newest run event) on a fresh stream, then `forecast` per new run (id: its event number); Last-Event-ID resumes from the store; browsers open it with ?ticket=',
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
      res.writeHead(200, { 'content-type': 'text/event-stream', 'cache-control': 'no-cache', connection: 'keep-alive', 'x-accel-buffering': 'no' });
      res.write(`retry: ${RETRY_MS}\n: connected\n\n`);
      open.add(res);
      services.events.openStreams++;

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
      const unsubscribe = services.events.subscribe((a) => (held ? held.push(a) : write(a)));
      const keepAlive = setInterval(() => res.write(': keep-alive\n\n'), 15_000);
      req.raw.on('close', () => {
        clearInterval(keepAlive);
        unsubscribe();
        open.delete(res);
        services.events.openStreams--;
      });

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
      for (const a of pending) write(a);
    },
  );
}

/** One run as a text/event-stream event; the id is omitted for announcements without one. */
export function formatRunEvent(a: RunAnnouncement | RunEvent): string {
  const data = { gaugeId: a.gaugeId, runId: a.runId, issueTime: a.issueTime };
  return `${a.eventId !== undefined ? `id: ${a.eventId}\n` : ''}event: forecast\ndata: ${JSON.stringify(data)}\n\n`;
}
