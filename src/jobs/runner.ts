import { randomBytes } from 'node:crypto';
import type { FastifyBaseLogger } from 'fastify';
import type { z } from 'zod';
import type { Db } from '../store/db.ts';
import type { Queryable } from '../store/db.ts';
import { claimJob, failStaleJobs, finishJob, holdJob, JobLostError, reportProgress, type Job } from '../store/jobs-repo.ts';
import { CancelledError } from '../core/cancelled.ts';
import { isStoreUnavailable } from '../store/unavailable.ts';

export interface JobContext {
  db: Db;
  /** Records stage and percent; answers whether the job was asked to stop. */
  progress: (stage: string, percent: number) => Promise<boolean>;
  signal: AbortSignal;
  /**
   * Call first inside the transaction that stores the job's results: it throws (and so rolls the
   * transaction back) when this instance no longer holds the job, and keeps others off it meanwhile.
   */
  hold: (tx: Queryable) => Promise<void>;
}

/** What a job kind does. */
export type JobHandler = (job: Job, ctx: JobContext) => Promise<unknown>;

/** A job kind with the schema its stored params are read through. */
export interface JobDefinition {
  kind: string;
  handler: JobHandler;
}

/**
 * Registers a job kind: its stored params are parsed with `params` before the handler runs, so
 * the handler gets them typed (a job whose params do not fit fails, naming the fields).
 */
export function defineJob<S extends z.ZodType>(kind: string, params: S, handler: (params: z.output<S>, job: Job, ctx: JobContext) => Promise<unknown>): JobDefinition {
  return {
    kind,
    handler: async (job, ctx) => {
      const parsed = params.safeParse(job.params);
      if (!parsed.success) throw new Error(`job ${job.id} (${kind}) has invalid params: ${parsed.error.issues.map((i) => `${i.path.join('.') || 'params'}: ${i.message}`).join('; ')}`);
      return handler(parsed.data, job, ctx);
    },
  };
}

/** The handlers of several job kinds, by kind. */
export function jobTable(definitions: JobDefinition[]): Record<string, JobHandler> {
  return Object.fromEntries(definitions.map((d) => [d.kind, d.handler]));
}

/** Work the runner repeats on a timer, next to the queued jobs (e.g. the drift status refresh). */
export interface ScheduledTask {
  name: string;
  firstMs: number;
  everyMs: number;
  run: (db: Db, log: FastifyBaseLogger) => Promise<void>;
}

const HEARTBEAT_MS = 3_000;
const STALE_SECONDS = 30;

/**
 * Takes queued jobs from Postgres one at a time (SKIP LOCKED, so several instances share the
 * queue), beats a heartbeat while a job runs, and stops cleanly. Jobs whose instance died are
 * marked failed at start and on every poll.
 */
export class JobRunner {
  readonly instance = `${process.pid}-${randomBytes(4).toString('hex')}`;
  private timer: NodeJS.Timeout | null = null;
  private busy: Promise<void> | null = null;
  private stopped = false;
  private current: AbortController | null = null;
  private readonly taskTimers = new Set<NodeJS.Timeout>();
  private readonly taskRuns = new Set<Promise<void>>();
  private lastOutageWarning = 0;

  constructor(
    private readonly db: Db,
    private readonly handlers: Record<string, JobHandler>,
    private readonly log: FastifyBaseLogger,
    private readonly pollMs = 500,
    private readonly tasks: ScheduledTask[] = [],
    private readonly staleSeconds = STALE_SECONDS,
  ) {}

  async start(): Promise<void> {
    const failed = await failStaleJobs(this.db, this.staleSeconds);
    if (failed.length) this.log.warn({ jobs: failed }, 'jobs interrupted by a stopped instance were marked failed');
    this.schedule();
    for (const task of this.tasks) this.repeat(task, task.firstMs);
  }

