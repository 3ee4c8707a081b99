import { Transform } from 'node:stream';
import type { FastifyBaseLogger, FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { Problem } from '../services/problem.ts';

/** Seconds a client is asked to wait when the service refuses a body for lack of room. */
export const BODY_RETRY_AFTER_S = 2;

/**
 * Bytes of request bodies the process holds at once. A body with a Content-Length takes its room
 * before a byte is read; a chunked body takes room chunk by chunk. The room is given back when the
 * response is finished (the parsed body lives until then). Bounding the bytes bounds what body
 * parsing can take (memory, and event-loop time that /healthz would otherwise wait for).
 */
export class BodyBudget {
  private held = 0;
  constructor(readonly limitBytes: number) {}

  /** Takes n bytes of room, or answers false when they do not fit (nothing is taken then). */
  take(n: number): boolean {
    // One body larger than the whole budget still passes when nothing else is held, so a budget
    // below the body limit never refuses every such body.
    if (this.held > 0 && this.held + n > this.limitBytes) return false;
    this.held += n;
    return true;
  }

  give(n: number): void {
    this.held = Math.max(0, this.held - n);
  }

  /** Bytes held now. */
  get bytes(): number {
    return this.held;
  }
}

export function busyBodies(): Problem {
  return new Problem(503, 'busy', 'Busy', 'too many request bodies are being received at once; retry shortly', [], {
    'retry-after': String(BODY_RETRY_AFTER_S),
    // The refused body is not read: closing the connection spares reading it to the end.
    connection: 'close',
  });
}

/**
 * Registers the budget as a preParsing hook (after the token check, so an unauthenticated client
 * cannot hold room). Beyond the budget: 503 problem+json with Retry-After.
 */
export function limitBodiesInFlight(app: FastifyInstance, budget: BodyBudget): void {
  app.addHook('preParsing', async (request: FastifyRequest, reply: FastifyReply, payload) => {
    const length = request.headers['content-length'];
    const chunked = request.headers['transfer-encoding'] !== undefined;
    if (length === undefined && !chunked) return payload;
    let held = 0;
    let released = false;
    const release = () => {
      if (released) return;
      released = true;
      budget.give(held);
    };
    reply.raw.once('close', release);
    reply.raw.once('finish', release);
    if (length !== undefined) {
      const n = Number(length);
      if (!Number.isFinite(n) || n <= 0) return payload;
      // Bodies above the body limit are refused with 413 by the parser; they hold no more than it.
      const want = Math.min(n, app.initialConfig.bodyLimit ?? n);
      if (!budget.take(want)) throw busyBodies();
      held = want;
      return payload;
    }
    const counted = new Transform({
      transform(chunk: Buffer, _encoding, done) {
        if (!budget.take(chunk.length)) return done(busyBodies());
        held += chunk.length;
        done(null, chunk);
      },
    });
    payload.on('error', (err) => counted.destroy(err));
    return payload.pipe(counted);
  });
}

/**
 * 503 answers (busy, store unavailable) are expected under load and come in floods: they are
 * logged at warn, once per interval and kind, with how many were answered since the last line.
 */
export class ThrottledWarnings {
  private readonly last = new Map<string, { at: number; suppressed: number }>();
  constructor(
    private readonly log: FastifyBaseLogger,
    private readonly intervalMs = 10_000,
  ) {}

  note(kind: string, fields: Record<string, unknown>, message: string, now = Date.now()): void {
    const seen = this.last.get(kind);
    if (seen && now - seen.at < this.intervalMs) {
      seen.suppressed++;
      return;
    }
    this.last.set(kind, { at: now, suppressed: 0 });
    this.log.warn({ ...fields, kind, answeredSinceLastLine: seen ? seen.suppressed : 0, intervalSeconds: this.intervalMs / 1000 }, message);
  }
}

/** Seconds a client is asked to wait while the database cannot be reached. */
export const STORE_RETRY_AFTER_S = 5;

export function storeUnavailable(): Problem {
  return new Problem(503, 'store-unavailable', 'Store unavailable', 'the database cannot be reached; retry shortly (repeating a write never duplicates it)', [], {
    'retry-after': String(STORE_RETRY_AFTER_S),
  });
}
