import type { z } from 'zod';
import type { Queryable } from './db.ts';
import { ArchiveSummary, JsonObject, VersionPeriods } from './json-columns.ts';

export interface ModelVersion {
  id: string;
  gaugeId: string;
  origin: 'fitted' | 'uploaded';
  label: string;
  featureSpec: unknown;
  trainer: z.output<typeof JsonObject>;
  periods: z.output<typeof VersionPeriods>;
  scores: z.output<typeof JsonObject>;
  createdBy: string | null;
  createdAt: string;
  active: boolean;
  activatedAt: string | null;
  parts: number;
  /** The issue-time updater (src/core/correction/updating.ts), or null when the version does not update. */
  updating: unknown;
}

interface Row {
  id: string | number;
  gauge_id: string;
  origin: 'fitted' | 'uploaded';
  label: string;
  feature_spec: unknown;
  trainer: unknown;
  periods: unknown;
  scores: unknown;
  created_by: string | null;
  created_at: Date;
  active: boolean;
  activated_at: Date | null;
  parts: number;
  updating?: unknown;
}

const fromRow = (r: Row): ModelVersion => ({
  id: String(r.id),
  gaugeId: r.gauge_id,
  origin: r.origin,
  label: r.label,
  featureSpec: r.feature_spec,
  trainer: JsonObject.parse(r.trainer),
  periods: VersionPeriods.parse(r.periods),
  scores: JsonObject.parse(r.scores),
  createdBy: r.created_by,
  createdAt: r.created_at.toISOString(),
  active: r.active,
  activatedAt: r.activated_at?.toISOString() ?? null,
  parts: Number(r.parts),
  updating: r.updating ?? null,
});

const SELECT = `select v.*, (select count(*)::int from model_parts p where p.version_id = v.id) as parts from model_versions v`;

export interface NewModelVersion {
  gaugeId: string;
  origin: 'fitted' | 'uploaded';
  label: string;
  featureSpec: unknown;
  trainer: Record<string, unknown>;
  periods: Record<string, unknown>;
  scores: Record<string, unknown>;
  createdBy: string | null;
  parts: Uint8Array[];
  correctedArchive: { bytes: Uint8Array; summary: Record<string, unknown> };
  rawArchive: { bytes: Uint8Array; summary: Record<string, unknown> } | null;
  /** Per-lead archives built from past runs (reforecasts), when there were enough. */
  perLeadArchives?: { corrected: { bytes: Uint8Array; summary: Record<string, unknown> }; raw: { bytes: Uint8Array; summary: Record<string, unknown> } | null } | null;
  /** The issue-time updater and its per-lead archive of updated-member errors. */
  updating?: { model: unknown; archive: { bytes: Uint8Array; summary: Record<string, unknown>; issueError?: Uint8Array | null } } | null;
}

export type LeadMode = 'lead-free' | 'per-lead' | 'updating';

/** Stores a version with its ONNX parts and error archives; call inside a transaction. */
export async function insertModelVersion(tx: Queryable, v: NewModelVersion): Promise<string> {
  const { rows } = await tx.query<{ id: string }>(
    `insert into model_versions (gauge_id, origin, label, feature_spec, trainer, periods, scores, created_by, updating)
     values ($1, $2, $3, $4::jsonb, $5::jsonb, $6::jsonb, $7::jsonb, $8, $9::jsonb) returning id::text as id`,
    [v.gaugeId, v.origin, v.label, JSON.stringify(v.featureSpec), JSON.stringify(v.trainer), JSON.stringify(v.periods), JSON.stringify(v.scores), v.createdBy, v.updating ? JSON.stringify(v.updating.model) : null],
  );
  const id = rows[0].id;
  for (let i = 0; i < v.parts.length; i++) {
    await tx.query('insert into model_parts (version_id, part, onnx) values ($1, $2, $3)', [id, i, Buffer.from(v.parts[i])]);
  }
  await insertArchive(tx, v.gaugeId, id, 'corrected', v.correctedArchive);
  if (v.rawArchive) await insertArchive(tx, v.gaugeId, id, 'raw', v.rawArchive);
  if (v.perLeadArchives) {
    await insertArchive(tx, v.gaugeId, id, 'corrected', v.perLeadArchives.corrected, 'per-lead');
    if (v.perLeadArchives.raw) await insertArchive(tx, v.gaugeId, id, 'raw', v.perLeadArchives.raw, 'per-lead');
  }
  if (v.updating) await insertArchive(tx, v.gaugeId, id, 'corrected', v.updating.archive, 'updating');
  return id;
}

