import { closeSync, mkdirSync, openSync, readFileSync, rmSync, writeSync } from 'node:fs';
import { randomBytes } from 'node:crypto';
import { join, resolve } from 'node:path';
import { PGlite } from '@electric-sql/pglite';
import type { Db, Queryable } from './db.ts';

export class DataDirLockedError extends Error {}

/**
 * Embedded PostgreSQL (PGlite) in this process. PGlite has one connection and must never be opened
 * by two processes at once, so the data directory is locked and every use is serialised here.
 * `dataDir` of null keeps everything in memory (tests).
 */
export async function openEmbedded(dataDir: string | null): Promise<Db> {
  let releaseLock = () => {};
  let pglite: PGlite;
  if (dataDir === null) {
    pglite = new PGlite();
  } else {
    const root = resolve(dataDir);
    mkdirSync(root, { recursive: true });
    releaseLock = lockDirectory(join(root, 'embedded.lock'));
    try {
      pglite = new PGlite(join(root, 'pg'));
      await pglite.waitReady;
    } catch (err) {
      releaseLock();
      throw err;
    }
  }
  await pglite.waitReady;

  // One operation at a time: a promise chain is the queue.
  let tail: Promise<unknown> = Promise.resolve();
  function serialised<T>(fn: () => Promise<T>): Promise<T> {
    const run = tail.then(fn, fn);
    tail = run.catch(() => undefined);
    return run;
  }

  let closed = false;
  const query: Queryable['query'] = (sql, params) =>
    serialised(async () => {
      const result = await pglite.query(sql, params as unknown[]);
      return { rows: result.rows as never[] };
    });
  return {
    kind: 'embedded',
    query,
    async *reading(fn) {
      yield* fn({ query });
    },
    transaction(fn) {
      return serialised(() =>
        pglite.transaction(async (inner) => {
          const tx: Queryable = {
            async query(sql, params) {
              const result = await inner.query(sql, params as unknown[]);
              return { rows: result.rows as never[] };
            },
          };
          return fn(tx);
        }),
      );
    },
    async listen(channel, onPayload) {
      const stop = await serialised(() => pglite.listen(channel, onPayload));
      return () => serialised(() => stop());
    },
    async close() {
      if (closed) return;
      closed = true;
      await tail;
      await pglite.close();
      releaseLock();
    },
  };
}

/**
 * What a lock file holds: the PID alone is not enough, because after a crash the new process often
 * has the old one's PID (PID 1 in a container). The process's start time (in clock ticks since
 * boot, /proc/<pid>/stat field 22) and the boot id tell a live holder from a reused PID; the random
 * instance token tells a lock this process holds from one an earlier process with our PID left.
 */
interface LockOwner {
  pid: number;
  startTicks: number | null;
  bootId: string | null;
  instance: string;
}

/** Instance tokens of the locks this process holds now. */
const heldHere = new Set<string>();

function readProc(path: string): string | null {
  try {
    return readFileSync(path, 'utf8');
  } catch {
    return null;
  }
}

/** Start time of a process in clock ticks since boot, or null where /proc is not there (or the process is gone). */
function processStartTicks(pid: number): number | null {
  const stat = readProc(`/proc/${pid}/stat`);
  if (stat === null) return null;
  // The command name (field 2) is in parentheses and may hold spaces: count fields after the last ')'.
  const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
  const ticks = Number(fields[19]); // field 22 overall
  return Number.isFinite(ticks) ? ticks : null;
}

function bootId(): string | null {
  return readProc('/proc/sys/kernel/random/boot_id')?.trim() ?? null;
}

function readOwner(text: string): LockOwner | null {
  const t = text.trim();
  // Locks written before this format held the PID alone.
  if (/^\d+$/.test(t)) return { pid: Number(t), startTicks: null, bootId: null, instance: '' };
  try {
    const o = JSON.parse(t) as Partial<LockOwner>;
    if (!Number.isInteger(o.pid) || (o.pid as number) <= 0) return null;
    return { pid: o.pid as number, startTicks: typeof o.startTicks === 'number' ? o.startTicks : null, bootId: typeof o.bootId === 'string' ? o.bootId : null, instance: String(o.instance ?? '') };
  } catch {
    return null;
  }
}

/** Whether the lock's owner is a process that still runs (false for a stale lock). */
function ownerAlive(owner: LockOwner): boolean {
  if (owner.pid === process.pid) return heldHere.has(owner.instance);
  if (!isAlive(owner.pid)) return false;
  const boot = bootId();
  if (owner.bootId && boot && owner.bootId !== boot) return false; // written before the machine restarted
  const now = processStartTicks(owner.pid);
  if (owner.startTicks !== null && now !== null && owner.startTicks !== now) return false; // the PID now names another process
  return true;
}

/** Takes an exclusive lock file naming this process; a stale lock (its process gone) is taken over. */
function lockDirectory(lockPath: string): () => void {
  for (let attempt = 0; attempt < 2; attempt++) {
    try {
      const fd = openSync(lockPath, 'wx');
      const owner: LockOwner = { pid: process.pid, startTicks: processStartTicks(process.pid), bootId: bootId(), instance: randomBytes(12).toString('hex') };
      writeSync(fd, JSON.stringify(owner));
      closeSync(fd);
      heldHere.add(owner.instance);
      let released = false;
      const release = () => {
        if (released) return;
        released = true;
        heldHere.delete(owner.instance);
        rmSync(lockPath, { force: true });
        process.off('exit', release);
      };
      process.on('exit', release);
      return release;
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw err;
      const owner = readOwner(readProc(lockPath) ?? '');
      if (owner && ownerAlive(owner)) {
        if (owner.pid === process.pid) throw new DataDirLockedError(`the embedded database is already open in this process (${lockPath})`);
        throw new DataDirLockedError(
          `the embedded database in ${lockPath.replace(/[/\\]embedded\.lock$/, '')} is in use by process ${owner.pid}; ` +
            'the embedded store allows one process at a time. Stop that process, or use a PostgreSQL server via DATABASE_URL.',
        );
      }
      rmSync(lockPath, { force: true }); // stale: its process is gone (or was an earlier one with the same PID)
    }
  }
  throw new DataDirLockedError(`could not lock ${lockPath}`);
}

function isAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}
