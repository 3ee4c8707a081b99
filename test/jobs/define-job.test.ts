// defineJob: a job's stored params reach its handler parsed by the kind's schema; params that do
// not fit fail the job with a message naming the fields, and the handler never runs.
import { describe, expect, it } from 'vitest';
import { z } from 'zod';
import { defineJob, jobTable, type JobContext } from '../../src/jobs/runner.ts';
import type { Job } from '../../src/store/jobs-repo.ts';

const job = (params: unknown): Job => ({
  id: '7',
  kind: 'sum',
  gaugeId: null,
  params,
  status: 'running',
  stage: '',
  percent: 0,
  cancelRequested: false,
  result: null,
  error: null,
  createdBy: null,
  claimedBy: null,
  heartbeatAt: null,
  createdAt: '2026-01-01T00:00:00.000Z',
  startedAt: null,
  finishedAt: null,
});
const ctx = { db: null, progress: async () => false, signal: new AbortController().signal } as unknown as JobContext;

describe('defineJob', () => {
  const seen: number[][] = [];
  const sum = defineJob('sum', z.object({ values: z.array(z.number()), scale: z.number().default(1) }), async (p) => {
    seen.push(p.values);
    return p.values.reduce((a, b) => a + b, 0) * p.scale;
  });

  it('hands the handler typed params with the schema defaults', async () => {
    expect(await sum.handler(job({ values: [1, 2, 3] }), ctx)).toBe(6);
    expect(jobTable([sum])).toEqual({ sum: sum.handler });
  });

  it('fails a job whose params do not fit, naming the field, without running the handler', async () => {
    seen.length = 0;
    await expect(sum.handler(job({ values: [1, 'x'] }), ctx)).rejects.toThrow(/job 7 \(sum\) has invalid params: values\.1: /);
    expect(seen).toEqual([]);
  });
});
