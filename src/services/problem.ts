/** RFC 9457 problem details with a list naming each offending field path or CSV line. */
export interface FieldError {
  /** JSON path such as `body.values[3]`, or `line 14` / `line 14, column flow (m3/s)` for CSV. */
  path: string;
  message: string;
}

export class Problem extends Error {
  constructor(
    readonly status: number,
    readonly slug: string,
    readonly title: string,
    readonly detail?: string,
    readonly errors: FieldError[] = [],
    readonly headers: Record<string, string> = {},
  ) {
    super(detail ?? title);
  }

  body(instance?: string): Record<string, unknown> {
    return {
      type: `/problems/${this.slug}`,
      title: this.title,
      status: this.status,
      ...(this.detail ? { detail: this.detail } : {}),
      ...(instance ? { instance } : {}),
      ...(this.errors.length ? { errors: this.errors } : {}),
    };
  }
}

export const invalid = (errors: FieldError[], detail = 'the request has invalid fields; nothing was written') =>
  new Problem(422, 'invalid-input', 'Invalid input', detail, errors);

export const notFound = (what: string) => new Problem(404, 'not-found', 'Not found', what);

export const conflict = (detail: string, errors: FieldError[] = []) =>
  new Problem(409, 'conflict', 'Conflict', detail, errors);

export const badRequest = (detail: string, errors: FieldError[] = []) =>
  new Problem(400, 'bad-request', 'Bad request', detail, errors);

/** Collects field errors and throws them together, so one response lists every problem found. */
export class ErrorList {
  readonly items: FieldError[] = [];
  constructor(private readonly limit = 50) {}
  add(path: string, message: string): void {
    if (this.items.length < this.limit) this.items.push({ path, message });
  }
  get full(): boolean {
    return this.items.length >= this.limit;
  }
  throwIfAny(detail?: string): void {
    if (this.items.length) throw invalid(this.items, detail);
  }
}
