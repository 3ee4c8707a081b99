import { spawn, type ChildProcess } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { resolve } from 'node:path';
import pg from 'pg';
import { inject } from 'vitest';
import { withDatabase } from '../helpers/test-db.ts';

const ROOT = resolve(import.meta.dirname, '../..');

/**
 * The real PostgreSQL server for the fault harness, or why there is none. The harness needs a
 * server it can reach from a child process; the embedded store has no such thing.
 */
export function faultServer(): { url: string; skipReason: null } | { url: null; skipReason: string } {
  const url = inject('postgresUrl');
  if (url) return { url, skipReason: null };
  return { url: null, skipReason: 'no real PostgreSQL (set TEST_DATABASE_URL or run a Docker engine): the fault harness kills and restarts the service against a server' };
}

/** A fresh database on the server, dropped at the end. */
export async function freshDatabase(serverUrl: string): Promise<{ url: string; name: string; drop(): Promise<void> }> {
  const name = `sft_faults_${randomBytes(5).toString('hex')}`;
  const admin = new pg.Client({ connectionString: serverUrl });
  await admin.connect();
  await admin.query(`create database ${name}`);
  await admin.end();
  return {
    url: withDatabase(serverUrl, name),
    name,
    async drop() {
      const c = new pg.Client({ connectionString: serverUrl });
      await c.connect();
      await c.query(`drop database if exists ${name} with (force)`);
      await c.end();
    },
  };
}

export interface ServiceProcess {
  readonly base: string;
  readonly child: ChildProcess;
  /** Every log line the process wrote (pino JSON, parsed when possible). */
  readonly logs: Record<string, unknown>[];
  /** SIGKILL: no shutdown code runs, as when a machine or container dies. */
  kill9(): Promise<void>;
  /** SIGTERM and wait for the exit. */
  stop(): Promise<void>;
}

/**
 * Starts the service as its own process (`tsx src/main.ts`, loaded with `node --import tsx` so the
 * pid is the service itself and SIGKILL reaches it, not a wrapper) and waits until it listens.
 */
export async function startServiceProcess(databaseUrl: string, env: Record<string, string> = {}): Promise<ServiceProcess> {
  const child = spawn(process.execPath, ['--import', 'tsx', 'src/main.ts'], {
    cwd: ROOT,
    env: {
      PATH: process.env.PATH,
      HOME: process.env.HOME,
      DATABASE_URL: databaseUrl,
      HOST: '127.0.0.1',
      PORT: '0',
      AUTH: 'off',
      LOG_LEVEL: 'info',
      WORKERS: '1',
      JOB_STALE_SECONDS: '5',
      ...env,
    },
    stdio: ['ignore', 'pipe', 'pipe'],
  });
  const logs: Record<string, unknown>[] = [];
  const exited = new Promise<void>((done) => child.once('exit', () => done()));
  const base = await new Promise<string>((resolveBase, reject) => {
    let buffered = '';
    const timer = setTimeout(() => reject(new Error(`the service did not start within 60 s:\n${JSON.stringify(logs.slice(-5))}`)), 60_000);
    const onLine = (line: string) => {
      let entry: Record<string, unknown>;
      try {
        entry = JSON.parse(line);
      } catch {
        entry = { raw: line };
      }
      logs.push(entry);
      const m = /Server listening at (http:\/\/127\.0\.0\.1:\d+)/.exec(String(entry.msg ?? ''));
      if (m) {
        clearTimeout(timer);
        resolveBase(m[1]);
      }
    };
    for (const stream of [child.stdout!, child.stderr!]) {
      stream.setEncoding('utf8');
      stream.on('data', (chunk: string) => {
        buffered += chunk;
        const parts = buffered.split('\n');
        buffered = parts.pop()!;
        for (const p of parts) if (p.trim()) onLine(p);
      });
    }
    child.once('exit', (code, signal) => {
      clearTimeout(timer);
      reject(new Error(`the service exited (${code ?? signal}) before listening:\n${logs.map((l) => JSON.stringify(l)).join('\n')}`));
    });
  });
  return {
    base,
    child,
    logs,
    async kill9() {
      if (child.exitCode === null && child.signalCode === null) child.kill('SIGKILL');
      await exited;
    },
    async stop() {
      if (child.exitCode === null && child.signalCode === null) child.kill('SIGTERM');
      await exited;
    },
  };
}

export interface Answer {
  status: number;
  headers: Headers;
  text: string;
}

/** One HTTP request; a connection the dying service dropped comes back as status 0. */
export async function send(base: string, method: string, path: string, body?: unknown, headers: Record<string, string> = {}): Promise<Answer> {
  try {
    const res = await fetch(`${base}${path}`, {
      method,
      headers: { ...(body !== undefined && typeof body !== 'string' ? { 'content-type': 'application/json' } : {}), ...headers },
      body: body === undefined ? undefined : typeof body === 'string' ? body : JSON.stringify(body),
    });
    return { status: res.status, headers: res.headers, text: await res.text() };
  } catch (err) {
    return { status: 0, headers: new Headers(), text: (err as Error).message };
  }
}
