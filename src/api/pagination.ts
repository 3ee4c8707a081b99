import { z } from 'zod';
import { invalid } from '../services/problem.ts';

/**
 * Cursor pagination: `limit` items per page and an opaque `next` cursor (null on the last page).
 * A cursor is base64url JSON of where the page ended and of the filter it was made for, so it
 * stays right when items are added or removed between pages (keyset, not offset).
 */
export function pageQuery(defaultLimit: number, maxLimit: number) {
  return {
    limit: z.coerce.number().int().min(1).max(maxLimit).default(defaultLimit).describe(`items per page (1–${maxLimit})`),
    cursor: z.string().max(400).optional().describe('`next` of the previous page, as given'),
  };
}

export function encodeCursor(position: Record<string, unknown>): string {
  return Buffer.from(JSON.stringify(position)).toString('base64url');
}

/** The position a cursor holds; a cursor that is not one of ours is refused naming `query.cursor`. */
export function decodeCursor<S extends z.ZodType>(cursor: string, shape: S): z.output<S> {
  let value: unknown;
  try {
    value = JSON.parse(Buffer.from(cursor, 'base64url').toString('utf8'));
  } catch {
    value = undefined;
  }
  const parsed = shape.safeParse(value);
  if (!parsed.success) throw invalid([{ path: 'query.cursor', message: 'not a cursor of this list; pass `next` of the previous page unchanged' }]);
  return parsed.data;
}

/** The page shape on the wire: the items under their own name, and `next`. */
export const NextCursor = z.string().nullable().describe('cursor of the following page; null on the last page');
