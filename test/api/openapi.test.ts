// The OpenAPI document: every route the app serves is documented with its success answer and its
// problem answers, and real answers are valid against the documented schemas (JSON Schema
// 2020-12, the dialect of OpenAPI 3.1, checked with ajv).
import { Ajv2020 } from 'ajv/dist/2020.js';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

let t: TestApp;
let doc: { paths: Record<string, Record<string, { responses: Record<string, { content?: Record<string, { schema?: unknown }> }> }>>; components: { schemas: Record<string, unknown> } };

beforeAll(async () => {
  t = await makeTestApp();
  doc = (await t.as(null, { method: 'GET', url: '/openapi.json' })).json();
});
afterAll(async () => t.close());

/** Every (method, path) fastify serves, read from its route tree (HEAD is fastify's own twin of GET). */
function servedRoutes(tree: string): { method: string; path: string }[] {
  const out: { method: string; path: string }[] = [];
  const stack: string[] = [];
  for (const line of tree.split('\n')) {
    const m = /^(.*?)[└├]── (.+?) \(([A-Z, ]+)\)\s*$/.exec(line);
    if (!m) continue;
    const depth = m[1].length / 4;
    stack[depth] = (depth ? stack[depth - 1] : '') + m[2];
    stack.length = depth + 1;
    for (const method of m[3].split(', ')) if (method !== 'HEAD') out.push({ method, path: stack[depth] });
  }
  return out;
}

const docPath = (path: string) => (path.length > 1 ? path.replace(/\/$/, '') : path).replace(/:(\w+)/g, '{$1}');

function operation(method: string, path: string) {
  return doc.paths[docPath(path)]?.[method.toLowerCase()];
}

const ajv = new Ajv2020({ strict: false, allErrors: true });

/** The documented JSON schema of a route's success answer, with the document's components. */
function validatorFor(method: string, path: string, status: string) {
  const schema = operation(method, path)?.responses[status]?.content?.['application/json']?.schema;
  expect(schema, `${method} ${path} ${status} has a JSON schema`).toBeTruthy();
  return ajv.compile(schema as object);
}

function expectValid(method: string, path: string, status: string, body: unknown) {
  const validate = validatorFor(method, path, status);
  const ok = validate(body);
  expect(ok, `${method} ${path} ${status}: ${JSON.stringify(validate.errors?.slice(0, 3))}`).toBe(true);
}

describe('the OpenAPI document', () => {
  it('documents every route the app serves, with a success answer and problem answers', () => {
    const served = servedRoutes(t.app.printRoutes({ commonPrefix: false }));
    expect(served.length).toBeGreaterThan(40);
    const missing: string[] = [];
    for (const { method, path } of served) {
      const op = operation(method, path);
      if (!op) {
        missing.push(`${method} ${path}`);
        continue;
      }
      const codes = Object.keys(op.responses);
      const success = codes.filter((c) => /^2\d\d$/.test(c));
      expect(success.length, `${method} ${path} has a 2xx answer`).toBeGreaterThan(0);
      for (const c of success) {
        if (c === '204') continue;
        const content = op.responses[c].content ?? {};
        expect(Object.keys(content).length, `${method} ${path} ${c} has content`).toBeGreaterThan(0);
        for (const [type, media] of Object.entries(content)) {
          const schema = media.schema as Record<string, unknown> | undefined;
          expect(schema, `${method} ${path} ${c} ${type} has a schema`).toBeTruthy();
          // JSON answers are described field by field, not left as "anything"
          if (type === 'application/json') expect(Object.keys(schema!).length, `${method} ${path} ${c} JSON schema is not empty`).toBeGreaterThan(0);
        }
      }
      for (const c of ['4XX', '5XX']) {
        expect(op.responses[c]?.content?.['application/problem+json']?.schema, `${method} ${path} ${c}`).toEqual({ $ref: '#/components/schemas/Problem' });
      }
    }
    expect(missing).toEqual([]);
  });

  it('describes real answers correctly', async () => {
    const created = await t.as('admin', { method: 'POST', url: '/gauges', payload: riverGauge });
    expect(created.statusCode).toBe(201);
    expectValid('POST', '/gauges', '201', created.json());
    expectValid('GET', '/gauges', '200', (await t.as('read', { method: 'GET', url: '/gauges?limit=1' })).json());
    expectValid('GET', '/gauges/:id', '200', (await t.as('read', { method: 'GET', url: `/gauges/${riverGauge.id}` })).json());
    expectValid('GET', '/overview', '200', (await t.as('read', { method: 'GET', url: '/overview' })).json());
    expectValid('GET', '/healthz', '200', (await t.as(null, { method: 'GET', url: '/healthz' })).json());
    expectValid('GET', '/readyz', '200', (await t.as(null, { method: 'GET', url: '/readyz' })).json());
    expectValid('POST', '/stream-tickets', '201', (await t.as('read', { method: 'POST', url: '/stream-tickets' })).json());
    expectValid('GET', '/tokens', '200', (await t.as('admin', { method: 'GET', url: '/tokens' })).json());
    const obs = await t.as('ingest', {
      method: 'POST',
      url: `/gauges/${riverGauge.id}/observations`,
      headers: { 'content-type': 'text/csv' },
      payload: 'time,flow (m3/s)\n2024-05-01T00:00:00Z,12.5\n2024-05-02T00:00:00Z,13\n',
    });
    expect(obs.statusCode, obs.body).toBe(200);
    expectValid('POST', '/gauges/:id/observations', '200', obs.json());
    expectValid('GET', '/gauges/:id/observations', '200', (await t.as('read', { method: 'GET', url: `/gauges/${riverGauge.id}/observations` })).json());
    await t.db.query(`insert into jobs (kind, gauge_id, params) values ('test-kind', $1, '{}'::jsonb)`, [riverGauge.id]);
    const jobs = (await t.as('read', { method: 'GET', url: '/jobs' })).json();
    expectValid('GET', '/jobs', '200', jobs);
    expectValid('GET', '/jobs/:id', '200', (await t.as('read', { method: 'GET', url: `/jobs/${jobs.jobs[0].id}` })).json());
    expectValid('GET', '/gauges/:id/models', '200', (await t.as('read', { method: 'GET', url: `/gauges/${riverGauge.id}/models` })).json());

    // A wrong answer is caught: the check is not vacuous.
    const validate = validatorFor('GET', '/gauges/:id', '200');
    expect(validate({ id: riverGauge.id })).toBe(false);
  });

  it('describes problem answers by the Problem schema', async () => {
    const problem = ajv.compile(doc.components.schemas.Problem as object);
    const res = await t.as('read', { method: 'GET', url: '/gauges/nowhere-at-all' });
    expect(res.statusCode).toBe(404);
    expect(problem(res.json())).toBe(true);
    const bad = await t.as('read', { method: 'GET', url: '/gauges?limit=0' });
    expect(bad.statusCode).toBe(422);
    expect(problem(bad.json())).toBe(true);
  });
});
