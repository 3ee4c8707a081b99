// @ts-check
// Live updates of the forecast page: the /events stream, read with fetch so the token can go in a
// header, with a watchdog, reconnection with back-off, and a reload when a new forecast is for the
// view shown.
import { fmtTime } from './format.js';
import { announce, setLive, showTokenForm } from './notices.js';
import { state } from './page-state.js';
import { authHeaders } from './service-requests.js';

/**
 * Follows /events with fetch streaming (EventSource cannot send the Authorization header) and
 * reloads the view when a forecast for it arrives, or after a reconnection. Calling it again
 * replaces the connection (for example after a new token).
 * @param {() => unknown} reload
 */
export async function followEvents(reload) {
  const generation = ++state.events.generation;
  state.events.controller?.abort();
  let delay = 1000;
  while (generation === state.events.generation) {
    const controller = new AbortController();
    state.events.controller = controller;
    /** @type {number | undefined} */
    let watchdog;
    let connectedAt = 0;
    // keep-alive comments come every 15 s; silence for longer means a dead connection
    const arm = () => {
      window.clearTimeout(watchdog);
      watchdog = window.setTimeout(() => controller.abort(), 45_000);
    };
    try {
      setLive('connecting', 'connecting…');
      arm();
      const res = await fetch('/events', { headers: authHeaders({ accept: 'text/event-stream' }), signal: controller.signal, cache: 'no-store' });
      if (res.status === 401) {
        window.clearTimeout(watchdog);
        setLive('token', 'live updates need a token');
        showTokenForm(state.token ? 'The token was refused; enter a valid read token.' : 'Enter a read token to see the data.');
        return; // restarted when a token is entered
      }
      if (!res.ok || !res.body) throw new Error(`events answered ${res.status}`);
      setLive('live', 'live');
      connectedAt = Date.now();
      if (state.events.connectedOnce) void reload(); // catch up on anything missed while away
      state.events.connectedOnce = true;
      await readEvents(res.body, arm, (type, text) => onEvent(type, text, reload));
    } catch {
      /* reconnect below */
    } finally {
      window.clearTimeout(watchdog);
    }
    if (generation !== state.events.generation) return;
    // back to a short wait only after a connection that held; one that drops at once keeps backing off
    if (connectedAt && Date.now() - connectedAt > 10_000) delay = 1000;
    const wait = delay + Math.round(Math.random() * 300);
    setLive('waiting', `reconnecting in ${Math.round(wait / 1000)} s`);
    await new Promise((r) => window.setTimeout(r, wait));
    delay = Math.min(delay * 2, 30_000);
  }
}

/**
 * Minimal text/event-stream parser (WHATWG HTML, server-sent events): fields per line, blank line dispatches.
 * @param {ReadableStream<BufferSource>} body
 * @param {() => void} onBytes
 * @param {(type: string, data: string) => void} dispatch
 */
async function readEvents(body, onBytes, dispatch) {
  const reader = body.pipeThrough(new TextDecoderStream()).getReader();
  let buffer = '';
  let type = '';
  /** @type {string[]} */
  let data = [];
  for (;;) {
    const { value, done } = await reader.read();
    if (done) return;
    onBytes();
    buffer += value;
    for (;;) {
      const m = /\r\n|\r|\n/.exec(buffer);
      if (!m) break;
      if (m[0] === '\r' && m.index === buffer.length - 1) break; // a \n may follow in the next chunk
      const line = buffer.slice(0, m.index);
      buffer = buffer.slice(m.index + m[0].length);
      if (line === '') {
        if (data.length) dispatch(type || 'message', data.join('\n'));
        type = '';
        data = [];
        continue;
      }
      if (line.startsWith(':')) continue;
      const colon = line.indexOf(':');
      const field = colon < 0 ? line : line.slice(0, colon);
      let val = colon < 0 ? '' : line.slice(colon + 1);
      if (val.startsWith(' ')) val = val.slice(1);
      if (field === 'event') type = val;
      else if (field === 'data') data.push(val);
    }
  }
}

/**
 * @param {string} type
 * @param {string} text
 * @param {() => unknown} reload
 */
function onEvent(type, text, reload) {
  if (type !== 'forecast') return;
  /** @type {{ gaugeId?: string, issueTime?: string }} */
  let ev;
  try {
    ev = JSON.parse(text);
  } catch {
    return;
  }
  if (state.view.kind === 'overview') {
    announce(`New forecast for ${ev.gaugeId} issued ${fmtTime(ev.issueTime)}.`);
    void reload();
  } else if (ev.gaugeId === state.view.id) {
    announce(`New forecast issued ${fmtTime(ev.issueTime)}.`);
    void reload();
  }
}

