import Fastify, { type FastifyBaseLogger, type FastifyInstance } from 'fastify';
import type { Config } from '../config.ts';
import type { Db } from '../store/db.ts';
import { CorrectionPool } from '../workers/correction-pool.ts';
import { authHook } from './auth.ts';
import { eventRoutes } from './events.ts';
import { ForecastEvents } from './forecast-events.ts';
import { forecastRoutes } from './forecasts.ts';
import { Metrics } from './metrics-registry.ts';
import { metricsRoutes } from './metrics.ts';
import { overviewRoutes } from './overview.ts';
import { pageRoutes } from './page.ts';
import { runRoutes } from './runs.ts';
import type { Services } from './context.ts';
import { forcingRoutes } from './forcings.ts';
import { gaugeRoutes } from './gauges.ts';
import { healthRoutes } from './health.ts';
import { hindcastRoutes } from './hindcasts.ts';
import { jobRoutes } from './jobs.ts';
import { modelRoutes } from './models.ts';
import { observationRoutes } from './observations.ts';
import { ApiDocs } from './openapi.ts';
import { docsRoutes } from './docs.ts';
import { Problem } from '../services/problem.ts';
import { isStoreUnavailable } from '../store/unavailable.ts';
import { BodyBudget, limitBodiesInFlight, storeUnavailable, ThrottledWarnings } from './overload.ts';
import { reforecastRoutes } from './reforecasts.ts';
import { checkRequestTarget, clientErrorHandler, frameworkErrors, jsonDepthExceeds, pathOf, requestSerializer, tooDeep } from './request-shape.ts';
import { simulationRoutes } from './simulations.ts';
import { streamTicketRoutes } from './stream-tickets.ts';
import { TokenRevocations } from './token-revocations.ts';
import { tokenRoutes } from './token-routes.ts';
import { ratingCurveRoutes } from './rating-curves.ts';
import { verificationRoutes } from './verification.ts';

export interface AppOptions {
  db: Db;
  config: Config;
  /** A pino logger; none keeps tests quiet. */
  logger?: FastifyBaseLogger;
}

