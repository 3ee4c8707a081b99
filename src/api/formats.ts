import type { FastifyRequest } from 'fastify';
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
