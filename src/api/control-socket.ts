import { chmodSync, mkdirSync, rmSync } from 'node:fs';
import { createServer, request, type IncomingMessage, type ServerResponse } from 'node:http';
import { join, resolve } from 'node:path';
import type { Db } from '../store/db.ts';
import { revokeToken } from '../store/tokens-repo.ts';
import { createToken, listedTokens, TokenRequest } from './tokens.ts';

/**
 * The embedded store may be open in one process only, so while the service runs, the token command
 * (src/api/token-cli.ts) asks the service itself, over a Unix socket in a 0700 directory under the
 * data directory: whoever may read the data directory may manage tokens, as with the store's files.
 * It answers three requests (create, list, revoke) and nothing else.
 */
export function controlSocketPath(dataDir: string): string {
  return join(resolve(dataDir), 'control', 'service.sock');
}

/** Unix socket paths are limited to about 107 bytes (sun_path); longer ones cannot be bound. */
const MAX_SOCKET_PATH = 100;

export interface ControlSocket {
  /** Null when no socket could be offered (platform or path length); `reason` says why. */
  path: string | null;
  reason: string | null;
  close(): Promise<void>;
}

export async function startControlSocket(db: Db, dataDir: string): Promise<ControlSocket> {
  const path = controlSocketPath(dataDir);
  if (process.platform === 'win32') return { path: null, reason: 'no Unix sockets on Windows', close: async () => {} };
  if (Buffer.byteLength(path) > MAX_SOCKET_PATH) {
    return { path: null, reason: `the socket path ${path} is longer than ${MAX_SOCKET_PATH} bytes`, close: async () => {} };
  }
  mkdirSync(join(path, '..'), { recursive: true, mode: 0o700 });
  // The caller holds the data directory's lock, so a socket file left here is a dead process's.
  rmSync(path, { force: true });
  const server = createServer((req, res) => {
    answer(db, req, res).catch((err) => send(res, 500, { detail: (err as Error).message }));
  });
  await new Promise<void>((ok, fail) => {
    server.once('error', fail);
    server.listen(path, () => ok());
  });
  chmodSync(path, 0o600);
  return {
    path,
    reason: null,
    close: () =>
      new Promise<void>((ok) => {
        server.close(() => {
          rmSync(path, { force: true });
          ok();
        });
      }),
  };
}

async function answer(db: Db, req: IncomingMessage, res: ServerResponse): Promise<void> {
  const url = req.url ?? '/';
  if (req.method === 'GET' && url === '/tokens') return send(res, 200, { tokens: await listedTokens(db) });
  if (req.method === 'POST' && url === '/tokens') {
    const parsed = TokenRequest.safeParse(await readJson(req));
    if (!parsed.success) return send(res, 422, { detail: parsed.error.issues.map((i) => `${i.path.join('.') || 'body'}: ${i.message}`).join('; ') });
    const { id, token } = await createToken(db, parsed.data.role, parsed.data.name);
    return send(res, 201, { id, role: parsed.data.role, name: parsed.data.name, token });
  }
  const revoke = /^\/tokens\/([^/]+)$/.exec(url);
  if (req.method === 'DELETE' && revoke) {
    const id = decodeURIComponent(revoke[1]);
    return (await revokeToken(db, id)) ? send(res, 200, { revoked: id }) : send(res, 404, { detail: `no active token ${id}` });
  }
  send(res, 404, { detail: `no such request: ${req.method} ${url}` });
}

async function readJson(req: IncomingMessage): Promise<unknown> {
  let text = '';
  for await (const chunk of req) {
    text += chunk;
    if (text.length > 10_000) throw new Error('request body too large');
  }
  try {
    return JSON.parse(text);
  } catch {
    return undefined;
  }
}

function send(res: ServerResponse, status: number, body: unknown): void {
  res.writeHead(status, { 'content-type': 'application/json' }).end(JSON.stringify(body));
}

/** The client side, used by the token command: one JSON request over the socket. */
export function askControlSocket(path: string, method: 'GET' | 'POST' | 'DELETE', url: string, body?: unknown): Promise<{ status: number; body: any }> {
  return new Promise((ok, fail) => {
    const req = request({ socketPath: path, method, path: url, headers: { 'content-type': 'application/json' }, timeout: 60_000 }, (res) => {
      let text = '';
      res.setEncoding('utf8');
      res.on('data', (d) => (text += d));
      res.on('end', () => {
        try {
          ok({ status: res.statusCode ?? 0, body: text ? JSON.parse(text) : null });
        } catch (err) {
          fail(err);
        }
      });
    });
    req.on('timeout', () => req.destroy(new Error('the service did not answer on its control socket within 60 s (it may be busy, e.g. writing a large archive upload); try again')));
    req.on('error', fail);
    req.end(body === undefined ? undefined : JSON.stringify(body));
  });
}
