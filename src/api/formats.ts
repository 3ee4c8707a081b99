import type { FastifyReply, FastifyRequest } from 'fastify';
import { CAUTION } from '../services/caution.ts';
import { z } from 'zod';

/** The representations reads offer: JSON, CSV, and a plain-text table for a terminal. */
export type Format = 'json' | 'csv' | 'text';

export const FormatOnly = z.enum(['json', 'csv', 'text']).optional();

/** ?format= first, then the Accept header; JSON by default. */
export function chooseFormat(req: FastifyRequest, format?: Format): Format {
  if (format) return format;
  const accept = req.headers.accept ?? '';
  if (accept.includes('application/json')) return 'json';
  if (accept.includes('text/csv')) return 'csv';
  if (accept.includes('text/plain')) return 'text';
  return 'json';
}

/**
 * Every answer that holds forecast values or their scores carries the caution as an HTTP header
 * too (`Caution: ...`), whatever the format: a CSV saved to disk keeps it in its `caution`
 * column or note row, a client reading the response sees it before the body.
 */
export function sendCaution(reply: FastifyReply): void {
  reply.header('caution', CAUTION);
}
