import type { Db } from '../store/db.ts';
import { REVOCATION_CHANNEL } from '../store/tokens-repo.ts';

/**
 * Revoked tokens are announced through PostgreSQL LISTEN/NOTIFY (sent by the revoking statement
 * itself, so the HTTP route and the token command alike announce it), so every service instance
 * drops the token from its auth cache and closes that token's open event streams at once.
 */
export class TokenRevocations {
  private listeners = new Set<(tokenId: string) => void>();
  private stop: (() => Promise<void>) | null = null;

  async start(db: Db): Promise<void> {
    this.stop = await db.listen(REVOCATION_CHANNEL, (tokenId) => {
      for (const fn of this.listeners) fn(tokenId);
    });
  }

  subscribe(fn: (tokenId: string) => void): () => void {
    this.listeners.add(fn);
    return () => this.listeners.delete(fn);
  }

  async close(): Promise<void> {
    await this.stop?.();
    this.listeners.clear();
  }
}
