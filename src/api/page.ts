import { createHash } from 'node:crypto';
import { readdirSync, readFileSync } from 'node:fs';
import type { FastifyInstance, FastifyReply, FastifyRequest } from 'fastify';
import { addRoute, type Services } from './context.ts';
import { notFound } from '../services/problem.ts';

/** One static file of the forecast page, read once when the plugin is registered. */
interface Asset {
  body: Buffer;
  type: string;
  etag: string;
}

const ASSET_DIR = new URL('./page/', import.meta.url);
// Every file of the page folder with one of these endings is served: the HTML, the style sheet and
// the page's ES modules (app.js imports the others by relative path).
const CONTENT_TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
};

const contentType = (name: string): string | undefined => CONTENT_TYPES[name.slice(name.lastIndexOf('.'))];

// Short, so a new deployment reaches open pages within a minute; ETags make the revalidation cheap.
const CACHE_CONTROL = 'public, max-age=60';

// The page loads only its own files and talks only to this service; the token lives in the
// fragment and sessionStorage, so nothing is sent to other origins (no-referrer for good measure).
const PAGE_HEADERS = {
  'cache-control': CACHE_CONTROL,
  'x-content-type-options': 'nosniff',
  'referrer-policy': 'no-referrer',
  'content-security-policy':
    "default-src 'none'; script-src 'self'; style-src 'self'; connect-src 'self'; img-src 'self' data:; base-uri 'none'; form-action 'self'; frame-ancestors 'none'",
};

function loadAssets(): Map<string, Asset> {
  const out = new Map<string, Asset>();
  for (const name of readdirSync(ASSET_DIR).sort()) {
    const type = contentType(name);
    if (!type) continue;
    const body = readFileSync(new URL(name, ASSET_DIR));
    const etag = `"${createHash('sha256').update(body).digest('base64url').slice(0, 22)}"`;
    out.set(name, { body, type, etag });
  }
  return out;
}

function send(request: FastifyRequest, reply: FastifyReply, asset: Asset): Buffer | string {
  reply.headers(PAGE_HEADERS).header('etag', asset.etag).type(asset.type);
  if (request.headers['if-none-match'] === asset.etag) {
    reply.code(304);
    return '';
  }
  return asset.body;
}

/**
 * The forecast page: one small single-page app (plain HTML/CSS and JS modules, charts drawn as
 * inline SVG) served at `/` (overview of gauges) and `/view/:id` (one gauge), its files under `/page/…`.
 * The page is open; the data it fetches needs a read token, which the page takes from the URL
 * fragment `#token=…` and keeps in sessionStorage.
 */
export async function pageRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const assets = loadAssets();
  const index = assets.get('index.html')!;

  addRoute(
    app,
    services,
    { method: 'GET', url: '/', summary: 'Forecast page: overview of gauges', tag: 'page', role: 'open', responseTypes: ['text/html'] },
    async (request, reply) => send(request, reply, index),
  );
  addRoute(
    app,
    services,
    { method: 'GET', url: '/view/:id', summary: 'Forecast page: one gauge (fan chart, probabilities, table)', tag: 'page', role: 'open', responseTypes: ['text/html'] },
    async (request, reply) => send(request, reply, index),
  );
  addRoute(
    app,
    services,
    { method: 'GET', url: '/page/:name', summary: 'Static files of the forecast page', tag: 'page', role: 'open', responseTypes: ['text/javascript', 'text/css'] },
    async (request, reply) => {
      const { name } = request.params as { name: string };
      const asset = name === 'index.html' ? undefined : assets.get(name);
      if (!asset) throw notFound(`no page file ${name}`);
      return send(request, reply, asset);
    },
  );
}
