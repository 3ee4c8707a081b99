import fc from 'fast-check';

/**
 * Bad requests for every write route, made by fast-check. Each one is bad by construction, so a
 * correct service must refuse it with a 4xx problem and write nothing:
 * - a value somewhere in a valid body replaced by an object with an unknown key (every wire schema
 *   is strict, and values read by the services must be numbers),
 * - an unknown key added to the body,
 * - the JSON text cut short, or led by a control character (never valid JSON),
 * - a media type the route does not take,
 * - a CSV batch with a cell that is no number,
 * - route ids and query values that name nothing or are malformed, a job that already ended.
 * Impossible calendar dates and absurd magnitudes are left to their own tests.
 */
export interface BadRequest {
  method: 'POST' | 'PATCH' | 'DELETE';
  path: string;
  contentType?: string;
  body?: string;
  /** What makes it bad, for the failure message. */
  why: string;
}

export interface Templates {
  gaugeId: string;
  memberIds: string[];
  /** A valid run body for the gauge. */
  run: Record<string, unknown>;
  times: string[];
}

type Json = null | boolean | number | string | Json[] | { [k: string]: Json };

/** Every path (list of keys) to a node below the root. */
function nodePaths(value: Json, prefix: (string | number)[] = []): (string | number)[][] {
  const out: (string | number)[][] = [];
  if (Array.isArray(value)) value.forEach((v, i) => out.push([...prefix, i], ...nodePaths(v, [...prefix, i])));
  else if (value && typeof value === 'object') for (const [k, v] of Object.entries(value)) out.push([...prefix, k], ...nodePaths(v, [...prefix, k]));
  return out;
}

function replaceAt(value: Json, path: (string | number)[], replacement: Json): Json {
  if (path.length === 0) return replacement;
  const copy: any = Array.isArray(value) ? [...value] : { ...(value as object) };
  copy[path[0]] = replaceAt(copy[path[0]], path.slice(1), replacement);
  return copy;
}

/** A JSON body route: its path and a valid body for it. */
interface BodyRoute {
  method: 'POST' | 'PATCH';
  path: (gauge: string) => string;
  body: Json;
  csv?: string;
}