export async function buildApp(options: AppOptions): Promise<FastifyInstance> {
  const { db, config } = options;
  // Requests are logged with credential query parameters redacted (this serializer wins over fastify's).
  const logger = options.logger?.child({}, { serializers: { req: requestSerializer } });
  const app = Fastify({
    ...(logger ? { loggerInstance: logger } : { logger: false }),
    bodyLimit: Math.round(config.BODY_LIMIT_MB * 1024 * 1024),
    return503OnClosing: true,
    routerOptions: { ignoreTrailingSlash: true },
    frameworkErrors,
    clientErrorHandler,
  });
  const events = new ForecastEvents();
  await events.start(db);
  const revocations = new TokenRevocations();
  await revocations.start(db);
  const pool = new CorrectionPool(config.WORKERS, config.CORRECTION_QUEUE);
  const services: Services = { db, config, docs: new ApiDocs(), pool, metrics: new Metrics(), events, revocations };
  app.addHook('onClose', async () => {
    await events.close();
    await revocations.close();
    await pool.close();
  });
  app.addHook('onResponse', async (request, reply) => {
    const route = request.routeOptions.url ?? 'unmatched';
    services.metrics.requests.inc({ method: request.method, route, status: String(reply.statusCode) });
    services.metrics.latency.observe({ route }, reply.elapsedTime / 1000);
  });

  // fastify's JSON parser (with its prototype-poisoning checks), behind a nesting limit.
  const parseJson = app.getDefaultJsonParser('error', 'error');
  app.removeContentTypeParser('application/json');
  app.addContentTypeParser('application/json', { parseAs: 'string' }, (req, body, done) => {
    if (jsonDepthExceeds(body as string)) done(tooDeep(), undefined);
    else parseJson(req, body as string, done);
  });
  for (const type of ['text/csv', 'text/plain']) {
    app.addContentTypeParser(type, { parseAs: 'string' }, (_req, body, done) => done(null, body));
  }
  // NetCDF run bodies (classic or NetCDF-4) arrive as bytes; src/api/run-forms.ts reads them.
  for (const type of ['application/x-netcdf', 'application/netcdf']) {
    app.addContentTypeParser(type, { parseAs: 'buffer' }, (_req, body, done) => done(null, body));
  }

  const warnings = new ThrottledWarnings(app.log);
  app.setErrorHandler((error, request, reply) => {
    const problem = toProblem(error);
    // 503s (busy, store unavailable) are the service protecting itself, not faults: one warn line
    // per interval and kind, never an error line per request.
    if (problem.status === 503) {
      warnings.note(problem.slug, { detail: problem.detail, cause: problem === error ? undefined : (error as Error).message }, 'answering 503');
    } else if (problem.status >= 500) request.log.error({ err: error }, 'request failed');
    reply
      .code(problem.status)
      .headers(problem.headers)
      .type('application/problem+json')
      .send(problem.body(pathOf(request.url)));
  });
  app.setNotFoundHandler((request, reply) => {
    reply
      .code(404)
      .type('application/problem+json')
      .send(new Problem(404, 'not-found', 'Not found', `no route ${request.method} ${pathOf(request.url)}`).body());
  });

  app.addHook('onRequest', checkRequestTarget);
  app.addHook('onRequest', authHook(services));
  limitBodiesInFlight(app, new BodyBudget(Math.round(config.BODY_BUDGET_MB * 1024 * 1024)));

  await app.register(healthRoutes, { services });
  await app.register(docsRoutes, { services });
  await app.register(tokenRoutes, { services });
  await app.register(gaugeRoutes, { services });
  await app.register(ratingCurveRoutes, { services });
  await app.register(observationRoutes, { services });
  await app.register(forcingRoutes, { services });
  await app.register(simulationRoutes, { services });
  await app.register(reforecastRoutes, { services });
  await app.register(modelRoutes, { services });
  await app.register(jobRoutes, { services });
  await app.register(runRoutes, { services });
  await app.register(forecastRoutes, { services });
  await app.register(verificationRoutes, { services });
  await app.register(hindcastRoutes, { services });
  await app.register(overviewRoutes, { services });
  await app.register(streamTicketRoutes, { services });
  await app.register(eventRoutes, { services });
  await app.register(metricsRoutes, { services });
  await app.register(pageRoutes, { services });
  return app;
}

/** Maps anything thrown to RFC 9457 problem details; fastify's own errors keep their status. */
function toProblem(error: unknown): Problem {
  if (error instanceof Problem) return error;
  if (isStoreUnavailable(error)) return storeUnavailable();
  const e = error as { statusCode?: number; code?: string; message?: string };
  switch (e.code) {
    case 'FST_ERR_CTP_BODY_TOO_LARGE':
      return new Problem(413, 'payload-too-large', 'Payload too large', `${e.message}; split the batch into smaller ones`);
    case 'FST_ERR_CTP_INVALID_MEDIA_TYPE':
      return new Problem(415, 'unsupported-media-type', 'Unsupported media type', `${e.message}; send application/json or text/csv (runs also application/x-netcdf)`);
    case 'FST_ERR_CTP_EMPTY_JSON_BODY':
      return new Problem(400, 'bad-request', 'Bad request', 'the JSON body is empty', [{ path: 'body', message: 'empty' }]);
  }
  if (e.statusCode === 400 && e.message) {
    return new Problem(400, 'malformed-body', 'Malformed body', e.message, [{ path: 'body', message: e.message }]);
  }
  if (e.statusCode && e.statusCode >= 400 && e.statusCode < 500) {
    return new Problem(e.statusCode, 'bad-request', 'Bad request', e.message);
  }
  return new Problem(500, 'internal-error', 'Internal error', 'the service failed to handle this request; it has been logged');
}
