import type { Queryable } from './db.ts';
import { DriftBasis, JsonObject, Reasons } from './json-columns.ts';

export type DriftState = 'ok' | 'drifting' | 'insufficient-data';

/** A gauge's latest drift status, as the drift watch stored it. */
export interface GaugeStatusRecord {
  gaugeId: string;
  status: DriftState;
  /** The model version whose validation level the window was held to (null: none active). */
  modelVersionId: string | null;
  reasons: string[];
  evidence: Record<string, unknown>;
  computedAt: string;
}

interface StatusRow {
  gauge_id: string;
  status: DriftState;
  version_id: string | null;
  reasons: unknown;
  evidence: unknown;
  computed_at: Date;
}

const fromRow = (r: StatusRow): GaugeStatusRecord => ({
  gaugeId: r.gauge_id,
  status: r.status,
  modelVersionId: r.version_id,
  reasons: Reasons.parse(r.reasons),
  evidence: JsonObject.parse(r.evidence),
  computedAt: r.computed_at.toISOString(),
});

const STATUS_COLUMNS = 'gauge_id, status, version_id::text as version_id, reasons, evidence, computed_at';

export async function saveGaugeStatus(db: Queryable, s: Omit<GaugeStatusRecord, 'computedAt'>): Promise<void> {
  await db.query(
    `insert into gauge_status (gauge_id, status, version_id, reasons, evidence, computed_at)
     select $1, $2, $3, $4::jsonb, $5::jsonb, now() where exists (select 1 from gauges where id = $1)
     on conflict (gauge_id) do update set status = excluded.status, version_id = excluded.version_id,
       reasons = excluded.reasons, evidence = excluded.evidence, computed_at = excluded.computed_at`,
    [s.gaugeId, s.status, s.modelVersionId, JSON.stringify(s.reasons), JSON.stringify(s.evidence)],
  );
}

export async function getGaugeStatus(db: Queryable, gaugeId: string): Promise<GaugeStatusRecord | null> {
  const { rows } = await db.query<StatusRow>(`select ${STATUS_COLUMNS} from gauge_status where gauge_id = $1`, [gaugeId]);
  return rows[0] ? fromRow(rows[0]) : null;
}

export async function listGaugeStatuses(db: Queryable): Promise<Map<string, GaugeStatusRecord>> {
  const { rows } = await db.query<StatusRow>(`select ${STATUS_COLUMNS} from gauge_status`);
  return new Map(rows.map((r) => [r.gauge_id, fromRow(r)]));
}

/** The level a model version is held to: its stochastic stage's scores on a validation hindcast. */
export interface DriftReferenceRecord {
  versionId: string;
  gaugeId: string;
  coverage90: number;
  crps: number;
  basis: { jobId: string; mode: 'simulation' | 'reforecast'; period: { from: string; to: string }; cases: number };
  createdAt: string;
}

export async function getDriftReference(db: Queryable, versionId: string): Promise<DriftReferenceRecord | null> {
  const { rows } = await db.query<{ version_id: string; gauge_id: string; coverage90: number; crps: number; basis: unknown; created_at: Date }>(
    'select version_id::text as version_id, gauge_id, coverage90, crps, basis, created_at from drift_references where version_id = $1',
    [versionId],
  );
  const r = rows[0];
  return r ? { versionId: r.version_id, gaugeId: r.gauge_id, coverage90: r.coverage90, crps: r.crps, basis: DriftBasis.parse(r.basis), createdAt: r.created_at.toISOString() } : null;
}

/** Stores (or replaces) a version's reference level. */
export async function saveDriftReference(db: Queryable, r: Omit<DriftReferenceRecord, 'createdAt'>): Promise<void> {
  await db.query(
    `insert into drift_references (version_id, gauge_id, coverage90, crps, basis) values ($1, $2, $3, $4, $5::jsonb)
     on conflict (version_id) do update set coverage90 = excluded.coverage90, crps = excluded.crps, basis = excluded.basis, created_at = now()`,
    [r.versionId, r.gaugeId, r.coverage90, r.crps, JSON.stringify(r.basis)],
  );
}

/** The newest hindcast job started to measure a version's reference level, if any. */
export async function referenceJob(db: Queryable, gaugeId: string, versionId: string): Promise<{ id: string; status: string } | null> {
  const { rows } = await db.query<{ id: string; status: string }>(
    `select id::text as id, status from jobs where kind = 'hindcast' and gauge_id = $1
       and params->>'purpose' = 'drift-reference' and params->>'versionId' = $2 order by id desc limit 1`,
    [gaugeId, versionId],
  );
  return rows[0] ?? null;
}
