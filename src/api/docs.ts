import type { FastifyInstance } from 'fastify';
import { z } from 'zod';
import { addRoute, type Services } from './context.ts';

const info = {
  title: 'Streamflow forecast correction service',
  version: '0.1.0',
  description:
    'Corrects raw ensemble streamflow forecasts and returns quantiles and flood-threshold exceedance probabilities. ' +
    'All outputs are guidance: flood warnings are decided by the responsible local authority.',
};

export async function docsRoutes(app: FastifyInstance, { services }: { services: Services }) {
  let cached: Record<string, unknown> | null = null;
  const documentOnce = () => (cached ??= services.docs.document(info));

  addRoute(app, services, { method: 'GET', url: '/openapi.json', summary: 'This API as an OpenAPI 3.1 document', tag: 'docs', role: 'open', response: z.looseObject({ openapi: z.string(), info: z.looseObject({ title: z.string(), version: z.string() }), paths: z.record(z.string(), z.unknown()), components: z.unknown() }) }, async () =>
    documentOnce(),
  );
  addRoute(app, services, { method: 'GET', url: '/api', summary: 'Browsable list of the API', tag: 'docs', role: 'open', responseTypes: ['text/html'] }, async (_req, reply) => {
    reply.type('text/html; charset=utf-8');
    return renderDocsPage(documentOnce());
  });
}

function escapeHtml(s: string): string {
  return s.replace(/[&<>"]/g, (c) => ({ '&': '&amp;', '<': '&lt;', '>': '&gt;', '"': '&quot;' })[c]!);
}

function renderDocsPage(doc: Record<string, unknown>): string {
  const paths = doc.paths as Record<string, Record<string, Record<string, unknown>>>;
  const rows: string[] = [];
  for (const [path, ops] of Object.entries(paths)) {
    for (const [method, op] of Object.entries(ops)) {
      const role = (op['x-required-role'] as string | undefined) ?? 'open';
      const body = (op.requestBody as { content?: Record<string, { schema?: unknown }> } | undefined)?.content;
      const params = (op.parameters as { name: string; in: string; required: boolean }[] | undefined) ?? [];
      rows.push(`<details><summary><code class="m ${method}">${method.toUpperCase()}</code> <code>${escapeHtml(path)}</code>
 — ${escapeHtml(String(op.summary))} <span class="role">${role}</span></summary>
 ${params.length ? `<p>parameters: ${params.map((p) => `<code>${escapeHtml(p.name)}</code> (${p.in}${p.required ? ', required' : ''})`).join(', ')}</p>` : ''}
 ${body ? Object.entries(body).map(([type, c]) => `<p>body <code>${type}</code></p><pre>${escapeHtml(JSON.stringify(c.schema ?? {}, null, 2))}</pre>`).join('') : ''}
</details>`);
    }
  }
  const info = doc.info as { title: string; description: string };
  return `<!doctype html><html lang="en"><head><meta charset="utf-8"><title>${escapeHtml(info.title)} — API</title>
<style>body{font:15px/1.45 system-ui,sans-serif;max-width:60rem;margin:2rem auto;padding:0 1rem;color:#1d2a33}
details{border-bottom:1px solid #d5dde2;padding:.4rem 0}code.m{display:inline-block;width:4.5rem;font-weight:600}
.get{color:#1f6f8b}.post{color:#6b4fa1}.patch,.put{color:#8a5a00}.delete{color:#a33}
.role{float:right;font-size:.8rem;color:#5b6b75}pre{background:#f3f6f8;padding:.6rem;overflow:auto;font-size:12px}</style></head>
<body><h1>${escapeHtml(info.title)}</h1><p>${escapeHtml(info.description)}</p>
<p>Machine-readable: <a href="/openapi.json">/openapi.json</a>. Send <code>Authorization: Bearer &lt;token&gt;</code>; the role each route needs is on the right.</p>
${rows.join('\n')}</body></html>`;
}
