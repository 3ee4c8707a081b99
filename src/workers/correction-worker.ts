// A correction worker thread: keeps onnxruntime sessions and decoded error archives cached by id
// (creating and dropping sessions repeatedly leaks memory in onnxruntime), and corrects runs.
import { parentPort } from 'node:worker_threads';
import type { InferenceSession } from 'onnxruntime-node';
import { archiveFromBytes } from '../core/stochastic/archive-codec.ts';
import type { ErrorArchive } from '../core/stochastic/error-archive.ts';
import { FeatureInputError } from '../core/features/features.ts';
import { checkResidualSpec, type ResidualSpec } from '../core/features/model-inputs.ts';
import { createStochasticWorkspace } from '../core/stochastic/stochastic-stage.ts';
import { correctRun } from '../models/correct-run.ts';
import { verifyStoredRecords } from '../core/verification/stored-verification.ts';
import { warmSession } from '../models/model-shape.ts';
import { createResidualSession } from '../models/onnx-session.ts';
import type { CorrectionReply, CorrectionRequest } from './protocol.ts';

const reply = (m: CorrectionReply) => parentPort!.postMessage(m);

const MAX_MODELS = 8;
const MAX_ARCHIVES = 16;
const models = new Map<string, { spec: ResidualSpec; sessions: InferenceSession[] }>();
const archives = new Map<string, ErrorArchive>();
const workspace = createStochasticWorkspace();

async function loadModel(versionId: string, parts: Uint8Array[], spec: unknown): Promise<void> {
  if (models.has(versionId)) return;
  const checked = checkResidualSpec(spec);
  const sessions = [];
  for (const bytes of parts) sessions.push(await createResidualSession(bytes));
  // Warm: one inference so the first real run does not pay for lazy initialisation.
  for (const s of sessions) await warmSession(s, checked);
  models.set(versionId, { spec: checked, sessions });
  while (models.size > MAX_MODELS) {
    const oldest = models.keys().next().value!;
    const m = models.get(oldest)!;
    models.delete(oldest);
    await Promise.all(m.sessions.map((s) => s.release()));
  }
}

parentPort!.on('message', async (msg: CorrectionRequest) => {
  try {
    if (msg.type === 'load-model') {
      await loadModel(msg.versionId, msg.parts, msg.spec);
      reply({ id: msg.id, ok: true });
    } else if (msg.type === 'load-archive') {
      if (!archives.has(msg.archiveId)) archives.set(msg.archiveId, archiveFromBytes(msg.bytes));
      while (archives.size > MAX_ARCHIVES) archives.delete(archives.keys().next().value!);
      reply({ id: msg.id, ok: true });
    } else if (msg.type === 'verify') {
      reply({ id: msg.id, ok: true, result: verifyStoredRecords(msg.input) });
    } else {
      const model = msg.versionId ? models.get(msg.versionId) : null;
      if (msg.versionId && !model) throw new Error(`model ${msg.versionId} is not loaded in this worker`);
      const archive = archives.get(msg.archiveId);
      if (!archive) throw new Error(`archive ${msg.archiveId} is not loaded in this worker`);
      const out = await correctRun(msg.run, model?.spec ?? null, model?.sessions ?? [], archive, msg.options, workspace);
      const s = out.stage;
      reply({
        id: msg.id,
        ok: true,
        result: {
          corrected: out.corrected,
          quantiles: s.quantiles,
          exceedance: s.exceedance,
          exceedanceAnyTime: s.exceedanceAnyTime,
          firstLikelyLead: s.firstLikelyLead,
          nDraws: s.nDraws,
          timings: out.timings,
        },
      });
    }
  } catch (err) {
    const e = err as Error;
    reply({ id: msg.id, ok: false, message: e.message, path: e instanceof FeatureInputError ? e.path : null });
  }
});
