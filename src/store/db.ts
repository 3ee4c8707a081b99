/** The one database interface the rest of the service uses, whatever the driver. */
export interface Queryable {
  query<T = Record<string, unknown>>(sql: string, params?: unknown[]): Promise<{ rows: T[] }>;
}

export interface Db extends Queryable {
  readonly kind: 'postgres' | 'embedded';
  /** Runs fn in one transaction; use only the handle it is given inside it. */
  transaction<T>(fn: (tx: Queryable) => Promise<T>): Promise<T>;
  /** Subscribes to a NOTIFY channel; returns the unsubscribe function. */
  listen(channel: string, onPayload: (payload: string) => void): Promise<() => Promise<void>>;
  close(): Promise<void>;
}
