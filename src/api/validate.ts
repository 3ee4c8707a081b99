import type { z } from 'zod';
import { invalid, type FieldError } from '../services/problem.ts';

/** Formats a zod path as `body.members[2].values[7]`. */
export function formatPath(prefix: string, path: readonly PropertyKey[]): string {
  let out = prefix;
  for (const key of path) out += typeof key === 'number' ? `[${key}]` : out ? `.${String(key)}` : String(key);
  return out;
}

/** Parses with zod; on failure throws a 422 problem listing every offending field path. */
export function parseWith<S extends z.ZodType>(schema: S, data: unknown, prefix: 'body' | 'query' | 'params'): z.output<S> {
  const result = schema.safeParse(data);
  if (result.success) return result.data;
  const errors: FieldError[] = result.error.issues.slice(0, 50).map((issue) => ({
    path: formatPath(prefix, issue.path),
    message: issue.message,
  }));
  throw invalid(errors);
}
