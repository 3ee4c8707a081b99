import { spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { hashToken } from '../../src/api/tokens.ts';
import { openEmbedded } from '../../src/store/embedded-driver.ts';

const dataDir = mkdtempSync(join(tmpdir(), 'sft-cli-'));
afterAll(() => rmSync(dataDir, { recursive: true, force: true }));

const run = (script: string, ...args: string[]) =>
  spawnSync(process.execPath, ['--import', 'tsx', script, ...args], { encoding: 'utf8', env: { ...process.env, DATA_DIR: dataDir, DATABASE_URL: '' } });

// The command-line tools on the embedded store (a temporary data directory); run once.
describe.skipIf(process.env.TEST_STORE === 'postgres')('command-line tools', () => {
  it('migrates, then creates a token printed once and stored hashed, lists and revokes it', async () => {
    const migrated = run('src/store/migrate-cli.ts');
    expect(migrated.status, migrated.stderr).toBe(0);
    expect(migrated.stdout).toMatch(/applied: 001_gauges_and_archive\.sql/);
    expect(run('src/store/migrate-cli.ts').stdout).toMatch(/up to date/);

    const created = run('src/api/token-cli.ts', 'create', '--role', 'read', '--name', 'wall screen');
    expect(created.status, created.stderr).toBe(0);
    const token = created.stdout.trim().split('\n').pop()!;
    expect(token).toMatch(/^sft_[0-9a-f]{12}_[\w-]{43}$/);

    const listed = run('src/api/token-cli.ts', 'list');
    expect(listed.stdout).toMatch(/read\s+active\s+wall screen/);
    expect(listed.stdout).not.toContain(token);

    const db = await openEmbedded(join(dataDir, 'embedded'));
    const { rows } = await db.query<{ id: string; token_hash: string }>('select id, token_hash from api_tokens');
    await db.close();
    expect(rows).toEqual([{ id: token.split('_')[1], token_hash: hashToken(token) }]);

    expect(run('src/api/token-cli.ts', 'revoke', rows[0].id).stdout).toContain(`revoked ${rows[0].id}`);
    expect(run('src/api/token-cli.ts', 'list').stdout).toMatch(/revoked/);
  });

  it('refuses a bad role with usage', () => {
    const bad = run('src/api/token-cli.ts', 'create', '--role', 'owner');
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/--role must be admin, ingest or read/);
  });
});