export function badRequests(t: Templates): fc.Arbitrary<BadRequest> {
  const [t0, t1] = t.times;
  const m = t.memberIds;
  const routes: BodyRoute[] = [
    { method: 'POST', path: () => '/gauges', body: { id: 'fuzz-new-gauge', name: 'Fuzz Beck', catchmentAreaKm2: 12, timeStep: 'P1D', flowUnit: 'm3/s', thresholds: [{ label: 'bankfull', value: 10 }], location: { latitude: 47.1, longitude: -35.2 } } },
    { method: 'PATCH', path: (g) => `/gauges/${g}`, body: { name: 'Renamed Beck', thresholds: [{ label: 'bankfull', value: 11 }], updatingMaxAgeSteps: 3 } },
    { method: 'POST', path: (g) => `/gauges/${g}/observations`, body: { unit: 'm3/s', times: [t0, t1], values: [1.5, 2.5] }, csv: `time,flow (m3/s)\n${t0},1.5\n` },
    { method: 'POST', path: (g) => `/gauges/${g}/forcings`, body: { times: [t0, t1], variables: [{ name: 'precipitation', unit: 'mm', values: [0, 1.2] }] }, csv: `time,precipitation (mm)\n${t0},1.2\n` },
    { method: 'POST', path: (g) => `/gauges/${g}/simulations`, body: { unit: 'm3/s', times: [t0, t1], members: [{ id: m[0], values: [1, 2] }] }, csv: `time,${m[0]} (m3/s)\n${t0},1.5\n` },
    { method: 'POST', path: (g) => `/gauges/${g}/reforecasts`, body: { unit: 'm3/s', runs: [{ issueTime: t0, members: [{ id: m[0], values: [1, 2] }] }] } },
    { method: 'POST', path: (g) => `/gauges/${g}/runs`, body: t.run as Json },
    { method: 'POST', path: (g) => `/gauges/${g}/models/fit`, body: { templateLength: 30, simLags: 3, params: { nRounds: 20 } } },
    { method: 'POST', path: (g) => `/gauges/${g}/models/upload`, body: { label: 'fuzz', featureSpec: { kind: 'rows' }, onnxBase64: 'AAAA' } },
    { method: 'POST', path: (g) => `/gauges/${g}/raw-archive`, body: { templateLength: 20, transform: { kind: 'log' } } },
    { method: 'POST', path: (g) => `/gauges/${g}/hindcasts`, body: { trajectories: 100 } },
    { method: 'POST', path: () => '/tokens', body: { role: 'read', name: 'fuzz token' } },
  ];

  const json = fc.jsonValue({ maxDepth: 3 }) as fc.Arbitrary<Json>;
  const gauge = fc.oneof({ weight: 4, arbitrary: fc.constant(t.gaugeId) }, { weight: 1, arbitrary: fc.string({ minLength: 1, maxLength: 80 }) }).map(encodeURIComponent);
  const route = fc.constantFrom(...routes);

  const replaced = fc
    .tuple(route, gauge, fc.nat(), json)
    .map(([r, g, pick, inner]): BadRequest => {
      const paths = nodePaths(r.body);
      const at = paths.length ? paths[pick % paths.length] : [];
      const body = paths.length ? replaceAt(r.body, at, { __fuzz: inner }) : { __fuzz: inner };
      return { method: r.method, path: r.path(g), contentType: 'application/json', body: JSON.stringify(body), why: `value at ${at.join('.') || 'body'} replaced by an object with an unknown key` };
    });
  const extraKey = fc
    .tuple(route, gauge, fc.string({ maxLength: 20 }), json)
    .map(([r, g, k, v]): BadRequest => ({ method: r.method, path: r.path(g), contentType: 'application/json', body: JSON.stringify({ ...(r.body as object), [`__${k}`]: v }), why: 'unknown key' }));
  const cut = fc
    .tuple(route, gauge, fc.nat())
    .map(([r, g, n]): BadRequest => {
      const text = JSON.stringify(r.body);
      return { method: r.method, path: r.path(g), contentType: 'application/json', body: text.slice(0, 1 + (n % (text.length - 1))), why: 'JSON cut short' };
    });
  const garbage = fc
    .tuple(route, gauge, fc.string({ maxLength: 200 }))
    .map(([r, g, s]): BadRequest => ({ method: r.method, path: r.path(g), contentType: 'application/json', body: `\u0001${s}`, why: 'not JSON' }));
  const mediaType = fc
    .tuple(route, gauge, fc.constantFrom('application/xml', 'multipart/form-data; boundary=x', 'image/png', 'application/x-www-form-urlencoded'))
    .map(([r, g, type]): BadRequest => ({ method: r.method, path: r.path(g), contentType: type, body: JSON.stringify(r.body), why: `media type ${type}` }));
  const badCsv = fc
    .tuple(fc.constantFrom(...routes.filter((r) => r.csv)), gauge, fc.string({ maxLength: 30 }))
    .map(([r, g, s]): BadRequest => ({ method: r.method, path: r.path(g), contentType: 'text/csv', body: `${r.csv}${t1},x${s}\n`, why: 'CSV cell that is no number' }));
  // Routes without a body: ids that name nothing or are malformed, queries outside their enum.
  const missingId = fc.oneof(fc.string({ minLength: 1, maxLength: 40 }).filter((s) => !/^\d{1,5}$/.test(s)), fc.integer({ min: 1_000_000_000, max: 2 ** 40 }).map(String)).map(encodeURIComponent);
  const noBody = fc.oneof(
    fc.tuple(gauge, fc.string({ maxLength: 20 })).map(([g, v]): BadRequest => ({ method: 'DELETE', path: `/gauges/${g}?force=${encodeURIComponent(`x${v}`)}`, why: 'force is neither true nor false' })),
    fc.tuple(gauge, fc.string({ minLength: 1, maxLength: 20 })).map(([g, k]): BadRequest => ({ method: 'DELETE', path: `/gauges/${g}?${encodeURIComponent(`_${k}`)}=1`, why: 'unknown query key' })),
    fc.tuple(gauge, missingId).map(([g, v]): BadRequest => ({ method: 'POST', path: `/gauges/${g}/models/${v}/activate`, why: 'no such version' })),
    missingId.map((id): BadRequest => ({ method: 'POST', path: `/jobs/${id}/cancel`, why: 'no such job' })),
    // The harness's first jobs (the interrupted fit, the raw-error archive) have ended by then.
    fc.integer({ min: 1, max: 3 }).map((id): BadRequest => ({ method: 'POST', path: `/jobs/${id}/cancel`, why: 'job already ended (or none)' })),
    gauge.map((g): BadRequest => ({ method: 'POST', path: `/gauges/${g}/models/rollback`, why: 'no earlier version to go back to' })),
    missingId.map((id): BadRequest => ({ method: 'DELETE', path: `/tokens/${id}`, why: 'no such token' })),
  );
  return fc.oneof(
    { weight: 5, arbitrary: replaced },
    { weight: 2, arbitrary: extraKey },
    { weight: 2, arbitrary: cut },
    { weight: 1, arbitrary: garbage },
    { weight: 1, arbitrary: mediaType },
    { weight: 2, arbitrary: badCsv },
    { weight: 2, arbitrary: noBody },
  );
}
