// @ts-check
// Formatting of the forecast page: what a reader sees, numbers always as real text.

const MONTHS = ['Jan', 'Feb', 'Mar', 'Apr', 'May', 'Jun', 'Jul', 'Aug', 'Sep', 'Oct', 'Nov', 'Dec'];
export const UNIT = 'm³/s';

/**
 * A number that can be shown or drawn (not null, undefined, NaN or infinite).
 * @param {unknown} v
 * @returns {v is number}
 */
export const finite = (v) => typeof v === 'number' && Number.isFinite(v);

/** @param {number | null | undefined} v */
export function fmtFlow(v) {
  if (!finite(v)) return '–';
  const a = Math.abs(v);
  return v.toFixed(a >= 100 ? 0 : a >= 10 ? 1 : 2);
}

/**
 * Threshold levels are set by people: show them as given (up to 6 significant digits).
 * @param {number | null | undefined} v
 */
export function fmtLevel(v) {
  if (!finite(v)) return '–';
  return String(Number(v.toPrecision(6)));
}

/**
 * Axis ticks: as many decimals as the tick step needs.
 * @param {number} v
 * @param {number} step
 */
export function fmtTick(v, step) {
  return v.toFixed(Math.max(0, -Math.floor(Math.log10(step) + 1e-9)));
}

/** @param {number | null | undefined} p */
export function fmtProb(p) {
  if (!finite(p)) return '–';
  if (p > 0 && p < 0.01) return '<1\u00a0%';
  if (p < 1 && p > 0.99) return '>99\u00a0%';
  return `${Math.round(p * 100)}\u00a0%`;
}

/** @param {number} n */
const pad2 = (n) => String(n).padStart(2, '0');

/** @type {Map<string, Intl.DateTimeFormat | null>} */
const zoneFormats = new Map();

/**
 * The wall-clock parts of an instant in an IANA time zone (null for UTC or an unknown zone: the
 * callers then show UTC).
 * @param {number} ms
 * @param {string} zone
 */
function zoneParts(ms, zone) {
  if (zone === 'UTC') return null;
  let format = zoneFormats.get(zone);
  if (format === undefined) {
    try {
      format = new Intl.DateTimeFormat('en-GB', { timeZone: zone, year: 'numeric', month: 'numeric', day: 'numeric', hour: '2-digit', minute: '2-digit', hourCycle: 'h23', timeZoneName: 'short' });
    } catch {
      format = null;
    }
    zoneFormats.set(zone, format);
  }
  if (!format) return null;
  /** @type {Record<string, string>} */
  const p = {};
  for (const part of format.formatToParts(new Date(ms))) p[part.type] = part.value;
  return { day: Number(p.day), month: Number(p.month) - 1, year: p.year, clock: `${p.hour}:${p.minute}`, zone: p.timeZoneName };
}

/**
 * Date, clock time and zone: in the gauge's time zone when given, else UTC.
 * @param {string | null | undefined} iso
 * @param {string} [zone]
 */
export function fmtTime(iso, zone = 'UTC') {
  if (!iso) return '–';
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  const z = zoneParts(d.getTime(), zone);
  if (z) return `${z.day} ${MONTHS[z.month]} ${z.year} ${z.clock} ${z.zone}`;
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]} ${d.getUTCFullYear()} ${pad2(d.getUTCHours())}:${pad2(d.getUTCMinutes())} UTC`;
}

/**
 * Day, month and clock time without year and zone, for table rows under a heading naming the zone.
 * @param {string} iso
 * @param {string} [zone]
 */
export function fmtShort(iso, zone = 'UTC') {
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso ?? '–';
  const z = zoneParts(d.getTime(), zone);
  if (z) return `${z.day} ${MONTHS[z.month]} ${z.clock}`;
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]} ${pad2(d.getUTCHours())}:${pad2(d.getUTCMinutes())}`;
}

/** @param {number} ms */
export function fmtDay(ms) {
  const d = new Date(ms);
  return `${d.getUTCDate()} ${MONTHS[d.getUTCMonth()]}`;
}

/** @param {number} ms */
export function fmtClock(ms) {
  const d = new Date(ms);
  return `${pad2(d.getUTCHours())}:${pad2(d.getUTCMinutes())}`;
}

/**
 * ISO 8601 duration (P1D, PT6H, P1DT12H, PT30M) to seconds; NaN when not understood.
 * @param {string | null | undefined} text
 */
export function durationSeconds(text) {
  const m = /^P(?:(\d+)W)?(?:(\d+)D)?(?:T(?:(\d+)H)?(?:(\d+)M)?(?:(\d+(?:\.\d+)?)S)?)?$/.exec(text ?? '');
  if (!m || text === 'P' || m[0].endsWith('T')) return NaN;
  const [, w, d, hh, mm, ss] = m.map((x) => (x === undefined ? 0 : Number(x)));
  return (((w * 7 + d) * 24 + hh) * 60 + mm) * 60 + ss;
}

/** @param {string} text */
export function fmtLead(text) {
  const sec = durationSeconds(text);
  if (!Number.isFinite(sec)) return text;
  const d = Math.floor(sec / 86400);
  const hrs = Math.floor((sec % 86400) / 3600);
  const min = Math.round((sec % 3600) / 60);
  const parts = [];
  if (d) parts.push(`${d}\u00a0d`);
  if (hrs) parts.push(`${hrs}\u00a0h`);
  if (min) parts.push(`${min}\u00a0min`);
  return parts.join(' ') || '0\u00a0h';
}

/** @type {Record<string, string>} */
const STATUS_TEXT = {
  ok: 'ok',
  drifting: 'drifting',
  'no-forecast': 'no forecast',
  'insufficient-data': 'insufficient data',
  corrected: 'corrected',
  degraded: 'degraded',
};

/** What each drift status means and what to do about it (the badge's tooltip and note). */
/** @type {Record<string, string>} */
const STATUS_MEANING = {
  ok: 'Recent forecasts, checked against the observations since, verify about as well as when the model was fitted. Nothing to do.',
  drifting:
    'Recent forecasts verify worse than when the model was fitted (bias, spread or skill moved away from the fitting level). Check the verification on the gauge page and consider refitting the model; until then read the probabilities with extra care.',
  'insufficient-data': 'Too few recent forecasts have observations yet to tell whether they verify as well as when the model was fitted. Keep posting observations.',
  'no-forecast': 'No forecast is stored for this gauge yet, so there is nothing to verify.',
};

/** @param {string | null | undefined} s */
export const statusMeaning = (s) => (s ? STATUS_MEANING[s] : undefined) ?? '';

/** @param {string | null | undefined} s */
export const statusText = (s) => (s ? STATUS_TEXT[s] : undefined) ?? String(s ?? 'unknown');
