import { createHash } from 'node:crypto';
import pg from 'pg';
import type { Send } from '../../src/scenario/load-archive.ts';
import { send } from './service-process.ts';

/** The scenario loader's Send, over HTTP to a running service (AUTH=off). */
export function httpSend(base: () => string): Send {
  return async (method, url, body) => {
    const res = await send(base(), method, url, body);
    return { status: res.status, body: res.text ? JSON.parse(res.text) : null };
  };
}

/** Polls a job until its status is one of `want`; answers the job. */
export async function waitForJob(base: string, id: string, want: string[], timeoutMs = 60_000): Promise<Record<string, unknown>> {
  const until = Date.now() + timeoutMs;
  let job: Record<string, unknown> = {};
  while (Date.now() < until) {
    const res = await send(base, 'GET', `/jobs/${id}`);
    if (res.status === 200) {
      job = JSON.parse(res.text);
      if (want.includes(String(job.status))) return job;
    }
    await new Promise((r) => setTimeout(r, 50));
  }
  throw new Error(`job ${id} did not reach ${want.join('/')} within ${timeoutMs} ms (last: ${JSON.stringify(job)})`);
}

/** Runs `work(i)` for i in [0, n) with at most `width` at once; stops starting new ones once `stop()` says so. */
export async function inParallel(n: number, width: number, work: (i: number) => Promise<void>, stop: () => boolean = () => false): Promise<void> {
  let next = 0;
  await Promise.all(
    Array.from({ length: width }, async () => {
      while (next < n && !stop()) await work(next++);
    }),
  );
}

/** The ETag a stored run must carry: the service derives it from the exact output it stored. */
export function etagOf(output: string): string {
  return `"${createHash('sha256').update(output).digest('base64url').slice(0, 27)}"`;
}

/** A direct connection to the harness's database (not through the relay), for checks. */
export async function checker(url: string): Promise<pg.Client> {
  const c = new pg.Client({ connectionString: url });
  await c.connect();
  return c;
}

/** Every table's row count and a digest of its content: any write changes it. */
export async function fingerprint(c: pg.Client): Promise<Record<string, string>> {
  const { rows } = await c.query<{ t: string }>(`select tablename as t from pg_tables where schemaname = 'public' order by tablename`);
  const out: Record<string, string> = {};
  for (const { t } of rows) {
    const r = await c.query<{ n: string; h: string | null }>(`select count(*)::text as n, md5(string_agg(x::text, '|' order by x::text)) as h from "${t}" x`);
    out[t] = `${r.rows[0].n} rows, ${r.rows[0].h ?? 'empty'}`;
  }
  return out;
}
