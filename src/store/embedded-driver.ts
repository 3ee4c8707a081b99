import { closeSync, mkdirSync, openSync, readFileSync, rmSync, writeSync } from 'node:fs';
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

/** Takes an exclusive lock file holding our pid; a stale lock (dead pid) is taken over. */
function lockDirectory(lockPath: string): () => void {
  for (let attempt = 0; attempt < 2; attempt++) {
    try {
      const fd = openSync(lockPath, 'wx');
      writeSync(fd, String(process.pid));
      closeSync(fd);
      let released = false;
      const release = () => {
        if (released) return;
        released = true;
        rmSync(lockPath, { force: true });
        process.off('exit', release);
      };
      process.on('exit', release);
      return release;
    } catch (err) {
      if ((err as NodeJS.ErrnoException).code !== 'EEXIST') throw err;
      const holder = Number(readFileSync(lockPath, 'utf8').trim());
      if (Number.isInteger(holder) && holder > 0 && holder !== process.pid && isAlive(holder)) {
        throw new DataDirLockedError(
          `the embedded database in ${lockPath.replace(/[/\\]embedded\.lock$/, '')} is in use by process ${holder}; ` +
            'the embedded store allows one process at a time. Stop that process, or use a PostgreSQL server via DATABASE_URL.',
        );
      }
      if (holder === process.pid) {
        throw new DataDirLockedError(`the embedded database is already open in this process (${lockPath})`);
      }
      rmSync(lockPath, { force: true }); // stale: its process is gone
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
