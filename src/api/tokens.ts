import { createHash, randomBytes } from 'node:crypto';
import { z } from 'zod';
import type { Queryable } from '../store/db.ts';
import { insertToken, listTokens, type Role } from '../store/tokens-repo.ts';

export const roleRank: Record<Role | 'open', number> = { open: 0, read: 1, ingest: 2, admin: 3 };

export const ROLES = ['admin', 'ingest', 'read'] as const satisfies readonly Role[];

/** A request for a new token: over HTTP (POST /tokens), the local control socket and the token command. */
export const TokenRequest = z.strictObject({
  role: z.enum(ROLES),
  name: z.string().min(1).max(100),
});

/** A token as listed: never its secret. */
export interface TokenListed {
  id: string;
  name: string;
  role: Role;
  createdAt: string;
  lastUsedAt: string | null;
  revokedAt: string | null;
}

/** Tokens are 32 random bytes; only their SHA-256 is stored, so a leaked table leaks no token. */
export function hashToken(token: string): string {
  return createHash('sha256').update(token).digest('hex');
}

export async function createToken(db: Queryable, role: Role, name: string): Promise<{ id: string; token: string }> {
  const id = randomBytes(6).toString('hex');
  const token = `sft_${id}_${randomBytes(32).toString('base64url')}`;
  await insertToken(db, { id, name, role, hash: hashToken(token) });
  return { id, token };
}

export async function listedTokens(db: Queryable): Promise<TokenListed[]> {
  return (await listTokens(db)).map((t) => ({
    id: t.id,
    name: t.name,
    role: t.role,
    createdAt: t.created_at.toISOString(),
    lastUsedAt: t.last_used_at?.toISOString() ?? null,
    revokedAt: t.revoked_at?.toISOString() ?? null,
  }));
}
