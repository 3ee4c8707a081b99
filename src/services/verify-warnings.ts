// Use case: verify the warnings of stored runs. Fed the same pages of runs as the flow
// verification (verify-runs.ts), it scores the probabilities as issued — per threshold at each
// lead time and at any time in the horizon — against the observations, with the references known
// at issue time (seasonal climatology of the observations before the first verified issue,
// persistence) and the climatological rates of the active model's fitting period (core
// createWarningVerification).
import {
  createWarningVerification,
  persistenceValue,
  warningReferences,
  warningRunFromStored,
  type WarningReport,
  type WarningVerification,
} from '../core/verification/index.ts';
import { readObservations } from '../store/archive-repo.ts';
import type { Queryable } from '../store/db.ts';
import type { Gauge } from '../store/gauges-repo.ts';
import { getActiveModelVersion } from '../store/models-repo.ts';
import { rfc3339Ms } from '../core/rfc3339.ts';

/** What the warning verification reads of one stored run. */
export interface StoredRunWarnings {
  issueMs: number;
  status: 'corrected' | 'degraded';
  validTimes: string[];
  raw: { values: number[] }[];
  corrected: { values: number[] }[] | null;
  percentiles: number[][];
  /** The run's thresholds as issued (exceedance per lead and any time), in the gauge's order. */
  issued: { label: string; value: number; exceedance: number[]; anyTime: number }[] | null;
}

export interface WarningSettings {
  attentionLevel: number;
  /** Issue-time window start, when the request gives one (the climatology stops there). */
  fromMs?: number;
  /** Lead indices kept for the lead-time scores. */
  leadRange?: { min?: number; max?: number } | null;
  replicates?: number;
}

export interface StoredWarnings {
  addRun(r: StoredRunWarnings): void;
  result(): { report: WarningReport | null; references: { climatology: string; rates: string | null }; skipped: { degraded: number; thresholdsChanged: number } };
}

const WINDOW_DAYS = 15;

/** A version's stored period ({from, to} RFC 3339), or null. */
function period(p: unknown): { fromMs: number; toMs: number } | null {
  const v = p as { from?: unknown; to?: unknown } | null | undefined;
  if (!v || typeof v.from !== 'string' || typeof v.to !== 'string') return null;
  const fromMs = rfc3339Ms(v.from);
  const toMs = rfc3339Ms(v.to);
  return Number.isFinite(fromMs) && Number.isFinite(toMs) ? { fromMs, toMs } : null;
}

/**
 * Reads the gauge's observations once (climatology, persistence, outcomes and the fitting
 * period's rates all come from them) and returns a sink for the runs, in issue order.
 * Degraded runs have no corrected members and are left out, as in the flow comparison; runs
 * issued with other thresholds than the gauge's present ones are left out too.
 */
export async function startStoredWarnings(db: Queryable, gauge: Gauge, s: WarningSettings): Promise<StoredWarnings> {
  const obs = await readObservations(db, gauge.id, {});
  const times = new Float64Array(obs.length);
  const values = new Float64Array(obs.length);
  const byTime = new Map<number, number>();
  obs.forEach((o, i) => {
    times[i] = o.t;
    values[i] = o.value === null ? NaN : o.value;
    if (o.value !== null) byTime.set(o.t, o.value);
  });
  const active = await getActiveModelVersion(db, gauge.id);
  const fitting = period(active?.periods?.calibration);
  const stepMs = gauge.stepSeconds * 1000;
  const key = (ts: readonly { label: string; value: number }[]) => ts.map((t) => `${t.label}=${t.value}`).join('\u0000');
  const labels = key(gauge.thresholds);
  let core: WarningVerification | null = null;
  let refsText = { climatology: 'none', rates: null as string | null };
  const skipped = { degraded: 0, thresholdsChanged: 0 };
  let horizon = 0;
  const pending: StoredRunWarnings[] = [];

  // The horizon sets the any-time rate's window and the bootstrap block: taken from the first page.
  const begin = () => {
    const first = pending[0];
    const cutoffMs = s.fromMs ?? first.issueMs;
    const refs = warningReferences(times, values, {
      cutoffMs,
      fitting,
      thresholds: gauge.thresholds.map((t) => t.value),
      horizon: Math.max(1, horizon),
      stepMs,
      windowDays: WINDOW_DAYS,
    });
    refsText = {
      climatology: refs.climatology
        ? `observations within ±${WINDOW_DAYS} days of the valid time's day of the year, from ${refs.climatology.size} observations before ${new Date(cutoffMs).toISOString()}`
        : 'none (no observations before the first verified issue)',
      rates: refs.ratesFrom,
    };
    core = createWarningVerification({
      sources: ['raw', 'corrected', 'stochastic'],
      thresholds: gauge.thresholds,
      attentionLevel: s.attentionLevel,
      climatology: refs.climatology,
      climatologicalRates: refs.climatologicalRates,
      leadRange: s.leadRange,
      stepMs,
      replicates: s.replicates,
    });
  };

  const feed = (r: StoredRunWarnings) => {
    const issued = r.issued!;
    const run = warningRunFromStored(
      {
        issueMs: r.issueMs,
        validMs: r.validTimes.map((v) => rfc3339Ms(v)),
        raw: r.raw,
        corrected: r.corrected!,
        percentiles: r.percentiles,
        thresholds: issued,
      },
      (t) => byTime.get(t) ?? NaN,
      // Persistence: the observation at issue time, or one at most two steps older.
      persistenceValue(times, values, r.issueMs, 2 * stepMs),
    );
    core!.addRun(run);
  };

  return {
    addRun(r) {
      if (r.status === 'degraded' || !r.corrected) {
        skipped.degraded++;
        return;
      }
      if (!r.issued || key(r.issued) !== labels) {
        skipped.thresholdsChanged++;
        return;
      }
      if (!core) {
        pending.push(r);
        horizon = Math.max(horizon, r.validTimes.length);
        if (pending.length < 50) return;
        begin();
        for (const p of pending.splice(0)) feed(p);
        return;
      }
      feed(r);
    },
    result() {
      if (!core && pending.length) {
        begin();
        for (const p of pending.splice(0)) feed(p);
      }
      return { report: core ? (core as WarningVerification).result() : null, references: refsText, skipped };
    },
  };
}
