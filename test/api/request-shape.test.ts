import { connect } from 'node:net';
import { Writable } from 'node:stream';
import pino from 'pino';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { buildApp } from '../../src/api/app.ts';
import { createToken } from '../../src/api/tokens.ts';
import { loadConfig } from '../../src/config.ts';
import type { FastifyInstance } from 'fastify';
import { openTestDb, type TestDb } from '../helpers/test-db.ts';
import { riverGauge } from '../helpers/test-app.ts';

// Requests of the wrong shape, sent over a real socket: some are answered by Node's HTTP parser or
// by the router before any route runs, and inject() never reaches those paths.
let store: TestDb;
let app: FastifyInstance;
let port: number;
let admin: string;
let read: { id: string; token: string };
const logLines: string[] = [];

beforeAll(async () => {
  store = await openTestDb();
  const sink = new Writable({
    write(chunk, _enc, done) {
      logLines.push(String(chunk));
      done();
    },
  });
  const logger = pino({ level: 'debug' }, sink);
  app = await buildApp({ db: store.db, config: loadConfig({ DATA_DIR: '/tmp/sft-test-unused' }), logger });
  await app.listen({ port: 0, host: '127.0.0.1' });
  port = (app.server.address() as { port: number }).port;
  admin = (await createToken(store.db, 'admin', 'shape admin')).token;
  read = await createToken(store.db, 'read', 'shape reader');
  const made = await send('POST', '/gauges', { authorization: `Bearer ${admin}`, 'content-type': 'application/json' }, JSON.stringify(riverGauge));
  expect(made.status).toBe(201);
});
afterAll(async () => {
  await app?.close();
  await store?.close();
});

interface RawAnswer {
  status: number;
  headers: Record<string, string>;
  body: string;
}

/** One HTTP/1.1 request written by hand on a fresh socket; the answer read until the server closes or the body is complete. */
function send(method: string, path: string, headers: Record<string, string> = {}, body = ''): Promise<RawAnswer> {
  return new Promise((resolve, reject) => {
    const socket = connect(port, '127.0.0.1');
    let data = '';
    const head = [`${method} ${path} HTTP/1.1`, 'host: 127.0.0.1', 'connection: close', ...Object.entries(headers).map(([k, v]) => `${k}: ${v}`)];
    if (body) head.push(`content-length: ${Buffer.byteLength(body)}`);
    socket.setTimeout(20_000, () => socket.destroy(new Error('timeout')));
    socket.on('data', (c) => (data += c.toString('utf8')));
    socket.on('error', (err) => (data ? finish() : reject(err)));
    socket.on('end', finish);
    socket.on('close', finish);
    let done = false;
    function finish() {
      if (done) return;
      done = true;
      const [top, ...rest] = data.split('\r\n\r\n');
      const lines = top.split('\r\n');
      const status = Number(lines[0].split(' ')[1]);
      const hs: Record<string, string> = {};
      for (const l of lines.slice(1)) {
        const i = l.indexOf(':');
        hs[l.slice(0, i).toLowerCase()] = l.slice(i + 1).trim();
      }
      let text = rest.join('\r\n\r\n');
      if (hs['transfer-encoding'] === 'chunked') text = unchunk(text);
      resolve({ status, headers: hs, body: text });
    }
    socket.write(head.join('\r\n') + '\r\n\r\n');
    if (body) socket.write(body);
  });
}

function unchunk(text: string): string {
  let out = '';
  let rest = text;
  for (;;) {
    const i = rest.indexOf('\r\n');
    if (i < 0) break;
    const size = parseInt(rest.slice(0, i), 16);
    if (!size) break;
    out += rest.slice(i + 2, i + 2 + size);
    rest = rest.slice(i + 2 + size + 2);
  }
  return out;
}

function expectProblem(res: RawAnswer, status: number) {
  expect(res.status, res.body).toBe(status);
  expect(res.headers['content-type']).toContain('application/problem+json');
  const body = JSON.parse(res.body);
  expect(body.status).toBe(status);
  expect(body.title).toBeTruthy();
  return body;
}

describe('requests of the wrong shape get problem details', () => {
  it('answers JSON nested 10,000 deep with a 4xx problem, not 500', async () => {
    const deep = '['.repeat(10_000) + ']'.repeat(10_000);
    for (const body of [deep, `{"unit":"m3/s","times":${deep},"values":[1]}`]) {
      const res = await send('POST', `/gauges/${riverGauge.id}/observations`, { authorization: `Bearer ${admin}`, 'content-type': 'application/json' }, body);
      expect(res.status, res.body.slice(0, 200)).toBeGreaterThanOrEqual(400);
      expect(res.status).toBeLessThan(500);
      expect(res.headers['content-type']).toContain('application/problem+json');
      expect(JSON.parse(res.body).detail).toMatch(/nest/);
    }
  });

  it('answers a path parameter that is far too long with 414 problem details', async () => {
    const res = await send('GET', `/gauges/${'a'.repeat(5000)}/observations`, { authorization: `Bearer ${read.token}` });
    expectProblem(res, 414);
  });

  it('answers a URL that is far too long with 414 problem details', async () => {
    const res = await send('GET', `/gauges?pad=${'a'.repeat(10_000)}`, { authorization: `Bearer ${read.token}` });
    expectProblem(res, 414);
  });

  it('answers headers that are too large with 431 problem details', async () => {
    const res = await send('GET', '/healthz', { 'x-padding': 'a'.repeat(20_000) });
    expectProblem(res, 431);
  });

  it('answers a malformed request line with 400 problem details', async () => {
    const res = await send('GET', '/heal thz');
    expectProblem(res, 400);
  });
});

describe('a token in the URL', () => {
  it.each(['token', 'access_token'])('is refused with a problem that points to the Authorization header, never echoed nor logged (%s)', async (name) => {
    logLines.length = 0;
    const secret = read.token;
    const res = await send('GET', `/gauges?${name}=${secret}&x=1`);
    const problem = expectProblem(res, 400);
    expect(problem.detail).toMatch(/Authorization/);
    expect(res.body).not.toContain(secret);
    // Also on a path no route serves, and together with a valid header.
    const other = await send('GET', `/nowhere?${name}=${secret}`);
    expect(other.body).not.toContain(secret);
    const both = await send('GET', `/gauges?${name}=${secret}`, { authorization: `Bearer ${secret}` });
    expect(both.status).toBe(400);
    expect(both.body).not.toContain(secret);
    await new Promise((r) => setTimeout(r, 50));
    expect(logLines.length).toBeGreaterThan(0);
    expect(logLines.join('\n')).not.toContain(secret);
    expect(logLines.join('\n')).toContain(`${name}=[redacted]`);
  });
});
