import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { enqueueJob, finishJob, getJob } from '../../src/store/jobs-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';

// A refused request writes nothing: asking an ended job to stop, or naming no job, changes no row.
let t: TestApp;
beforeAll(async () => {
  t = await makeTestApp();
});
afterAll(async () => t?.close());

describe('cancelling a job', () => {
  it('refuses a job that already ended with 409 and leaves it as it was', async () => {
    const job = await enqueueJob(t.db, 'raw-archive', null, {}, null);
    await t.db.query("update jobs set status = 'running', claimed_by = 'test' where id = $1", [job.id]);
    await finishJob(t.db, job.id, 'succeeded', { done: true }, null, 'test');
    const before = await getJob(t.db, job.id);
    const res = await t.as('admin', { method: 'POST', url: `/jobs/${job.id}/cancel` });
    expect(res.statusCode).toBe(409);
    expect(res.headers['content-type']).toContain('application/problem+json');
    expect(await getJob(t.db, job.id)).toEqual(before);
  });

  it('answers 404 for an id that names no job, numeric or not', async () => {
    for (const id of ['999999999', 'abc', '%20_B']) {
      const res = await t.as('admin', { method: 'POST', url: `/jobs/${id}/cancel` });
      expect(res.statusCode, id).toBe(404);
      expect(res.headers['content-type']).toContain('application/problem+json');
    }
  });
});
