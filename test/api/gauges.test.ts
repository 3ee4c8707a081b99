import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { makeTestApp, riverGauge, type TestApp } from '../helpers/test-app.ts';

let t: TestApp;
beforeAll(async () => {
  t = await makeTestApp();
});
afterAll(async () => t.close());

describe('gauges', () => {
  it('creates, reads, lists, updates and deletes a gauge', async () => {
    const created = await t.as('admin', { method: 'POST', url: '/gauges', payload: riverGauge });
    expect(created.statusCode).toBe(201);
    expect(created.headers.location).toBe(`/gauges/${riverGauge.id}`);
    expect(created.json()).toMatchObject({ ...riverGauge, stepSeconds: 86400 });

    const got = await t.as('read', { method: 'GET', url: `/gauges/${riverGauge.id}` });
    expect(got.json()).toMatchObject({ id: riverGauge.id, archive: { observations: 0 } });

    const list = await t.as('read', { method: 'GET', url: '/gauges' });
    expect(list.json().gauges.map((g: { id: string }) => g.id)).toContain(riverGauge.id);

    const patched = await t.as('admin', {
      method: 'PATCH',
      url: `/gauges/${riverGauge.id}`,
      payload: { name: 'Sample Brook at Brennock Mill weir', thresholds: [{ label: '2-year flow', value: 42 }] },
    });
    expect(patched.statusCode).toBe(200);
    expect(patched.json()).toMatchObject({ name: 'Sample Brook at Brennock Mill weir', thresholds: [{ label: '2-year flow', value: 42 }], timeStep: 'P1D' });

    const del = await t.as('admin', { method: 'DELETE', url: `/gauges/${riverGauge.id}` });
    expect(del.statusCode).toBe(204);
    expect((await t.as('read', { method: 'GET', url: `/gauges/${riverGauge.id}` })).statusCode).toBe(404);
  });

  it('lists gauges a page at a time with an opaque cursor, in a stable order', async () => {
    const ids = ['page-a', 'page-b', 'page-c', 'page-d', 'page-e'];
    for (const id of [...ids].reverse()) expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id } })).statusCode).toBe(201);
    const seen: string[] = [];
    let cursor: string | null = null;
    let pages = 0;
    do {
      const res = await t.as('read', { method: 'GET', url: `/gauges?limit=2${cursor ? `&cursor=${encodeURIComponent(cursor)}` : ''}` });
      expect(res.statusCode, res.body).toBe(200);
      const body = res.json();
      expect(body.gauges.length).toBeLessThanOrEqual(2);
      seen.push(...body.gauges.map((g: { id: string }) => g.id));
      cursor = body.next;
      pages++;
      // A gauge added behind the cursor while paging neither repeats nor shifts the pages.
      if (pages === 1) expect((await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id: 'page-0' } })).statusCode).toBe(201);
    } while (cursor && pages < 20);
    const all = (await t.as('read', { method: 'GET', url: '/gauges?limit=1000' })).json();
    expect(all.next).toBeNull();
    const expected = all.gauges.map((g: { id: string }) => g.id).filter((id: string) => id !== 'page-0');
    expect(seen).toEqual(expected);
    expect(seen).toEqual([...seen].sort());
    for (const id of ids) expect(seen).toContain(id);

    const bad = await t.as('read', { method: 'GET', url: '/gauges?cursor=not-ours' });
    expect(bad.statusCode).toBe(422);
    expect(bad.json().errors[0].path).toBe('query.cursor');
    expect((await t.as('read', { method: 'GET', url: '/gauges?limit=0' })).json().errors[0].path).toBe('query.limit');
    for (const id of [...ids, 'page-0']) await t.as('admin', { method: 'DELETE', url: `/gauges/${id}` });
  });

  it('lists jobs newest first, a page at a time, and keeps a cursor to its gauge filter', async () => {
    const { rows } = await t.db.query<{ id: string }>(
      `insert into jobs (kind, gauge_id, params) select 'test-kind', null, '{}'::jsonb from generate_series(1, 7) returning id::text as id`,
    );
    const made = rows.map((r) => r.id);
    const seen: string[] = [];
    let cursor: string | null = null;
    do {
      const res = await t.as('read', { method: 'GET', url: `/jobs?limit=3${cursor ? `&cursor=${encodeURIComponent(cursor)}` : ''}` });
      expect(res.statusCode, res.body).toBe(200);
      const body = res.json();
      seen.push(...body.jobs.map((j: { id: string }) => j.id));
      cursor = body.next;
    } while (cursor);
    expect(seen.filter((id) => made.includes(id))).toEqual([...made].reverse());
    expect(seen.map(Number)).toEqual([...seen.map(Number)].sort((a, b) => b - a));
    const first = (await t.as('read', { method: 'GET', url: '/jobs?limit=1' })).json();
    const crossed = await t.as('read', { method: 'GET', url: `/jobs?gauge=page-a&cursor=${encodeURIComponent(first.next)}` });
    expect(crossed.statusCode).toBe(422);
    expect(crossed.json().errors[0].path).toBe('query.cursor');
  });

  it('accepts an hourly gauge', async () => {
    const res = await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id: 'hourly-one', timeStep: 'PT1H' } });
    expect(res.statusCode).toBe(201);
    expect(res.json().stepSeconds).toBe(3600);
  });

  it('refuses a second gauge with the same id', async () => {
    await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id: 'twice' } });
    const res = await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id: 'twice' } });
    expect(res.statusCode).toBe(409);
    expect(res.headers['content-type']).toContain('application/problem+json');
  });

  it.each([
    ['id', { id: 'Not A Slug' }, 'body.id'],
    ['time step of months', { timeStep: 'P1M' }, 'body.timeStep'],
    ['time zone', { timeZone: 'Mars/Olympus' }, 'body.timeZone'],
    ['flow unit', { flowUnit: 'cfs' }, 'body.flowUnit'],
    ['catchment area', { catchmentAreaKm2: -3 }, 'body.catchmentAreaKm2'],
    ['thresholds not increasing', { thresholds: [{ label: 'a', value: 50 }, { label: 'b', value: 50 }] }, 'body.thresholds[1].value'],
    ['duplicate threshold label', { thresholds: [{ label: 'a', value: 50 }, { label: 'a', value: 60 }] }, 'body.thresholds[1].label'],
    ['unknown field', { colour: 'blue' }, 'body'],
    ['latitude', { location: { latitude: 91, longitude: 0 } }, 'body.location.latitude'],
  ])('names the bad field: %s', async (_name, change, path) => {
    const res = await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id: 'bad-one', ...change } });
    expect(res.statusCode).toBe(422);
    expect(res.headers['content-type']).toContain('application/problem+json');
    const body = res.json();
    expect(body.status).toBe(422);
    expect(body.errors.map((e: { path: string }) => e.path)).toContain(path);
    expect((await t.as('read', { method: 'GET', url: '/gauges/bad-one' })).statusCode).toBe(404);
  });

  it('refuses to delete a gauge holding data unless forced, and refuses a step change', async () => {
    const id = 'with-data';
    await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id } });
    const obs = await t.as('ingest', {
      method: 'POST',
      url: `/gauges/${id}/observations`,
      payload: { unit: 'm3/s', times: ['2024-01-01T00:00:00Z'], values: [3.5] },
    });
    expect(obs.statusCode).toBe(200);
    const step = await t.as('admin', { method: 'PATCH', url: `/gauges/${id}`, payload: { timeStep: 'PT1H' } });
    expect(step.statusCode).toBe(409);
    expect(step.json().errors[0].path).toBe('body.timeStep');
    const refused = await t.as('admin', { method: 'DELETE', url: `/gauges/${id}` });
    expect(refused.statusCode).toBe(409);
    expect(refused.json().detail).toContain('force=true');
    const forced = await t.as('admin', { method: 'DELETE', url: `/gauges/${id}?force=true` });
    expect(forced.statusCode).toBe(204);
    const { rows } = await t.db.query<{ n: number }>('select count(*)::int as n from observed_flow where gauge_id = $1', [id]);
    expect(Number(rows[0].n)).toBe(0);
  });
});

describe('deleting a gauge with stored models or forecasts', () => {
  it('refuses without force even when only model versions exist', async () => {
    const id = 'with-model-only';
    await t.as('admin', { method: 'POST', url: '/gauges', payload: { ...riverGauge, id } });
    await t.db.query(
      `insert into model_versions (gauge_id, origin, label, feature_spec, trainer, periods, scores) values ($1, 'uploaded', 'x', '{}', '{}', '{}', '{}')`,
      [id],
    );
    const refused = await t.as('admin', { method: 'DELETE', url: `/gauges/${id}` });
    expect(refused.statusCode).toBe(409);
    expect(refused.json().errors[0].message).toContain('"modelVersions":1');
    expect((await t.as('admin', { method: 'DELETE', url: `/gauges/${id}?force=true` })).statusCode).toBe(204);
    const { rows } = await t.db.query<{ n: number }>('select count(*)::int as n from model_versions where gauge_id = $1', [id]);
    expect(Number(rows[0].n)).toBe(0);
  });
});
