import { request, type IncomingMessage } from 'node:http';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { FastifyInstance } from 'fastify';
import { buildApp } from '../../src/api/app.ts';
import { createToken } from '../../src/api/tokens.ts';
import { loadConfig } from '../../src/config.ts';
import { revokeToken } from '../../src/store/tokens-repo.ts';
import { openTestDb, type TestDb } from '../helpers/test-db.ts';

// A revoked token's open event stream must stop receiving events (found by an outside probe: it
// kept receiving them). Streams are read over a real socket.
let store: TestDb;
let app: FastifyInstance;
let port: number;
let admin: string;

beforeAll(async () => {
  store = await openTestDb();
  app = await buildApp({ db: store.db, config: loadConfig({ DATA_DIR: '/tmp/sft-test-unused' }) });
  await app.listen({ port: 0, host: '127.0.0.1' });
  port = (app.server.address() as { port: number }).port;
  admin = (await createToken(store.db, 'admin', 'events admin')).token;
});
afterAll(async () => {
  await app?.close();
  await store?.close();
});

interface Stream {
  text: () => string;
  ended: Promise<void>;
  res: IncomingMessage;
}

function openStream(token: string): Promise<Stream> {
  return new Promise((resolve, reject) => {
    const req = request({ host: '127.0.0.1', port, path: '/events', headers: { authorization: `Bearer ${token}` } }, (res) => {
      let text = '';
      res.setEncoding('utf8');
      res.on('data', (c) => (text += c));
      const ended = new Promise<void>((r) => {
        res.on('end', () => r());
        res.on('close', () => r());
      });
      resolve({ text: () => text, ended, res });
    });
    req.on('error', reject);
    req.end();
  });
}

const announce = (n: number) => store.db.query(`select pg_notify('forecast_runs', $1)`, [JSON.stringify({ gaugeId: 'g', runId: `run-${n}`, issueTime: '2024-01-01T00:00:00Z' })]);
const until = async (what: () => boolean, ms = 3000) => {
  for (let waited = 0; waited < ms && !what(); waited += 20) await new Promise((r) => setTimeout(r, 20));
  return what();
};
const closedWithin = (s: Stream, ms = 3000) => Promise.race([s.ended.then(() => true), new Promise<boolean>((r) => setTimeout(() => r(false), ms))]);

describe('event streams of revoked tokens', () => {
  it.each([
    ['over HTTP (DELETE /tokens/:id)', async (id: string) => {
      const res = await app.inject({ method: 'DELETE', url: `/tokens/${id}`, headers: { authorization: `Bearer ${admin}` } });
      expect(res.statusCode).toBe(204);
    }],
    ['in the store directly (the token command, another instance)', async (id: string) => {
      expect(await revokeToken(store.db, id)).toBe(true);
    }],
    ['without an announcement (a missed notification): found on the next send', async (id: string) => {
      await store.db.query('update api_tokens set revoked_at = now() where id = $1', [id]);
      await new Promise((r) => setTimeout(r, 5_300)); // past the streams' 5 s re-check
    }],
  ])('closes the stream when the token is revoked %s', async (how, revoke) => {
    const reader = await createToken(store.db, 'read', 'wall screen');
    const keeper = await createToken(store.db, 'read', 'duty desk');
    const stream = await openStream(reader.token);
    const kept = await openStream(keeper.token);
    expect(stream.res.statusCode).toBe(200);
    await announce(1);
    expect(await until(() => stream.text().includes('run-1'))).toBe(true);
    await revoke(reader.id);
    await announce(2);
    expect(await closedWithin(stream)).toBe(true);
    expect(stream.text()).not.toContain('run-2');
    // Other tokens' streams carry on.
    expect(await until(() => kept.text().includes('run-2'))).toBe(true);
    kept.res.destroy();
    if (how.startsWith('without')) return; // the auth cache keeps it for up to 30 s then
    // And the revoked token is refused at once on this instance, not after the auth cache expires.
    const again = await openStream(reader.token);
    expect(again.res.statusCode).toBe(401);
    again.res.destroy();
  });
});
