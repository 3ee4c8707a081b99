import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { JobRunner, type JobHandler } from '../../src/jobs/runner.ts';
import { enqueueJob, getJob } from '../../src/store/jobs-repo.ts';
import { makeTestApp, type TestApp } from '../helpers/test-app.ts';

// A job whose instance stalled past the heartbeat limit is marked failed by another instance. When
// the stalled instance wakes, it must neither store the job's results nor write "succeeded" over
// the failure: the job's end is decided once.
let t: TestApp;
beforeAll(async () => {
  t = await makeTestApp();
  await t.db.query('create table if not exists handover_results (job_id text primary key)');
});
afterAll(async () => t?.close());

const quiet = { info() {}, warn() {}, error() {} } as never;

/** A job kind that waits for `release`, then stores a row as its result inside a held transaction. */
function waitingHandler(): { handler: JobHandler; started: Promise<void>; release: () => void; aborted: () => boolean } {
  let release!: () => void;
  let started!: () => void;
  const gate = new Promise<void>((r) => (release = r));
  const startedP = new Promise<void>((r) => (started = r));
  let signal: AbortSignal | null = null;
  const handler: JobHandler = async (job, ctx) => {
    signal = ctx.signal;
    started();
    await gate;
    await ctx.db.transaction(async (tx) => {
      await ctx.hold(tx);
      await tx.query('insert into handover_results (job_id) values ($1)', [job.id]);
    });
    return { stored: true };
  };
  return { handler, started: startedP, release, aborted: () => signal?.aborted ?? false };
}

describe('a job taken over by another instance', () => {
  it('stores nothing and keeps the failure when the stalled instance wakes', async () => {
    const w = waitingHandler();
    const runner = new JobRunner(t.db, { handover: w.handler }, quiet, 20);
    const job = await enqueueJob(t.db, 'handover', null, {}, null);
    await runner.start();
    try {
      await w.started;
      // Another instance's stale-job sweep: as failStaleJobs writes it.
      await t.db.query(`update jobs set status = 'failed', stage = 'failed', finished_at = now(), error = 'interrupted: no heartbeat' where id = $1`, [job.id]);
      w.release();
      await runner.drain();
      for (let i = 0; i < 50 && (await getJob(t.db, job.id))!.status === 'running'; i++) await new Promise((r) => setTimeout(r, 20));
      const after = await getJob(t.db, job.id);
      expect(after).toMatchObject({ status: 'failed', error: 'interrupted: no heartbeat' });
      const stored = await t.db.query('select job_id from handover_results where job_id = $1', [job.id]);
      expect(stored.rows).toHaveLength(0);
    } finally {
      await runner.stop();
    }
  });

  it('a job it still holds stores its result and succeeds', async () => {
    const w = waitingHandler();
    const runner = new JobRunner(t.db, { handover: w.handler }, quiet, 20);
    const job = await enqueueJob(t.db, 'handover', null, {}, null);
    await runner.start();
    try {
      await w.started;
      w.release();
      for (let i = 0; i < 100 && (await getJob(t.db, job.id))!.status !== 'succeeded'; i++) await new Promise((r) => setTimeout(r, 20));
      expect(await getJob(t.db, job.id)).toMatchObject({ status: 'succeeded', result: { stored: true } });
      expect((await t.db.query('select job_id from handover_results where job_id = $1', [job.id])).rows).toHaveLength(1);
    } finally {
      await runner.stop();
    }
  });
});
