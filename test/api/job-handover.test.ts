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

/**
 * A runner with one job of a kind that waits for `release`, then stores a row as its result inside a
 * held transaction. `finished` settles once the handler has returned or thrown.
 */
async function startWaitingJob() {
  let release!: () => void;
  let started!: () => void;
  let finished!: () => void;
  const gate = new Promise<void>((r) => (release = r));
  const startedP = new Promise<void>((r) => (started = r));
  const finishedP = new Promise<void>((r) => (finished = r));
  const handler: JobHandler = async (job, ctx) => {
    started();
    try {
      await gate;
      await ctx.db.transaction(async (tx) => {
        await ctx.hold(tx);
        await tx.query('insert into handover_results (job_id) values ($1)', [job.id]);
      });
      return { stored: true };
    } finally {
      finished();
    }
  };
  const runner = new JobRunner(t.db, { handover: handler }, quiet, 20);
  const job = await enqueueJob(t.db, 'handover', null, {}, null);
  await runner.start();
  await startedP;
  return { runner, job, release, finished: finishedP };
}

/** The job once its end is written (the runner writes it just after the handler returns). */
async function endOf(id: string) {
  for (let i = 0; i < 100; i++) {
    const j = (await getJob(t.db, id))!;
    if (j.status !== 'running') return j;
    await new Promise((r) => setTimeout(r, 20));
  }
  return (await getJob(t.db, id))!;
}

describe('a job taken over by another instance', () => {
  it('stores nothing and keeps the failure when the stalled instance wakes', async () => {
    const { runner, job, release, finished } = await startWaitingJob();
    try {
      // Another instance's stale-job sweep: as failStaleJobs writes it.
      await t.db.query(`update jobs set status = 'failed', stage = 'failed', finished_at = now(), error = 'interrupted: no heartbeat' where id = $1`, [job.id]);
      release();
      await finished;
      await runner.drain();
      expect(await getJob(t.db, job.id)).toMatchObject({ status: 'failed', error: 'interrupted: no heartbeat' });
      expect((await t.db.query('select job_id from handover_results where job_id = $1', [job.id])).rows).toHaveLength(0);
    } finally {
      await runner.stop();
    }
  });

  it('a job it still holds stores its result and succeeds', async () => {
    const { runner, job, release } = await startWaitingJob();
    try {
      release();
      expect(await endOf(job.id)).toMatchObject({ status: 'succeeded', result: { stored: true } });
      expect((await t.db.query('select job_id from handover_results where job_id = $1', [job.id])).rows).toHaveLength(1);
    } finally {
      await runner.stop();
    }
  });
});
