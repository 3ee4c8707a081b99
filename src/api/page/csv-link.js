// @ts-check
// The "CSV" links beside the page's tables.
import { h } from './dom.js';
import { announce } from './notices.js';
import { downloadCsv } from './service-requests.js';

/**
 * A "CSV" link beside a table: its address is the service's CSV read (for curl); a click fetches
 * it with the read token in the header and saves it.
 * @param {string} url
 * @param {string} filename
 * @param {string} forId  the table it belongs to
 */
export function csvLink(url, filename, forId) {
  const a = h('a', { class: 'csv', href: url, download: filename, 'data-for': forId, title: 'Download these numbers as CSV (the caution travels with them)' }, 'CSV');
  a.addEventListener('click', (ev) => {
    ev.preventDefault();
    downloadCsv(url, filename).catch((err) => announce(`The CSV could not be downloaded: ${err instanceof Error ? err.message : String(err)}`));
  });
  return a;
}

