import { createHash, randomBytes } from 'node:crypto';
import type { Queryable } from '../store/db.ts';
import { insertToken, type Role } from '../store/tokens-repo.ts';

export const roleRank: Record<Role | 'open', number> = { open: 0, read: 1, ingest: 2, admin: 3 };

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
