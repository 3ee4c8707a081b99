// @ts-check
// Requests of the forecast page to the service: the read token and JSON reads.
import { state } from './page-state.js';

const TOKEN_KEY = 'forecast-page.token';

/** The tab's sessionStorage, or null where storage is blocked (the token then lives for this page only). */
export function storage() {
  try {
    return window.sessionStorage;
  } catch {
    return null;
  }
}

/** @param {string} token */
export function keepToken(token) {
  storage()?.setItem(TOKEN_KEY, token);
}

/**
 * Takes `#token=…` out of the address bar into sessionStorage (the fragment never reaches the server).
 * @returns {string | null}
 */
export function takeToken() {
  const params = new URLSearchParams(location.hash.slice(1));
  const fromUrl = params.get('token');
  if (fromUrl) {
    keepToken(fromUrl);
    params.delete('token');
    const rest = params.toString();
    history.replaceState(history.state, '', location.pathname + location.search + (rest ? `#${rest}` : ''));
    return fromUrl;
  }
  return storage()?.getItem(TOKEN_KEY) ?? null;
}

/**
 * @param {Record<string, string>} extra
 * @returns {Record<string, string>}
 */
export function authHeaders(extra) {
  const headers = { ...extra };
  if (state.token) headers.authorization = `Bearer ${state.token}`;
  return headers;
}

/** A refused request: its HTTP status and the problem's detail. */
export class HttpError extends Error {
  /**
   * @param {number} status
   * @param {string} detail
   */
  constructor(status, detail) {
    super(detail);
    this.status = status;
  }
}

/**
 * @param {string} url
 * @returns {Promise<any>} the parsed JSON (its shape is the caller's to know)
 */
export async function getJson(url) {
  // no-cache: the browser revalidates with the stored ETag, so unchanged data costs a 304.
  const res = await fetch(url, { headers: authHeaders({ accept: 'application/json' }), cache: 'no-cache' });
  if (!res.ok) {
    let detail = res.statusText;
    try {
      const body = await res.json();
      detail = body.detail ?? body.title ?? detail;
    } catch {
      /* not problem+json */
    }
    throw new HttpError(res.status, detail);
  }
  return res.json();
}

/**
 * Downloads a CSV answer of the service with the read token in the header (a plain link could not
 * send it, and the token must not go into the address) and saves it under `filename`.
 * @param {string} url
 * @param {string} filename
 */
export async function downloadCsv(url, filename) {
  const res = await fetch(url, { headers: authHeaders({ accept: 'text/csv' }), cache: 'no-store' });
  if (!res.ok) throw new HttpError(res.status, res.statusText);
  const href = URL.createObjectURL(await res.blob());
  const a = document.createElement('a');
  a.href = href;
  a.download = filename;
  document.body.append(a);
  a.click();
  a.remove();
  window.setTimeout(() => URL.revokeObjectURL(href), 10_000);
}
