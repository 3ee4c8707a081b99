import type { Queryable } from './db.ts';
import type { Role } from './tokens-repo.ts';

/** Keeps a ticket's hash for the token that asked for it; expired tickets are swept on the way. */
export async function insertStreamTicket(db: Queryable, hash: string, tokenId: string, expiresAt: Date): Promise<void> {
  await db.query("delete from stream_tickets where expires_at < now() - interval '1 minute'");
  await db.query('insert into stream_tickets (ticket_hash, token_id, expires_at) values ($1, $2, $3)', [hash, tokenId, expiresAt]);
}

/**
 * Uses a ticket up: it is deleted whatever happens, and it opens a stream only when it has not
 * expired and its token is still valid. Null when it is unknown, spent, expired or revoked.
 */
export async function redeemStreamTicket(db: Queryable, hash: string): Promise<{ tokenId: string; role: Role } | null> {
  const { rows } = await db.query<{ id: string; role: Role }>(
    `with used as (delete from stream_tickets where ticket_hash = $1 returning token_id, expires_at)
     select t.id, t.role from used join api_tokens t on t.id = used.token_id
      where used.expires_at > now() and t.revoked_at is null`,
    [hash],
  );
  return rows[0] ? { tokenId: rows[0].id, role: rows[0].role } : null;
}
