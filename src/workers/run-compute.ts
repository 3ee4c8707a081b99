import { Worker } from 'node:worker_threads';
import { CancelledError } from '../core/cancelled.ts';
import type { ComputeMessage, ComputeStart, ComputeTask } from './protocol.ts';

/** A compute task's failure; `field` names the request option it is about, when the worker said so. */
export class ComputeError extends Error {
  constructor(
    message: string,
    readonly field: string | null,
  ) {
    super(message);
    this.name = 'ComputeError';
  }
}

export interface ComputeHandle<T> {
  result: Promise<T>;
  /** Asks the worker to stop at its next check; the result then rejects with CancelledError. */
  cancel(): void;
}

/** Runs one compute task in its own worker thread, relaying progress. */
export function runCompute<T>(task: ComputeTask, onProgress: (p: { stage: string; percent: number }) => void = () => {}): ComputeHandle<T> {
  const cancelFlag = new Int32Array(new SharedArrayBuffer(4));
  const start: ComputeStart = { module: './compute-worker.ts', task, cancelFlag };
  const worker = new Worker(new URL('./worker-entry.mjs', import.meta.url), { workerData: start });
  const result = new Promise<T>((resolve, reject) => {
    let settled = false;
    worker.on('message', (m: ComputeMessage) => {
      if (m.type === 'progress') onProgress({ stage: m.stage, percent: m.percent });
      else if (m.type === 'done') {
        settled = true;
        resolve(m.result as T);
        void worker.terminate();
      } else if (m.type === 'error') {
        settled = true;
        reject(m.cancelled ? new CancelledError() : new ComputeError(m.message, m.field ?? null));
        void worker.terminate();
      }
    });
    worker.on('error', (err) => {
      if (!settled) reject(err);
      settled = true;
    });
    worker.on('exit', (code) => {
      if (!settled) reject(new Error(`compute worker exited with code ${code}`));
      settled = true;
    });
  });
  return {
    result,
    cancel() {
      Atomics.store(cancelFlag, 0, 1);
    },
  };
}
