import { Worker } from 'node:worker_threads';
import type { RunInput } from '../core/features/features.ts';
import type { CorrectionOptions } from '../models/correct-run.ts';
import type { StoredVerificationInput, StoredVerificationResult } from '../core/verification/stored-verification.ts';
import type { CorrectionReply, CorrectionRequest, CorrectionResult, WorkerStart } from './protocol.ts';

export type { CorrectionResult };

type WithoutId<T> = T extends unknown ? Omit<T, 'id'> : never;

export class PoolFullError extends Error {}

/** A failure inside the worker; `path` names the run field when the inputs did not fit the feature spec. */
export class CorrectionError extends Error {
  constructor(
    message: string,
    readonly path: string | null,
  ) {
    super(message);
  }
}

interface Slot {
  worker: Worker;
  models: Set<string>;
  archives: Set<string>;
  busy: number;
  pending: Map<number, { resolve: (v: unknown) => void; reject: (e: Error) => void }>;
}

export interface ModelSource {
  versionId: string;
  load(): Promise<{ parts: Uint8Array[]; spec: unknown }>;
}

export interface ArchiveSource {
  archiveId: string;
  load(): Promise<Uint8Array>;
}

/**
 * Worker threads that run inference and the stochastic stage off the event loop. Each worker
 * keeps its own sessions and archives; the pool sends a model or archive to a worker the first
 * time that worker needs it. At most `maxQueued` corrections wait; beyond that callers get
 * PoolFullError (the API answers 503 with Retry-After).
 */
export class CorrectionPool {
  private slots: Slot[] = [];
  private nextId = 1;
  private queued = 0;
  private waiters: (() => void)[] = [];
  readonly stats = { modelCacheHits: 0, modelCacheMisses: 0, archiveCacheHits: 0, archiveCacheMisses: 0 };

  constructor(
    readonly size: number,
    private readonly maxQueued: number,
  ) {
    for (let i = 0; i < size; i++) this.slots.push(this.spawn());
  }

  private spawn(): Slot {
    const start: WorkerStart = { module: './correction-worker.ts' };
    const worker = new Worker(new URL('./worker-entry.mjs', import.meta.url), { workerData: start });
    const slot: Slot = { worker, models: new Set(), archives: new Set(), busy: 0, pending: new Map() };
    worker.on('message', (m: CorrectionReply) => {
      const p = slot.pending.get(m.id);
      if (!p) return;
      slot.pending.delete(m.id);
      if (m.ok) p.resolve(m.result);
      else p.reject(new CorrectionError(m.message, m.path));
    });
    worker.on('error', (err) => {
      for (const p of slot.pending.values()) p.reject(err);
      slot.pending.clear();
    });
    worker.unref();
    return slot;
  }

  private call(slot: Slot, msg: WithoutId<CorrectionRequest>, transfer: ArrayBuffer[] = []): Promise<unknown> {
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      slot.pending.set(id, { resolve, reject });
      slot.worker.postMessage({ ...msg, id }, transfer);
    });
  }

  /**
   * Verifies stored runs from their records in a worker, so other requests are served meanwhile.
   * The records' buffer is handed over, not copied (unusable here afterwards). Waits for a free
   * worker like a correction, within the same queue limit.
   */
  async verify(input: StoredVerificationInput): Promise<StoredVerificationResult> {
    if (this.queued >= this.maxQueued) throw new PoolFullError(`${this.queued} tasks are waiting`);
    this.queued++;
    try {
      const slot = await this.acquire();
      try {
        const bytes = input.records.bytes;
        const whole = bytes.byteOffset === 0 && bytes.byteLength === bytes.buffer.byteLength;
        return (await this.call(slot, { type: 'verify', input }, whole ? [bytes.buffer as ArrayBuffer] : [])) as StoredVerificationResult;
      } finally {
        slot.busy--;
        this.waiters.shift()?.();
      }
    } finally {
      this.queued--;
    }
  }

  /** Loads a model into every worker (on activation), so the next run finds it warm. */
  async warm(model: ModelSource): Promise<void> {
    const { parts, spec } = await model.load();
    await Promise.all(
      this.slots.map(async (slot) => {
        if (slot.models.has(model.versionId)) return;
        await this.call(slot, { type: 'load-model', versionId: model.versionId, parts, spec });
        slot.models.add(model.versionId);
      }),
    );
  }

  async correct(model: ModelSource | null, archive: ArchiveSource, run: RunInput, options: CorrectionOptions): Promise<CorrectionResult> {
    if (this.queued >= this.maxQueued) throw new PoolFullError(`${this.queued} corrections are waiting`);
    this.queued++;
    try {
      const slot = await this.acquire();
      try {
        if (model) {
          if (slot.models.has(model.versionId)) this.stats.modelCacheHits++;
          else {
            this.stats.modelCacheMisses++;
            const { parts, spec } = await model.load();
            await this.call(slot, { type: 'load-model', versionId: model.versionId, parts, spec });
            slot.models.add(model.versionId);
          }
        }
        if (slot.archives.has(archive.archiveId)) this.stats.archiveCacheHits++;
        else {
          this.stats.archiveCacheMisses++;
          await this.call(slot, { type: 'load-archive', archiveId: archive.archiveId, bytes: await archive.load() });
          slot.archives.add(archive.archiveId);
        }
        return (await this.call(slot, { type: 'correct', versionId: model?.versionId ?? null, archiveId: archive.archiveId, run, options })) as CorrectionResult;
      } finally {
        slot.busy--;
        this.waiters.shift()?.();
      }
    } finally {
      this.queued--;
    }
  }

  /** The idle worker with the fewest jobs, waiting for one when all are busy. */
  private async acquire(): Promise<Slot> {
    for (;;) {
      const free = this.slots.find((s) => s.busy === 0);
      if (free) {
        free.busy++;
        return free;
      }
      await new Promise<void>((resolve) => this.waiters.push(resolve));
    }
  }

  get waiting(): number {
    return this.queued;
  }

  async close(): Promise<void> {
    await Promise.all(this.slots.map((s) => s.worker.terminate()));
  }
}
