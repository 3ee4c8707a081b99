// @ts-check
// Live updates of the forecast page: the /events stream through EventSource, opened with a
// single-use stream ticket (EventSource cannot send the Authorization header, and the read token
// must not go into a URL), resumed after the last event seen, and a reload when a new forecast is
// for the view shown.
import { fmtTime } from './format.js';
import { announce, setLive, showTokenForm } from './notices.js';
import { state } from './page-state.js';
import { authHeaders } from './service-requests.js';

/**
 * Follows /events and reloads the view when a forecast for it arrives. Each connection takes a
 * fresh ticket from POST /stream-tickets (a ticket opens one stream), so reconnection is done
 * here, with back-off, rather than by EventSource itself; it resumes after the last event id, so
 * the service replays the runs stored meanwhile. Calling it again replaces the connection (for
 * example after a new token).
 * @param {() => unknown} reload
 */
export async function followEvents(reload) {
  const generation = ++state.events.generation;
  state.events.stop?.();
  let delay = 1000;
  while (generation === state.events.generation) {
    let connectedAt = 0;
    setLive('connecting', 'connecting…');
    try {
      const res = await fetch('/stream-tickets', { method: 'POST', headers: authHeaders({ accept: 'application/json' }), cache: 'no-store' });
      if (res.status === 401) {
        setLive('token', 'live updates need a token');
        showTokenForm(state.token ? 'The token was refused; enter a valid read token.' : 'Enter a read token to see the data.');
        return; // restarted when a token is entered
      }
      if (!res.ok) throw new Error(`stream ticket answered ${res.status}`);
      /** @type {{ ticket: string }} */
      const { ticket } = await res.json();
      if (generation !== state.events.generation) return;
      const resume = state.events.lastEventId;
      const url = `/events?ticket=${encodeURIComponent(ticket)}${resume ? `&lastEventId=${encodeURIComponent(resume)}` : ''}`;
      await new Promise((done) => {
        const source = new EventSource(url);
        state.events.stop = () => {
          source.close();
          done(undefined);
        };
        source.addEventListener('open', () => {
          setLive('live', 'live');
          connectedAt = Date.now();
        });
        source.addEventListener('ready', (ev) => {
          // Without an id to resume from, something may have been missed while away: load again.
          if (state.events.connectedOnce && !resume) void reload();
          state.events.connectedOnce = true;
          state.events.lastEventId = ev.lastEventId;
        });
        source.addEventListener('forecast', (ev) => {
          state.events.connectedOnce = true;
          state.events.lastEventId = ev.lastEventId;
          onForecast(ev.data, reload);
        });
        source.addEventListener('resync', (ev) => {
          state.events.lastEventId = ev.lastEventId;
          void reload();
        });
        // The ticket is used up, so EventSource's own reconnection would be refused: start over.
        source.addEventListener('error', () => {
          source.close();
          done(undefined);
        });
      });
    } catch {
      /* reconnect below */
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
 * @param {string} text
 * @param {() => unknown} reload
 */
function onForecast(text, reload) {
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
