/**
 * Fixed-length ISO 8601 durations (PnDTnHnMnS and PnW). Years and months have no fixed length,
 * so they are refused: a gauge's step and a lead time must be an exact number of seconds.
 */
const PATTERN = /^P(?:(\d+)W|(?:(\d+)D)?(?:T(?:(\d+)H)?(?:(\d+)M)?(?:(\d+(?:\.\d+)?)S)?)?)$/;

export function parseDurationSeconds(text: string): number | null {
  const m = PATTERN.exec(text);
  if (!m || text === 'P' || text.endsWith('T')) return null;
  const [, w, d, h, min, s] = m;
  const seconds =
    Number(w ?? 0) * 604800 + Number(d ?? 0) * 86400 + Number(h ?? 0) * 3600 + Number(min ?? 0) * 60 + Number(s ?? 0);
  return seconds > 0 ? seconds : null;
}

/** The shortest plain form: whole days as PnD, otherwise PTnHnMnS. */
export function formatDurationSeconds(seconds: number): string {
  if (seconds === 0) return 'PT0S';
  const sign = seconds < 0 ? '-' : '';
  let rest = Math.abs(seconds);
  const days = Math.floor(rest / 86400);
  rest -= days * 86400;
  const hours = Math.floor(rest / 3600);
  rest -= hours * 3600;
  const minutes = Math.floor(rest / 60);
  rest -= minutes * 60;
  let out = `${sign}P${days ? `${days}D` : ''}`;
  if (hours || minutes || rest) {
    out += `T${hours ? `${hours}H` : ''}${minutes ? `${minutes}M` : ''}${rest ? `${rest}S` : ''}`;
  }
  return out;
}
