/**
 * Whether an error means the database server cannot be reached right now (refused or dropped
 * connection, server shutting down or starting, too many connections), as opposed to a fault of
 * the request or of the code. Callers answer such errors with 503 and Retry-After; the pg pool
 * replaces broken connections by itself, so service resumes when the server is back.
 */
export function isStoreUnavailable(err: unknown): boolean {
  const e = err as { code?: unknown; message?: unknown; errors?: unknown[] } | null;
  if (!e || typeof e !== 'object') return false;
  const code = typeof e.code === 'string' ? e.code : '';
  // SQLSTATE class 08 is "connection exception"; 57P01–57P03 admin/crash shutdown and "cannot connect now"; 53300 too many connections.
  if (/^08/.test(code) || ['57P01', '57P02', '57P03', '53300'].includes(code)) return true;
  if (['ECONNREFUSED', 'ECONNRESET', 'EPIPE', 'ETIMEDOUT', 'EHOSTUNREACH', 'ENETUNREACH', 'EAI_AGAIN'].includes(code)) return true;
  const message = typeof e.message === 'string' ? e.message : '';
  // Messages of node-postgres itself (its errors carry no code).
  if (/^Connection terminated|timeout exceeded when trying to connect|is not queryable|Client was closed and is not queryable/.test(message)) return true;
  // Node 20 reports a refused connection to a host with several addresses as an AggregateError.
  return Array.isArray(e.errors) && e.errors.some(isStoreUnavailable);
}
