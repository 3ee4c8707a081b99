import type { FastifyRequest } from 'fastify';
import { findTokenByHash, touchToken, type Role } from '../store/tokens-repo.ts';
import type { Services } from './context.ts';
import { Problem } from '../services/problem.ts';
import { redeemTicket } from './stream-tickets.ts';
import { hashToken, roleRank } from './tokens.ts';

const CACHE_MS = 30_000;

/**
 * Bearer-token check. Each route declares the least role it needs; GET routes need `read`.
 * Lookups are cached briefly so polling dashboards do not cost a query each; a revocation is
 * announced by the store and drops the token from the cache at once (within CACHE_MS should the
 * announcement be missed).
 */
export function authHook(services: Services) {
  const cache = new Map<string, { principal: { tokenId: string; role: Role }; until: number }>();
  // A revoked token (revoked on any instance) stops working here at once, not when its entry expires.
  services.revocations.subscribe((tokenId) => {
    for (const [hash, entry] of cache) if (entry.principal.tokenId === tokenId) cache.delete(hash);
  });

  return async function checkToken(request: FastifyRequest): Promise<void> {
    // Unknown paths fall through to the 404 answer; every real route declares its role.
    if (request.is404) return;
    const required = request.routeOptions.config?.role ?? 'admin';
    if (required === 'open' || services.config.AUTH === 'off') return;

    const header = request.headers.authorization ?? '';
    const ticket = (request.query as { ticket?: unknown } | undefined)?.ticket;
    // A stream ticket stands in for the token only on the one route that takes it (the event stream).
    if (!header && typeof ticket === 'string' && request.routeOptions.config?.acceptsStreamTicket) {
      const principal = await redeemTicket(services.db, ticket);
      if (!principal) {
        throw new Problem(401, 'unauthorized', 'Unauthorized', 'the stream ticket is unknown, used or expired; ask for a new one with POST /stream-tickets', [{ path: 'query.ticket', message: 'not a valid ticket' }], {
          'www-authenticate': 'Bearer error="invalid_token"',
        });
      }
      if (roleRank[principal.role] < roleRank[required]) {
        throw new Problem(403, 'forbidden', 'Forbidden', `this route needs the ${required} role; the ticket's token has ${principal.role}`);
      }
      request.principal = principal;
      return;
    }
    const match = /^Bearer\s+(\S+)$/i.exec(header);
    if (!match) {
      throw new Problem(401, 'unauthorized', 'Unauthorized', 'send a bearer token: Authorization: Bearer <token>', [], {
        'www-authenticate': 'Bearer',
      });
    }
    const hash = hashToken(match[1]);
    const now = Date.now();
    let entry = cache.get(hash);
    if (!entry || entry.until < now) {
      const row = await findTokenByHash(services.db, hash);
      if (!row) {
        cache.delete(hash);
        throw new Problem(401, 'unauthorized', 'Unauthorized', 'the token is unknown or revoked', [], {
          'www-authenticate': 'Bearer error="invalid_token"',
        });
      }
      entry = { principal: { tokenId: row.id, role: row.role }, until: now + CACHE_MS };
      if (cache.size > 10_000) cache.clear();
      cache.set(hash, entry);
      touchToken(services.db, row.id).catch(() => undefined);
    }
    if (roleRank[entry.principal.role] < roleRank[required]) {
      throw new Problem(403, 'forbidden', 'Forbidden', `this route needs the ${required} role; the token has ${entry.principal.role}`);
    }
    request.principal = entry.principal;
  };
}
