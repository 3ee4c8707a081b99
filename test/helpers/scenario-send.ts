import type { Send } from '../../src/scenario/load-archive.ts';
import type { TestApp } from './test-app.ts';

/** The scenario loader's Send, through fastify inject with the admin token. */
export function injectSend(t: TestApp): Send {
  return async (method, url, body) => {
    const res = await t.as('admin', { method, url, ...(body === undefined ? {} : { payload: body as object }) });
    return { status: res.statusCode, body: res.body ? JSON.parse(res.body) : null };
  };
}
