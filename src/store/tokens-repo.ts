import type { Queryable } from './db.ts';

export type Role = 'admin' | 'ingest' | 'read';

export interface TokenRow {
  id: string;
  name: string;
  role: Role;
  created_at: Date;
  last_used_at: Date | null;
  revoked_at: Date | null;
}

export async function insertToken(db: Queryable, t: { id: string; name: string; role: Role; hash: string }): Promise<void> {
  await db.query('insert into api_tokens (id, name, role, token_hash) values ($1, $2, $3, $4)', [t.id, t.name, t.role, t.hash]);
}

export async function findTokenByHash(db: Queryable, hash: string): Promise<TokenRow | null> {
  const { rows } = await db.query<TokenRow>(
    'select id, name, role, created_at, last_used_at, revoked_at from api_tokens where token_hash = $1 and revoked_at is null',
    [hash],
  );
  return rows[0] ?? null;
}

export async function touchToken(db: Queryable, id: string): Promise<void> {
  await db.query(
    "update api_tokens set last_used_at = now() where id = $1 and (last_used_at is null or last_used_at < now() - interval '1 minute')",
    [id],
  );
}

export async function listTokens(db: Queryable): Promise<TokenRow[]> {
  return (
    await db.query<TokenRow>('select id, name, role, created_at, last_used_at, revoked_at from api_tokens order by created_at')
  ).rows;
}

/** Channel on which a revoked token's id is announced to every service instance. */
export const REVOCATION_CHANNEL = 'api_token_revoked';

/** Revokes a token and announces it in the same statement (delivered when it commits). */
export async function revokeToken(db: Queryable, id: string): Promise<boolean> {
  const { rows } = await db.query(
    `with revoked as (update api_tokens set revoked_at = now() where id = $1 and revoked_at is null returning id)
     select id, pg_notify('${REVOCATION_CHANNEL}', id) from revoked`,
    [id],
  );
  return rows.length > 0;
}

/** Whether a token is still usable (not revoked). */
export async function tokenActive(db: Queryable, id: string): Promise<boolean> {
  const { rows } = await db.query('select 1 from api_tokens where id = $1 and revoked_at is null', [id]);
  return rows.length > 0;
}

export async function countTokens(db: Queryable): Promise<number> {
  const { rows } = await db.query<{ n: number }>('select count(*)::int as n from api_tokens where revoked_at is null');
  return Number(rows[0]?.n ?? 0);
}