export async function insertArchive(
  tx: Queryable,
  gaugeId: string,
  versionId: string | null,
  kind: 'corrected' | 'raw',
  a: { bytes: Uint8Array; summary: Record<string, unknown>; issueError?: Uint8Array | null },
  leadMode: LeadMode = 'lead-free',
): Promise<void> {
  await tx.query(
    `insert into error_archives (gauge_id, version_id, kind, lead_mode, cases, summary, bytes, issue_error) values ($1, $2, $3, $4, $5, $6::jsonb, $7, $8)`,
    [gaugeId, versionId, kind, leadMode, Number(a.summary.cases ?? 0), JSON.stringify(a.summary), Buffer.from(a.bytes), a.issueError ? Buffer.from(a.issueError) : null],
  );
}

/**
 * The issue-time error of each case of an 'updating' archive, aligned with its cases; null for
 * archives that do not keep it.
 */
export async function archiveIssueError(db: Queryable, id: string): Promise<Float64Array | null> {
  const { rows } = await db.query<{ issue_error: Uint8Array | null }>('select issue_error from error_archives where id = $1', [id]);
  const b = rows[0]?.issue_error;
  if (!b) return null;
  const copy = new Uint8Array(b);
  return new Float64Array(copy.buffer, copy.byteOffset, copy.byteLength / 8);
}

export async function listModelVersions(db: Queryable, gaugeId: string): Promise<ModelVersion[]> {
  return (await db.query<Row>(`${SELECT} where v.gauge_id = $1 order by v.id desc`, [gaugeId])).rows.map(fromRow);
}

export async function getModelVersion(db: Queryable, gaugeId: string, id: string): Promise<ModelVersion | null> {
  if (!/^\d{1,18}$/.test(id)) return null;
  const { rows } = await db.query<Row>(`${SELECT} where v.gauge_id = $1 and v.id = $2`, [gaugeId, id]);
  return rows[0] ? fromRow(rows[0]) : null;
}

export async function getActiveModelVersion(db: Queryable, gaugeId: string): Promise<ModelVersion | null> {
  const { rows } = await db.query<Row>(`${SELECT} where v.gauge_id = $1 and v.active`, [gaugeId]);
  return rows[0] ? fromRow(rows[0]) : null;
}

/** Makes one version the gauge's active one (the unique index allows one at a time). */
export async function activateModelVersion(tx: Queryable, gaugeId: string, id: string): Promise<void> {
  await tx.query('update model_versions set active = false where gauge_id = $1 and active', [gaugeId]);
  await tx.query('update model_versions set active = true, activated_at = now() where gauge_id = $1 and id = $2', [gaugeId, id]);
}

/** The version active before the current one (by activation time), for roll-back. */
export async function previousActivatedVersion(db: Queryable, gaugeId: string): Promise<string | null> {
  const { rows } = await db.query<{ id: string }>(
    `select id::text as id from model_versions where gauge_id = $1 and not active and activated_at is not null
     order by activated_at desc limit 1`,
    [gaugeId],
  );
  return rows[0]?.id ?? null;
}

export async function deactivateModels(tx: Queryable, gaugeId: string): Promise<void> {
  await tx.query('update model_versions set active = false where gauge_id = $1 and active', [gaugeId]);
}

export async function modelParts(db: Queryable, versionId: string): Promise<Uint8Array[]> {
  const { rows } = await db.query<{ onnx: Uint8Array }>('select onnx from model_parts where version_id = $1 order by part', [versionId]);
  return rows.map((r) => new Uint8Array(r.onnx));
}

export interface StoredArchive {
  id: string;
  versionId: string | null;
  kind: 'corrected' | 'raw';
  leadMode: LeadMode;
  summary: z.output<typeof ArchiveSummary>;
  bytes: Uint8Array;
}

interface ArchiveRow {
  id: string;
  version_id: string | null;
  kind: 'corrected' | 'raw';
  lead_mode: LeadMode;
  summary: unknown;
  bytes: Uint8Array;
}

