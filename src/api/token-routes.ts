import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { revokeToken } from '../store/tokens-repo.ts';
import { addRoute, type Services } from './context.ts';
import { notFound } from '../services/problem.ts';
import { createToken, listedTokens, TokenRequest as TokenBody } from './tokens.ts';

/** Tokens can also be managed over HTTP by an admin, so the embedded store need not be stopped. */
export async function tokenRoutes(app: FastifyInstance, { services }: { services: Services }) {
  const { db } = services;
  addRoute(app, services, { method: 'POST', url: '/tokens', summary: 'Create an access token (shown once)', tag: 'access', role: 'admin', body: TokenBody }, async (req, reply) => {
    const body = req.body;
    const { id, token } = await createToken(db, body.role, body.name);
    reply.code(201);
    return { id, role: body.role, name: body.name, token };
  });
  addRoute(app, services, { method: 'GET', url: '/tokens', summary: 'List access tokens (never the secrets)', tag: 'access', role: 'admin' }, async () => ({
    tokens: await listedTokens(db),
  }));
  const Params = z.object({ id: z.string() });
  addRoute(app, services, { method: 'DELETE', url: '/tokens/:id', summary: 'Revoke an access token', tag: 'access', role: 'admin', params: Params }, async (req, reply) => {
    const { id } = req.params;
    if (!(await revokeToken(db, id))) throw notFound(`no active token ${id}`);
    reply.code(204);
  });
}
