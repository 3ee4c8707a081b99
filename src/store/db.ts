/** The one database interface the rest of the service uses, whatever the driver. */
export interface Queryable {
  query<T = Record<string, unknown>>(sql: string, params?: unknown[]): Promise<{ rows: T[] }>;
  /**
   * Runs `sql` (a COPY … FROM STDIN) fed with text-format rows from `text`. Only a PostgreSQL
   * server's transaction has it; callers fall back to batched inserts without it.
   */
  copyFrom?(sql: string, text: Iterable<string>): Promise<void>;
}

export interface Db extends Queryable {
  readonly kind: 'postgres' | 'embedded';
  /**
   * A long read in pages, as a generator: on a server every page comes from one read-only
   * REPEATABLE READ transaction on one connection (one snapshot), held until the generator ends or
   * is returned early; the embedded store (one connection for everyone) runs each page as its own
   * query so other requests go between pages.
   */
  reading<T>(fn: (q: Queryable) => AsyncGenerator<T>): AsyncGenerator<T>;
  /** Runs fn in one transaction; use only the handle it is given inside it. */
  transaction<T>(fn: (tx: Queryable) => Promise<T>): Promise<T>;
  /** Subscribes to a NOTIFY channel; returns the unsubscribe function. */
  listen(channel: string, onPayload: (payload: string) => void): Promise<() => Promise<void>>;
  close(): Promise<void>;
}
