import http from 'node:http';
import type { AddressInfo } from 'node:net';
import { Writable } from 'node:stream';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';

// Finding (issue 14): eight parallel 62 MB bodies took memory to 2.6 GB and stalled /healthz; every
// body was taken in. Here the budget is 0.5 MiB and each body announces 200,000 bytes, so two fit
// and the other six are refused before a byte of them is read.
const BODY = 200_000;
const lines: { level: number; msg: string; kind?: string; answeredSinceLastLine?: number }[] = [];
const logger = pino({ level: 'info' }, new Writable({ write(chunk, _e, done) { lines.push(JSON.parse(String(chunk))); done(); } }));
let t: TestApp;
let port: number;

beforeAll(async () => {
  t = await makeTestApp({ BODY_BUDGET_MB: '0.5' }, { logger });
  await t.app.listen({ port: 0, host: '127.0.0.1' });
  port = (t.app.server.address() as AddressInfo).port;
});
afterAll(async () => t?.close());

interface Answer {
  status: number;
  headers: http.IncomingHttpHeaders;
  body: string;
}

/** A POST whose headers and first bytes are sent at once; the rest only when finish() is called. */
function slowPost(path: string, headers: Record<string, string>, total: number, chunked = false) {
  const filler = `{"pad":"${'x'.repeat(total - 10)}"}`;
  expect(filler.length).toBe(total);
  const req = http.request({ port, host: '127.0.0.1', method: 'POST', path, headers: { 'content-type': 'application/json', ...(chunked ? {} : { 'content-length': String(total) }), ...headers } });
  let answered: Answer | null = null;
  const answer = new Promise<Answer>((resolve, reject) => {
    req.on('response', (res) => {
      let body = '';
      res.on('data', (c) => (body += c));
      res.on('end', () => resolve((answered = { status: res.statusCode!, headers: res.headers, body })));
    });
    req.on('error', (err) => (answered ? undefined : reject(err)));
  });
  req.write(filler.slice(0, 1000));
  return {
    answer,
    get answered() {
      return answered;
    },
    finish() {
      req.end(filler.slice(1000));
    },
  };
}

async function until(check: () => boolean, what: string): Promise<void> {
  for (let i = 0; i < 2000 && !check(); i++) await new Promise((r) => setTimeout(r, 5));
  if (!check()) throw new Error(`timed out waiting for ${what}`);
}

describe('request bodies in flight are bounded', () => {
  it('refuses bodies beyond the budget with 503 problem+json and Retry-After, answers /healthz while bodies stream, and frees the room after', async () => {
    const auth = { authorization: `Bearer ${t.tokens.ingest}` };
    const posts = Array.from({ length: 8 }, () => slowPost('/gauges/no-such-gauge/observations', auth, BODY));
    await until(() => posts.filter((p) => p.answered).length >= 6, 'six refusals');
    const refused = posts.filter((p) => p.answered);
    const held = posts.filter((p) => !p.answered);
    expect(refused).toHaveLength(6);
    expect(held).toHaveLength(2);
    for (const p of refused) {
      const a = p.answered!;
      expect(a.status).toBe(503);
      expect(a.headers['retry-after']).toBe('2');
      expect(a.headers['content-type']).toContain('application/problem+json');
      expect(JSON.parse(a.body).type).toBe('/problems/busy');
    }

    // Two bodies are still streaming (neither answered): health and readiness answer anyway.
    const health = await fetch(`http://127.0.0.1:${port}/healthz`);
    expect(health.status).toBe(200);
    const ready = await fetch(`http://127.0.0.1:${port}/readyz`);
    expect(ready.status).toBe(200);
    expect(held.every((p) => !p.answered)).toBe(true);

    // A chunked body (no Content-Length) is counted as it arrives and refused once it does not fit.
    const chunked = slowPost('/gauges/no-such-gauge/observations', auth, BODY * 2, true);
    chunked.finish();
    const chunkedAnswer = await chunked.answer.catch((err: Error) => ({ status: 0, headers: {}, body: err.message }));
    expect(chunkedAnswer.status).toBe(503);

    // The held bodies complete and get their real answer (the body is no observation batch).
    for (const p of held) p.finish();
    for (const p of held) expect((await p.answer).status).toBe(422);

    // Their room is given back: a new body of the same size is taken in.
    const again = slowPost('/gauges/no-such-gauge/observations', auth, BODY);
    again.finish();
    expect((await again.answer).status).toBe(422);
  });

  it('logs the busy 503s at warn, once per interval, and never at error', () => {
    const busy = lines.filter((l) => l.kind === 'busy');
    expect(lines.filter((l) => l.level >= 50)).toEqual([]);
    expect(busy).toHaveLength(1);
    expect(busy[0].level).toBe(40);
  });
});
