import { mkdtempSync, readFileSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { hashToken } from '../../src/api/tokens.ts';
import { demoTokens } from '../../src/scenario/demo-tokens.ts';
import { openEmbedded } from '../../src/store/embedded-driver.ts';
import { migrate } from '../../src/store/migrate.ts';
import { findTokenByHash, revokeToken } from '../../src/store/tokens-repo.ts';

const dataDir = mkdtempSync(join(tmpdir(), 'sft-demo-tokens-'));
afterAll(() => rmSync(dataDir, { recursive: true, force: true }));

describe('the demo tokens', () => {
  it('makes one token per role in a 0600 file, reuses them, and replaces a revoked one', async () => {
    const db = await openEmbedded(null);
    try {
      await migrate(db);
      const first = await demoTokens(db, dataDir);
      expect(first.path).toBe(join(dataDir, 'demo-tokens.env'));
      expect(first.made).toEqual(['read', 'ingest', 'admin']);
      expect(statSync(first.path).mode & 0o777).toBe(0o600);
      const text = readFileSync(first.path, 'utf8');
      for (const [role, name] of [['read', 'READ_TOKEN'], ['ingest', 'INGEST_TOKEN'], ['admin', 'ADMIN_TOKEN']] as const) {
        expect(text).toContain(`export ${name}=${first.tokens[role]}\n`);
        expect((await findTokenByHash(db, hashToken(first.tokens[role])))?.role).toBe(role);
      }

      const second = await demoTokens(db, dataDir);
      expect(second.made).toEqual([]);
      expect(second.tokens).toEqual(first.tokens);

      await revokeToken(db, first.tokens.ingest.split('_')[1]);
      const third = await demoTokens(db, dataDir);
      expect(third.made).toEqual(['ingest']);
      expect(third.tokens.read).toBe(first.tokens.read);
      expect(third.tokens.ingest).not.toBe(first.tokens.ingest);
      expect(readFileSync(first.path, 'utf8')).toContain(`export INGEST_TOKEN=${third.tokens.ingest}\n`);
      expect(statSync(first.path).mode & 0o777).toBe(0o600);
    } finally {
      await db.close();
    }
  });
});
