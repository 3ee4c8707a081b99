import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

let t: TestApp;
beforeAll(async () => {
  t = await makeTestApp();
});
afterAll(async () => t.close());

describe('access', () => {
  it('keeps health, readiness and the API description open', async () => {
    for (const url of ['/healthz', '/readyz', '/openapi.json', '/api']) {
      expect((await t.as(null, { method: 'GET', url })).statusCode, url).toBe(200);
    }
    expect((await t.as(null, { method: 'GET', url: '/readyz' })).json().status).toBe('ready');
  });

  it('asks for a token, refuses unknown ones, and enforces roles', async () => {
    const none = await t.as(null, { method: 'GET', url: '/gauges' });
    expect(none.statusCode).toBe(401);
    expect(none.headers['www-authenticate']).toBe('Bearer');
    const wrong = await t.app.inject({ method: 'GET', url: '/gauges', headers: { authorization: 'Bearer sft_nope' } });
    expect(wrong.statusCode).toBe(401);
    expect((await t.as('read', { method: 'GET', url: '/gauges' })).statusCode).toBe(200);
    const readWrites = await t.as('read', { method: 'POST', url: '/gauges', payload: riverGauge });
    expect(readWrites.statusCode).toBe(403);
    expect((await t.as('ingest', { method: 'POST', url: '/gauges', payload: riverGauge })).statusCode).toBe(403);
    expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: riverGauge })).statusCode).toBe(201);
  });

  it('stores only token hashes and lets an admin create and revoke tokens', async () => {
    const made = await t.as('admin', { method: 'POST', url: '/tokens', payload: { role: 'read', name: 'wall screen' } });
    expect(made.statusCode).toBe(201);
    const { id, token } = made.json();
    const { rows } = await t.db.query<{ token_hash: string }>('select token_hash from api_tokens where id = $1', [id]);
    expect(rows[0].token_hash).toMatch(/^[0-9a-f]{64}$/);
    expect(rows[0].token_hash).not.toContain(token);
    const list = await t.as('admin', { method: 'GET', url: '/tokens' });
    expect(JSON.stringify(list.json())).not.toContain(token);
    expect((await t.app.inject({ method: 'GET', url: '/gauges', headers: { authorization: `Bearer ${token}` } })).statusCode).toBe(200);
    expect((await t.as('admin', { method: 'DELETE', url: `/tokens/${id}` })).statusCode).toBe(204);
  });

  it('describes every route in the OpenAPI document', async () => {
    const doc = (await t.as(null, { method: 'GET', url: '/openapi.json' })).json();
    expect(doc.openapi).toBe('3.1.0');
    expect(Object.keys(doc.paths)).toEqual(expect.arrayContaining(['/gauges', '/gauges/{id}', '/gauges/{id}/observations', '/gauges/{id}/reforecasts']));
    expect(doc.paths['/gauges'].post.requestBody.content['application/json'].schema.properties.thresholds).toBeDefined();
  });

  it('answers unknown routes with problem details, with or without a token', async () => {
    expect((await t.as(null, { method: 'GET', url: '/nowhere' })).statusCode).toBe(404);
    const res = await t.as('read', { method: 'GET', url: '/nowhere' });
    expect(res.statusCode).toBe(404);
    expect(res.headers['content-type']).toContain('application/problem+json');
  });
});
