// A bare fastify route answering a fixed JSON body: the ceiling the latest-forecast read is compared with.
import Fastify from 'fastify';

// The same number of bytes as the read it is compared with (BODY_BYTES), so only the per-request work differs.
const body = JSON.stringify({ bare: 'x'.repeat(Math.max(0, Number(process.env.BODY_BYTES ?? 1000) - 12)) });
const app = Fastify();
app.get('/bare', async (_req, reply) => reply.type('application/json').send(body));
await app.listen({ port: Number(process.env.PORT ?? 8099), host: '127.0.0.1' });
console.log('ready');
