// The README's first command, end to end: `npm run demo` on the embedded store in a fresh data
// directory, then a second start that reuses what the first stored.
import { spawn, spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, describe, expect, it } from 'vitest';

const dataDir = mkdtempSync(join(tmpdir(), 'sft-demo-'));
afterAll(() => rmSync(dataDir, { recursive: true, force: true }));

/** Runs the demo until it says it is ready, checks what it serves, then stops it with Ctrl-C. */
async function runDemo(): Promise<{ output: string; exitCode: number | null; page: number; table: string; tokens: Record<string, string>; fileMode: number; tokenList: string; writes: Record<string, number> }> {
  const child = spawn(process.execPath, ['--import', 'tsx', 'src/scenario/demo.ts'], {
    env: { ...process.env, DATA_DIR: dataDir, PORT: '0', DATABASE_URL: '', LOG_LEVEL: 'warn' },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  let output = '';
  child.stdout.on('data', (d) => (output += d));
  child.stderr.on('data', (d) => (output += d));
  const exited = new Promise<number | null>((resolve) => child.on('exit', resolve));
  const deadline = Date.now() + 360_000; // a shared 2-core machine under load took 250 s
  while (!/demo ready/.test(output) && Date.now() < deadline && child.exitCode === null) await new Promise((r) => setTimeout(r, 250));
  expect(output, output).toMatch(/demo ready/);
  const pageUrl = /Page:\s+(\S+)#token=(\S+)/.exec(output)!;
  const base = new URL(pageUrl[1]).origin;
  const page = (await fetch(pageUrl[1])).status;
  const table = await (await fetch(`${base}/gauges/corvane-stillmere-bridge/forecasts/latest?format=text`, { headers: { authorization: `Bearer ${pageUrl[2]}` } })).text();
  // The token file it names, and the token command while the demo holds the embedded store.
  const tokenFile = /one token per role \(read, ingest, admin\) is in (\S+);/.exec(output)![1];
  const tokens = Object.fromEntries([...readFileSync(tokenFile, 'utf8').matchAll(/^export (\w+)=(\S+)$/gm)].map((m) => [m[1], m[2]]));
  const listed = spawnSync(process.execPath, ['--import', 'tsx', 'src/api/token-cli.ts', 'list'], { encoding: 'utf8', env: { ...process.env, DATA_DIR: dataDir, DATABASE_URL: '' } });
  // The ingest example: the demo's observation of today, posted again.
  const example = /--data-binary \$'time,flow \(m3\/s\)\\n([^,]+),([^\\]*)\\n' (\S+)/.exec(output)!;
  const writes: Record<string, number> = {};
  for (const role of ['READ', 'INGEST']) {
    writes[role] = (await fetch(example[3], { method: 'POST', headers: { authorization: `Bearer ${tokens[`${role}_TOKEN`]}`, 'content-type': 'text/csv' }, body: `time,flow (m3/s)\n${example[1]},${example[2]}\n` })).status;
  }
  child.kill('SIGINT');
  return { output, exitCode: await exited, page, table, tokens, fileMode: statSync(tokenFile).mode & 0o777, tokenList: listed.stdout + listed.stderr, writes };
}

describe.skipIf(process.env.TEST_STORE === 'postgres')('npm run demo', () => {
  it('loads the archive, fits a model, posts runs, prints the table and serves the page', async () => {
    const first = await runDemo();
    expect(first.output).toMatch(/loaded member simulations/);
    expect(first.output).toMatch(/model version 1 active/);
    // The default fit asks for auto updating; the answer names the observation it used, or why none.
    expect(first.output).toMatch(/issue-time updating (on \(\S+\) at lead times [\d, ]+|off: .+)/);
    expect(first.table).toMatch(/updated on the observation of \S+ \([\d.]+ m3\/s, from the archive\)|updating off: /);
    expect(first.output).toMatch(/posted the raw runs of the last 10 days \(10 new\)/);
    expect(first.output).toMatch(/CAUTION: .*responsible local authority/);
    expect(first.output).toMatch(/any time\s+in the horizon/);
    expect(first.page).toBe(200);
    expect(first.table).toContain('corrected with model version 1');
    expect(first.exitCode).toBe(0);
    // One token per role in a file only its owner may read; the token command works while the demo runs.
    expect(Object.keys(first.tokens).sort()).toEqual(['ADMIN_TOKEN', 'INGEST_TOKEN', 'READ_TOKEN']);
    expect(first.fileMode).toBe(0o600);
    expect(first.tokenList).toMatch(/read\s+active\s+demo read/);
    expect(first.tokenList).toMatch(/ingest\s+active\s+demo ingest/);
    expect(first.tokenList).toMatch(/admin\s+active\s+demo admin/);
    expect(first.writes.READ).toBe(403);
    expect([200, 201]).toContain(first.writes.INGEST);

    const second = await runDemo();
    expect(second.output).toMatch(/reusing them/);
    expect(second.output).toMatch(/\(0 new\)/);
    expect(second.exitCode).toBe(0);
    // A second start reuses the tokens in the file.
    expect(second.output).toMatch(/tokens for the roles read, ingest and admin in \S+ \(only you may read it; reused\)/);
    expect(second.tokens).toEqual(first.tokens);
  }, 800_000);
});
