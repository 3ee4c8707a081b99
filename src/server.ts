import pino from 'pino';
import type { FastifyInstance } from 'fastify';
import { buildApp } from './api/app.ts';
import { startControlSocket, type ControlSocket } from './api/control-socket.ts';
import { jobHandlers, jobSchedule } from './jobs/handlers.ts';
import { JobRunner } from './jobs/runner.ts';
import type { Config } from './config.ts';
import type { Db } from './store/db.ts';
import { migrate } from './store/migrate.ts';
import { openDb } from './store/open.ts';
import { countTokens } from './store/tokens-repo.ts';

export interface RunningService {
  app: FastifyInstance;
  runner: JobRunner;
  db: Db;
  url: string;
  stop(): Promise<void>;
}

/** Opens the store, applies migrations, and listens. stop() finishes in-flight requests first. */
export async function startService(config: Config, logger = pino({ level: config.LOG_LEVEL })): Promise<RunningService> {
  // A dropped connection is replaced by the pool; requests meanwhile answer 503 (logged there).
  const db = await openDb({
    databaseUrl: config.DATABASE_URL,
    dataDir: config.DATA_DIR,
    onConnectionError: (err) => logger.warn({ err: err.message }, 'a database connection was lost; the pool replaces it'),
  });
  try {
    const applied = await migrate(db);
    if (applied.length) logger.info({ applied }, 'migrations applied');
    if (db.kind === 'embedded') {
      logger.info({ dataDir: config.DATA_DIR }, 'using the embedded PostgreSQL store (single process; set DATABASE_URL for a server)');
    }
    if (config.AUTH === 'on' && (await countTokens(db)) === 0) {
      logger.warn('no access tokens exist yet: create one with `npm run token -- create --role admin`');
    }
    const app = await buildApp({ db, config, logger });
    await app.listen({ port: config.PORT, host: config.HOST });
    const runner = new JobRunner(db, jobHandlers, app.log, undefined, jobSchedule, config.JOB_STALE_SECONDS);
    await runner.start();
    // The embedded store is this process's alone: the token command reaches it through the service.
    let control: ControlSocket | null = null;
    if (db.kind === 'embedded') {
      control = await startControlSocket(db, config.DATA_DIR).catch((err: Error) => ({ path: null, reason: err.message, close: async () => {} }));
      if (control.reason) logger.warn(`no control socket for the token command (${control.reason}): manage tokens with POST /tokens while the service runs`);
    }
    const address = app.server.address();
    const port = typeof address === 'object' && address ? address.port : config.PORT;
    const host = config.HOST.includes(':') ? `[${config.HOST}]` : config.HOST;
    let stopping: Promise<void> | null = null;
    return {
      app,
      runner,
      db,
      url: `http://${host}:${port}`,
      stop: () =>
        (stopping ??= (async () => {
          await control?.close();
          await runner.stop();
          await app.close();
          await db.close();
        })()),
    };
  } catch (err) {
    await db.close();
    throw err;
  }
}
