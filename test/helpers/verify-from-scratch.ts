// The verification of stored runs computed from scratch, as the service did before runs kept
// verification records: every run's JSON answer read and parsed again, its members sorted again,
// and the core comparison and warning verification fed directly. The record path
// (src/services/verify-runs.ts) must give the same answer; test/api/verification-records.test.ts
// compares the two.
import { updatingSplit } from '../../src/core/correction/updating-split.ts';
import { rfc3339Ms } from '../../src/core/rfc3339.ts';
import {
  adviseStochasticStage,
  createComparison,
  createWarningVerification,
  midpointProbs,
  persistenceValue,
  warningReferences,
  warningRunFromStored,
  type WarningVerification,
} from '../../src/core/verification/index.ts';
import { withLeadTimes } from '../../src/services/verify-runs.ts';
import { readObservations } from '../../src/store/archive-repo.ts';
import type { Queryable } from '../../src/store/db.ts';
import type { Gauge } from '../../src/store/gauges-repo.ts';
import { getActiveModelVersion } from '../../src/store/models-repo.ts';
import { readRunsForVerification, type RunForVerification } from '../../src/store/verification-repo.ts';

export async function verifyFromScratch(db: Queryable, gauge: Gauge, q: { fromMs?: number; toMs?: number; minLead?: number; maxLead?: number; source?: string; attentionLevel?: number }) {
  const leadRange = q.minLead !== undefined || q.maxLead !== undefined ? { min: q.minLead !== undefined ? q.minLead - 1 : undefined, max: q.maxLead !== undefined ? q.maxLead - 1 : undefined } : null;
  const all = await readObservations(db, gauge.id, {});
  const times = Float64Array.from(all, (o) => o.t);
  const values = Float64Array.from(all, (o) => (o.value === null ? NaN : o.value));
  const byTime = new Map<number, number>();
  all.forEach((o) => o.value !== null && byTime.set(o.t, o.value));
  const active = await getActiveModelVersion(db, gauge.id);
  const cal = active?.periods?.calibration as { from?: string; to?: string } | undefined;
  const fitting = cal && typeof cal.from === 'string' && typeof cal.to === 'string' ? { fromMs: rfc3339Ms(cal.from), toMs: rfc3339Ms(cal.to) } : null;
  const stepMs = gauge.stepSeconds * 1000;
  const labels = (ts: readonly { label: string; value: number }[]) => ts.map((t) => `${t.label}=${t.value}`).join('|');
  const comparison = createComparison({ seed: 1, thresholds: gauge.thresholds.map((t) => t.value), leadRange, includeStochastic: true });
  const minK = (q.minLead ?? 1) - 1;
  const maxK = (q.maxLead ?? Infinity) - 1;
  const split = updatingSplit();
  let anyUpdated = false;
  let degradedCases = 0;
  const runs = { total: 0, verified: 0, corrected: 0, degraded: 0 };
  // Warnings: the first 50 usable runs set the horizon, then the references and the core are made.
  let core: WarningVerification | null = null;
  const pending: RunForVerification[] = [];
  const skipped = { degraded: 0, thresholdsChanged: 0 };
  const begin = () => {
    const refs = warningReferences(times, values, {
      cutoffMs: q.fromMs ?? pending[0].issueMs,
      fitting,
      thresholds: gauge.thresholds.map((t) => t.value),
      horizon: Math.max(1, ...pending.map((r) => r.validTimes.length)),
      stepMs,
      windowDays: 15,
    });
    core = createWarningVerification({
      sources: ['raw', 'corrected', 'stochastic'],
      thresholds: gauge.thresholds,
      attentionLevel: q.attentionLevel ?? 0.3,
      climatology: refs.climatology,
      climatologicalRates: refs.climatologicalRates,
      leadRange,
      stepMs,
    });
  };
  const feed = (r: RunForVerification) =>
    core!.addRun(
      warningRunFromStored(
        { issueMs: r.issueMs, validMs: r.validTimes.map((v) => rfc3339Ms(v)), raw: r.raw, corrected: r.corrected!, percentiles: r.percentiles, thresholds: r.issued! },
        (t) => byTime.get(t) ?? NaN,
        persistenceValue(times, values, r.issueMs, 2 * stepMs),
      ),
    );
  let after: { issueMs: number; id: string } | undefined;
  for (;;) {
    const page = await readRunsForVerification(db, { gaugeId: gauge.id, fromMs: q.fromMs, toMs: q.toMs, source: q.source, after, limit: 500 });
    for (const r of page) {
      runs.total++;
      runs[r.status]++;
      let verified = false;
      if (r.status === 'corrected' && r.corrected) {
        split.addRun(r.updated);
        anyUpdated ||= r.updated;
      }
      r.validTimes.forEach((vt, k) => {
        const y = byTime.get(rfc3339Ms(vt));
        if (y === undefined) return;
        verified = true;
        if (r.status === 'degraded' || !r.corrected) {
          if (k >= minK && k <= maxK) degradedCases++;
          return;
        }
        const raw = r.raw.map((m) => m.values[k]);
        const cor = Float64Array.from(r.corrected, (m) => m.values[k] ?? NaN);
        const vals = r.percentiles[k] ?? [];
        comparison.add({ lead: k, observation: y, raw, corrected: cor, stochasticQuantiles: vals.length ? { probs: midpointProbs(vals.length), values: vals } : null });
        if (k >= minK && k <= maxK) split.addCase(r.updated, k, y, cor, vals.length ? vals : null);
      });
      if (verified) runs.verified++;
      if (r.status === 'degraded' || !r.corrected) skipped.degraded++;
      else if (!r.issued || labels(r.issued) !== labels(gauge.thresholds)) skipped.thresholdsChanged++;
      else if (core) feed(r);
      else {
        pending.push(r);
        if (pending.length >= 50) {
          begin();
          for (const p of pending.splice(0)) feed(p);
        }
      }
    }
    if (page.length < 500) break;
    after = { issueMs: page[page.length - 1].issueMs, id: page[page.length - 1].id };
  }
  if (!core && pending.length) {
    begin();
    for (const p of pending.splice(0)) feed(p);
  }
  const report = withLeadTimes(comparison.result(), gauge.stepSeconds);
  return {
    runs,
    degradedCases,
    comparison: report,
    advice: adviseStochasticStage(report),
    byUpdating: anyUpdated ? split.result() : null,
    warnings: core ? (core as WarningVerification).result() : null,
    skipped,
  };
}
