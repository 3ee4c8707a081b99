import { ErrorList } from '../services/problem.ts';

export interface CsvTable {
  header: string[];
  /** Data rows with their 1-based line numbers in the body. */
  rows: { line: number; cells: string[] }[];
}

/**
 * A small RFC 4180 reader: comma separated, optional double quotes with "" escapes, CRLF or LF.
 * Blank lines and lines starting with # are skipped. A row with the wrong number of cells, or a quote
 * left open, is reported with its line number.
 */
export function parseCsv(text: string, errors: ErrorList): CsvTable {
  const lines = text.replace(/^\uFEFF/, '').split(/\r?\n/);
  let header: string[] | null = null;
  const rows: CsvTable['rows'] = [];
  for (let i = 0; i < lines.length; i++) {
    const raw = lines[i];
    if (raw.trim() === '' || raw.startsWith('#')) continue;
    const cells = splitLine(raw);
    const line = i + 1;
    if (cells === null) {
      errors.add(`line ${line}`, 'unbalanced double quote');
      continue;
    }
    if (!header) {
      header = cells.map((c) => c.trim());
      continue;
    }
    if (cells.length !== header.length) {
      errors.add(`line ${line}`, `expected ${header.length} cells as in the header, found ${cells.length}`);
      if (errors.full) break;
      continue;
    }
    rows.push({ line, cells });
  }
  if (!header) errors.add('line 1', 'the CSV body has no header line');
  return { header: header ?? [], rows };
}

function splitLine(line: string): string[] | null {
  if (!line.includes('"')) return line.split(',');
  const out: string[] = [];
  let cur = '';
  let quoted = false;
  for (let i = 0; i < line.length; i++) {
    const c = line[i];
    if (quoted) {
      if (c === '"' && line[i + 1] === '"') {
        cur += '"';
        i++;
      } else if (c === '"') quoted = false;
      else cur += c;
    } else if (c === '"') quoted = true;
    else if (c === ',') {
      out.push(cur);
      cur = '';
    } else cur += c;
  }
  if (quoted) return null;
  out.push(cur);
  return out;
}

/** A header cell `name (unit)` split into its parts; the unit is null when absent. */
export function splitHeader(cell: string): { name: string; unit: string | null } {
  const m = /^(.*?)\s*\(([^()]*)\)$/.exec(cell.trim());
  return m ? { name: m[1].trim(), unit: m[2].trim() } : { name: cell.trim(), unit: null };
}

/** Quotes a cell only when it must be (one definition, shared with the services' CSV writers). */
export { csvCell } from '../services/forecast-view.ts';
