import { Readable } from 'node:stream';
import { pipeline } from 'node:stream/promises';
import pg from 'pg';
import copyStreams from 'pg-copy-streams';
import type { Db, Queryable } from './db.ts';

// timestamptz and int8 come back as ISO strings / numbers we control, not driver-specific objects.
pg.types.setTypeParser(pg.types.builtins.INT8, (v) => Number(v));

export function openPostgres(connectionString: string, max = 10, onError: (err: Error) => void = (err) => console.error(`postgres: ${err.message}`)): Db {
  // A server that accepts no connection (stopped, unreachable) fails a request within 5 s instead
  // of holding it until the client gives up; the request then answers 503 (src/store/unavailable.ts).
  const pool = new pg.Pool({ connectionString, max, connectionTimeoutMillis: 5_000 });
  // An idle pooled connection can fail (server restart, dropped database); pg then emits 'error',
  // which would end the process if nobody listened. The pool replaces the connection by itself.
  pool.on('error', onError);
  let listener: pg.Client | null = null;
  let closing = false;
  const handlers = new Map<string, Set<(payload: string) => void>>();

  async function listenerClient(): Promise<pg.Client> {
    if (listener) return listener;
    const client = new pg.Client({ connectionString });
    await client.connect();
    client.on('notification', (msg) => {
      for (const fn of handlers.get(msg.channel) ?? []) fn(msg.payload ?? '');
    });
    // A lost LISTEN connection is reopened with every channel, so announcements keep arriving.
    client.on('error', (err) => {
      onError(err);
      if (listener === client) listener = null;
      client.end().catch(() => undefined);
      if (!closing) setTimeout(() => void relisten(), 1000).unref();
    });
    listener = client;
    return client;
  }

  async function relisten(): Promise<void> {
    if (closing || listener) return;
    try {
      const client = await listenerClient();
      for (const channel of handlers.keys()) await client.query(`listen ${quoteIdent(channel)}`);
    } catch (err) {
      onError(err as Error);
      // Every second: notifications sent while no LISTEN connection is open are lost.
      if (!closing) setTimeout(() => void relisten(), 1000).unref();
    }
  }

  /**
   * A client checked out of the pool for a transaction or a read snapshot. A checked-out client whose
   * connection drops between two queries (the server stops, the network fails) emits 'error';
   * unheard, that event would end the process. It is kept here, and release drops a client that
   * failed (or whose connection was lost) from the pool instead of reusing it.
   */
  async function checkOut(): Promise<{ client: pg.PoolClient; release: (err?: Error) => void }> {
    const client = await pool.connect();
    let lost: Error | undefined;
    const onLost = (err: Error) => {
      lost ??= err;
      onError(err);
    };
    client.on('error', onLost);
    const release = (err?: Error) => {
      const broken = err ?? lost;
      // A broken client keeps the listener: it may still report its end while being discarded.
      if (!broken) client.off('error', onLost);
      client.release(broken);
    };
    return { client, release };
  }

  return {
    kind: 'postgres',
    async query(sql, params) {
      const result = await pool.query(sql, params as unknown[]);
      return { rows: result.rows };
    },
    async *reading(fn) {
      const { client, release } = await checkOut();
      let done = false;
      try {
        await client.query('begin isolation level repeatable read read only');
        yield* fn({
          async query(sql, params) {
            const result = await client.query(sql, params as unknown[]);
            return { rows: result.rows };
          },
        });
        done = true;
      } finally {
        // Also when the client went away mid-response (the generator is returned early): the snapshot ends here.
        const ended = await client.query(done ? 'commit' : 'rollback').then(
          () => undefined,
          (e: Error) => e,
        );
        release(ended);
      }
    },
    async transaction(fn) {
      const { client, release } = await checkOut();
      try {
        await client.query('begin');
        const tx: Queryable = {
          async query(sql, params) {
            const result = await client.query(sql, params as unknown[]);
            return { rows: result.rows };
          },
          async copyFrom(sql, text) {
            // pipeline waits for the server to accept each chunk (backpressure) and for COPY to end.
            await pipeline(Readable.from(text, { objectMode: false }), client.query(copyStreams.from(sql)));
          },
        };
        const out = await fn(tx);
        await client.query('commit');
        release();
        return out;
      } catch (err) {
        // A connection that cannot even roll back is broken: the pool drops it instead of reusing it.
        const broken = await client.query('rollback').then(
          () => undefined,
          (e: Error) => e,
        );
        release(broken);
        throw err;
      }
    },
    async listen(channel, onPayload) {
      const client = await listenerClient();
      let set = handlers.get(channel);
      if (!set) {
        set = new Set();
        handlers.set(channel, set);
        await client.query(`listen ${quoteIdent(channel)}`);
      }
      set.add(onPayload);
      return async () => {
        set.delete(onPayload);
      };
    },
    async close() {
      closing = true;
      if (listener) await listener.end().catch(() => undefined);
      await pool.end();
    },
  };
}

function quoteIdent(name: string): string {
  return `"${name.replace(/"/g, '""')}"`;
}
