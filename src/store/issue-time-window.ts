/**
 * The SQL condition for issue times in [fromMs, toMs) (either end optional), its values appended to
 * `params` as epoch seconds: ` and issue_time >= to_timestamp($n) …`, or '' for no bound.
 */
export function issueTimeWindow(params: unknown[], fromMs?: number, toMs?: number): string {
  let where = '';
  if (fromMs !== undefined) {
    params.push(fromMs / 1000);
    where += ` and issue_time >= to_timestamp($${params.length})`;
  }
  if (toMs !== undefined) {
    params.push(toMs / 1000);
    where += ` and issue_time < to_timestamp($${params.length})`;
  }
  return where;
}