  /** Runs a scheduled task after a delay, then again every everyMs after each run ends. */
  private repeat(task: ScheduledTask, delay: number): void {
    if (this.stopped) return;
    const timer = setTimeout(() => {
      this.taskTimers.delete(timer);
      const run = task
        .run(this.db, this.log)
        .catch((err: Error) => this.log.warn({ task: task.name, err: err.message }, 'scheduled task failed'))
        .finally(() => {
          this.taskRuns.delete(run);
          this.repeat(task, task.everyMs);
        });
      this.taskRuns.add(run);
    }, delay);
    timer.unref();
    this.taskTimers.add(timer);
  }

  /** Runs queued jobs now (tests use this instead of waiting for the poll). */
  async drain(): Promise<void> {
    while (!this.stopped && (await this.runOne())) {
      /* keep going */
    }
  }

  async stop(): Promise<void> {
    this.stopped = true;
    if (this.timer) clearTimeout(this.timer);
    for (const t of this.taskTimers) clearTimeout(t);
    this.current?.abort();
    await this.busy;
    await Promise.all(this.taskRuns);
  }

  private schedule(): void {
    if (this.stopped) return;
    this.timer = setTimeout(() => {
      this.busy = this.tick().finally(() => {
        this.busy = null;
        this.schedule();
      });
    }, this.pollMs);
    this.timer.unref();
  }

  private async tick(): Promise<void> {
    try {
      await failStaleJobs(this.db, this.staleSeconds);
      await this.drain();
    } catch (err) {
      // While the database is unreachable the poll fails every few hundred ms: one warn line per
      // interval; polling goes on and picks up again when the server is back.
      if (!isStoreUnavailable(err)) this.log.error({ err }, 'job runner poll failed');
      else if (Date.now() - this.lastOutageWarning > 10_000) {
        this.lastOutageWarning = Date.now();
        this.log.warn({ err: (err as Error).message }, 'job runner cannot reach the database; polling on');
      }
    }
  }

  private async runOne(): Promise<boolean> {
    const job = await claimJob(this.db, this.instance);
    if (!job) return false;
    const handler = this.handlers[job.kind];
    const abort = new AbortController();
    this.current = abort;
    let cancelAsked = false;
    let lastBeat = 0;
    let latest = { stage: 'starting', percent: 0 };
    const progress = async (stage: string, percent: number) => {
      latest = { stage, percent };
      if (Date.now() - lastBeat < 500 && percent < 100) return cancelAsked;
      lastBeat = Date.now();
      const state = await reportProgress(this.db, job.id, stage, percent, this.instance);
      cancelAsked = state !== 'go' || cancelAsked;
      if (cancelAsked) abort.abort();
      return cancelAsked;
    };
    const beat = setInterval(() => {
      reportProgress(this.db, job.id, latest.stage, latest.percent, this.instance)
        .then((state) => {
          if (state !== 'go') abort.abort();
        })
        .catch(() => undefined);
    }, HEARTBEAT_MS);
    const hold = (tx: Queryable) => holdJob(tx, job.id, this.instance);
    // A job another instance has marked ended keeps that end: nothing is written over it.
    const finish = async (status: 'succeeded' | 'failed' | 'cancelled', result: unknown, error: string | null) => {
      const held = await finishJob(this.db, job.id, status, result, error, this.instance);
      if (!held) this.log.warn({ job: job.id, kind: job.kind, wouldBe: status }, 'job was marked ended by another instance meanwhile; its end is kept');
      return held;
    };
    try {
      if (!handler) throw new Error(`unknown job kind ${job.kind}`);
      const result = await handler(job, { db: this.db, progress, signal: abort.signal, hold });
      if (await finish('succeeded', result ?? null, null)) this.log.info({ job: job.id, kind: job.kind }, 'job succeeded');
    } catch (err) {
      const lost = err instanceof JobLostError;
      const cancelled = !lost && (err instanceof CancelledError || abort.signal.aborted);
      if ((await finish(cancelled ? 'cancelled' : 'failed', null, cancelled ? 'cancelled on request' : (err as Error).message)) || !lost) {
        this.log[cancelled ? 'info' : 'warn']({ job: job.id, kind: job.kind, err: (err as Error).message }, cancelled ? 'job cancelled' : 'job failed');
      }
    } finally {
      clearInterval(beat);
      this.current = null;
    }
    return true;
  }
}
