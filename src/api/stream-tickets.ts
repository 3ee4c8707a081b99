import { createHash, randomBytes } from 'node:crypto';
import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { insertStreamTicket, redeemStreamTicket } from '../store/stream-tickets-repo.ts';
import type { Queryable } from '../store/db.ts';
import { Problem } from '../services/problem.ts';
import { addRoute, type Services } from './context.ts';

/** A ticket opens one event stream within this time of being issued. */
export const STREAM_TICKET_SECONDS = 60;

export const StreamTicketAnswer = z.object({
  ticket: z.string().describe('opens GET /events?ticket=… once'),
  expiresAt: z.string().describe('RFC 3339; the ticket is refused after it'),
  url: z.string().describe('the event stream address with the ticket'),
});

const hash = (ticket: string) => createHash('sha256').update(ticket).digest('hex');

/**
 * Browsers' EventSource cannot send an Authorization header, and a long-lived token must not sit
 * in a URL (addresses end up in logs and histories). So a client with a read token asks for a
 * ticket: random, good for one stream, for about a minute, and accepted only by GET /events.
 */
export async function streamTicketRoutes(app: FastifyInstance, { services }: { services: Services }) {
  addRoute(
    app,
    services,
    { method: 'POST', url: '/stream-tickets', summary: `A single-use ticket (valid ${STREAM_TICKET_SECONDS} s) that opens the event stream: GET /events?ticket=…`, tag: 'forecasts', role: 'read', response: StreamTicketAnswer, status: 201 },
    async (req, reply) => {
      const principal = req.principal;
      // With AUTH=off there is no token to tie the ticket to, and /events needs none.
      if (!principal) throw new Problem(409, 'no-token', 'No token', 'authentication is off: open /events without a ticket');
      const ticket = `stk_${randomBytes(24).toString('base64url')}`;
      const expiresAt = new Date(Date.now() + STREAM_TICKET_SECONDS * 1000);
      await insertStreamTicket(services.db, hash(ticket), principal.tokenId, expiresAt);
      reply.code(201).header('cache-control', 'no-store');
      return { ticket, expiresAt: expiresAt.toISOString(), url: `/events?ticket=${ticket}` };
    },
  );
}

/** The principal a ticket stands for; null when it is unknown, spent, expired or its token revoked. */
export function redeemTicket(db: Queryable, ticket: string) {
  return redeemStreamTicket(db, hash(ticket));
}
