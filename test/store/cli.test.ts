import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';
import { hashToken } from '../../src/api/tokens.ts';
import { loadConfig } from '../../src/config.ts';
import { startService } from '../../src/server.ts';
import { openEmbedded } from '../../src/store/embedded-driver.ts';

const dataDir = mkdtempSync(join(tmpdir(), 'sft-cli-'));
afterAll(() => rmSync(dataDir, { recursive: true, force: true }));

const run = (script: string, ...args: string[]) =>
  spawnSync(process.execPath, ['--import', 'tsx', script, ...args], { encoding: 'utf8', env: { ...process.env, DATA_DIR: dataDir, DATABASE_URL: '' } });

/** As run(), without blocking this process: the service under test answers from this process. */
const runAsync = (script: string, env: Record<string, string>, ...args: string[]) =>
  new Promise<{ status: number | null; stdout: string; stderr: string }>((resolve) => {
    const child = spawn(process.execPath, ['--import', 'tsx', script, ...args], { env: { ...process.env, ...env } });
    let stdout = '';
    let stderr = '';
    child.stdout.on('data', (d) => (stdout += d));
    child.stderr.on('data', (d) => (stderr += d));
    child.on('exit', (status) => resolve({ status, stdout, stderr }));
  });

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
  }, 180_000);

  it('refuses a bad role with usage', () => {
    const bad = run('src/api/token-cli.ts', 'create', '--role', 'owner');
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/--role must be admin, ingest or read/);
  });

  it('works while the service holds the embedded store, through its control socket', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'sft-cli-live-'));
    const service = await startService(loadConfig({ DATA_DIR: dir, PORT: '0', LOG_LEVEL: 'silent' }));
    try {
      const env = { DATA_DIR: dir, DATABASE_URL: '' };
      const created = await runAsync('src/api/token-cli.ts', env, 'create', '--role', 'admin', '--name', 'duty desk');
      expect(created.status, created.stderr).toBe(0);
      const token = created.stdout.trim().split('\n').pop()!;
      // The token made through the service is one the service takes.
      const res = await fetch(`${service.url}/tokens`, { headers: { authorization: `Bearer ${token}` } });
      expect(res.status).toBe(200);
      const { tokens } = (await res.json()) as { tokens: { id: string; name: string; role: string }[] };
      expect(tokens).toEqual([expect.objectContaining({ id: token.split('_')[1], name: 'duty desk', role: 'admin' })]);
      const listed = await runAsync('src/api/token-cli.ts', env, 'list');
      expect(listed.stdout).toMatch(/admin\s+active\s+duty desk/);
      const revoked = await runAsync('src/api/token-cli.ts', env, 'revoke', tokens[0].id);
      expect(revoked.stdout).toContain(`revoked ${tokens[0].id}`);
      expect((await runAsync('src/api/token-cli.ts', env, 'list')).stdout).toMatch(/admin\s+revoked\s+duty desk/);
    } finally {
      await service.stop();
      rmSync(dir, { recursive: true, force: true });
    }
  }, 180_000);

  it('says what failed in one message, without a stack trace', () => {
    const unreachable = spawnSync(process.execPath, ['--import', 'tsx', 'src/api/token-cli.ts', 'list'], {
      encoding: 'utf8',
      env: { ...process.env, DATABASE_URL: 'postgres://nobody@127.0.0.1:1/none' },
    });
    expect(unreachable.status).toBe(1);
    expect(unreachable.stderr).toMatch(/^cannot reach the PostgreSQL server at 127\.0\.0\.1:1\/none: /);
    expect(unreachable.stderr).not.toMatch(/\n\s+at /);
    const badConfig = spawnSync(process.execPath, ['--import', 'tsx', 'src/api/token-cli.ts', 'list'], {
      encoding: 'utf8',
      env: { ...process.env, DATABASE_URL: 'mysql://x' },
    });
    expect(badConfig.status).toBe(1);
    expect(badConfig.stderr).toMatch(/invalid configuration:\n\s+DATABASE_URL/);
    expect(badConfig.stderr).not.toMatch(/\n\s+at /);
  });
});