const archiveFromRow = (r: ArchiveRow | undefined): StoredArchive | null =>
  r ? { id: r.id, versionId: r.version_id, kind: r.kind, leadMode: r.lead_mode, summary: ArchiveSummary.parse(r.summary), bytes: new Uint8Array(r.bytes) } : null;

const ARCHIVE_COLUMNS = 'id::text as id, version_id::text as version_id, kind, lead_mode, summary, bytes';

/** A version's newest archive of a kind and lead mode (lead-free unless asked). */
export async function versionArchive(db: Queryable, versionId: string, kind: 'corrected' | 'raw', leadMode: LeadMode = 'lead-free'): Promise<StoredArchive | null> {
  const { rows } = await db.query<ArchiveRow>(
    `select ${ARCHIVE_COLUMNS} from error_archives where version_id = $1 and kind = $2 and lead_mode = $3 order by id desc limit 1`,
    [versionId, kind, leadMode],
  );
  return archiveFromRow(rows[0]);
}

/** The newest raw-member archive of a gauge in a lead mode (from any fit, upload or a raw-archive job). */
export async function latestRawArchive(db: Queryable, gaugeId: string, leadMode: LeadMode = 'lead-free'): Promise<StoredArchive | null> {
  const { rows } = await db.query<ArchiveRow>(
    `select ${ARCHIVE_COLUMNS} from error_archives where gauge_id = $1 and kind = 'raw' and lead_mode = $2 order by id desc limit 1`,
    [gaugeId, leadMode],
  );
  return archiveFromRow(rows[0]);
}

/** What a version's archives hold (without their bytes), oldest first. */
export async function versionArchiveSummaries(
  db: Queryable,
  versionId: string,
): Promise<{ id: string; kind: 'corrected' | 'raw'; leadMode: LeadMode; summary: z.output<typeof ArchiveSummary> }[]> {
  const { rows } = await db.query<{ id: string; kind: 'corrected' | 'raw'; lead_mode: LeadMode; summary: unknown }>(
    `select id::text as id, kind, lead_mode, summary from error_archives where version_id = $1 order by id`,
    [versionId],
  );
  return rows.map((r) => ({ id: r.id, kind: r.kind, leadMode: r.lead_mode, summary: ArchiveSummary.parse(r.summary) }));
}

/** An archive's identity and summary, without its bytes (serving loads bytes only on a worker's first use). */
export type ArchiveInfo = Omit<StoredArchive, 'bytes'>;

const INFO_COLUMNS = 'id::text as id, version_id::text as version_id, kind, lead_mode, summary';

const infoFromRow = (r: Omit<ArchiveRow, 'bytes'> | undefined): ArchiveInfo | null =>
  r ? { id: r.id, versionId: r.version_id, kind: r.kind, leadMode: r.lead_mode, summary: ArchiveSummary.parse(r.summary) } : null;

export async function versionArchiveInfo(db: Queryable, versionId: string, kind: 'corrected' | 'raw', leadMode: LeadMode = 'lead-free'): Promise<ArchiveInfo | null> {
  const { rows } = await db.query<Omit<ArchiveRow, 'bytes'>>(
    `select ${INFO_COLUMNS} from error_archives where version_id = $1 and kind = $2 and lead_mode = $3 order by id desc limit 1`,
    [versionId, kind, leadMode],
  );
  return infoFromRow(rows[0]);
}

export async function latestRawArchiveInfo(db: Queryable, gaugeId: string, leadMode: LeadMode = 'lead-free'): Promise<ArchiveInfo | null> {
  const { rows } = await db.query<Omit<ArchiveRow, 'bytes'>>(
    `select ${INFO_COLUMNS} from error_archives where gauge_id = $1 and kind = 'raw' and lead_mode = $2 order by id desc limit 1`,
    [gaugeId, leadMode],
  );
  return infoFromRow(rows[0]);
}

export async function archiveBytes(db: Queryable, id: string): Promise<Uint8Array> {
  const { rows } = await db.query<{ bytes: Uint8Array }>('select bytes from error_archives where id = $1', [id]);
  if (!rows[0]) throw new Error(`error archive ${id} is gone`);
  return new Uint8Array(rows[0].bytes);
}
