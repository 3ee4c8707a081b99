// Use case: choose which model version corrects new runs (activate one, or roll back to the one
// active before). After the commit the version is loaded into every correction worker, so the
// next run finds it warm, and the gauge's drift status is refreshed against it.
import type { Db } from '../store/db.ts';
import { activateModelVersion, getActiveModelVersion, getModelVersion, modelParts, previousActivatedVersion, type ModelVersion } from '../store/models-repo.ts';
import type { CorrectionPool } from '../workers/correction-pool.ts';
import { scheduleGaugeStatusRefresh } from './drift.ts';
import { conflict, notFound } from './problem.ts';

type Log = { warn: (o: object, msg: string) => void };

function afterActivation(db: Db, pool: CorrectionPool, v: ModelVersion, log: Log): void {
  // The drift watch compares against the active version: refresh the gauge's status now.
  scheduleGaugeStatusRefresh(db, v.gaugeId, log);
  pool.warm({ versionId: v.id, load: async () => ({ parts: await modelParts(db, v.id), spec: v.featureSpec }) }).catch((err: Error) => {
    log.warn({ version: v.id, err: err.message }, 'could not warm the model in the correction workers');
  });
}

/** Makes a version the active one; answers with it. */
export async function activateVersion(db: Db, pool: CorrectionPool, gaugeId: string, versionId: string, log: Log): Promise<ModelVersion> {
  const v = await db.transaction(async (tx) => {
    if (!(await getModelVersion(tx, gaugeId, versionId))) throw notFound(`no model version ${versionId} for gauge ${gaugeId}`);
    await activateModelVersion(tx, gaugeId, versionId);
    return (await getModelVersion(tx, gaugeId, versionId))!;
  });
  afterActivation(db, pool, v, log);
  return v;
}

/** Re-activates the version that was active before the current one. */
export async function rollbackVersion(db: Db, pool: CorrectionPool, gaugeId: string, log: Log): Promise<{ rolledBackFrom: string | null; active: ModelVersion }> {
  const r = await db.transaction(async (tx) => {
    const current = await getActiveModelVersion(tx, gaugeId);
    const previous = await previousActivatedVersion(tx, gaugeId);
    if (!previous) throw conflict(`gauge ${gaugeId} has no earlier active version to roll back to`);
    await activateModelVersion(tx, gaugeId, previous);
    return { rolledBackFrom: current?.id ?? null, active: (await getModelVersion(tx, gaugeId, previous))! };
  });
  afterActivation(db, pool, r.active, log);
  return r;
}
