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
