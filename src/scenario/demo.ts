// `npm run demo`: the whole job on the embedded store in under two minutes. Starts the service,
// loads the invented Corvane catchment's archive through the API, fits and activates a residual
// model, posts the latest runs, prints the corrected table and the commands to try, and keeps
// serving until Ctrl-C. A second start reuses what is stored.
import { ConfigError, loadConfig } from '../config.ts';
import { startService } from '../server.ts';
import { DataDirLockedError } from '../store/embedded-driver.ts';
import { demoTokens } from './demo-tokens.ts';
import { loadScenarioArchive, type Send } from './load-archive.ts';
import { buildScenario } from './scenario.ts';
import { demoToday } from './demo-today.ts';

const started = Date.now();
const say = (line: string) => console.log(`[${((Date.now() - started) / 1000).toFixed(1).padStart(5)} s] ${line}`);

let service;
let config;
try {
  config = loadConfig({ LOG_LEVEL: 'warn', ...process.env });
  service = await startService(config);
} catch (err) {
  if (err instanceof ConfigError || err instanceof DataDirLockedError) {
    console.error(err.message);
    process.exit(1);
  }
  if ((err as NodeJS.ErrnoException).code === 'EADDRINUSE') {
    console.error(`port ${config?.PORT} is in use; start the demo with another one, e.g. PORT=8090 npm run demo`);
    process.exit(1);
  }
  throw err;
}
const { url, db } = service;
say(`service listening on ${url} (${db.kind === 'embedded' ? `embedded PostgreSQL in ${config.DATA_DIR}` : 'PostgreSQL server'})`);

// One token per role, kept in a 0600 file under the data directory (reused by a second start).
const access = await demoTokens(db, config.DATA_DIR);
const { admin, read } = access.tokens;
say(`tokens for the roles read, ingest and admin in ${access.path} (only you may read it; ${access.made.length ? `new: ${access.made.join(', ')}` : 'reused'})`);
const send: Send = async (method, path, body) => {
  const res = await fetch(`${url}${path}`, {
    method,
    headers: { authorization: `Bearer ${admin}`, ...(body === undefined ? {} : { 'content-type': 'application/json' }) },
    body: body === undefined ? undefined : JSON.stringify(body),
  });
  const text = await res.text();
  return { status: res.status, body: text ? JSON.parse(text) : null };
};

const scenario = buildScenario({ seed: 1 });
const g = scenario.gauge;
const gaugeId = g.id;
// "Today" in the scenario is three days before the largest flood of its last three years, so the
// latest forecast has something to say; the archive loaded ends today.
const today = demoToday(scenario);
say(`scenario: ${g.name} (${g.catchmentAreaKm2} km², invented), ${scenario.times.length} days, ${scenario.memberIds.length} raw members`);

const existing = await send('GET', `/gauges/${gaugeId}/models`);
const hasModel = existing.status === 200 && (existing.body as { versions: { active: boolean }[] }).versions.some((v) => v.active);
if (hasModel) {
  say('found the gauge, its archive and an active residual model from an earlier start: reusing them');
} else {
  say('loading the archive through the API: gauge, forcings, observed flow, member simulations');
  await loadScenarioArchive(send, scenario, { endIndex: today, onStep: (what) => say(`  loaded ${what}`) });

  say('fitting a residual model (gradient-boosted trees, tuned by Bayesian optimisation) as a background job');
  const job = await send('POST', `/gauges/${gaugeId}/models/fit`, {
    tuning: { evaluations: 6, initial: 3 },
    bundle: 3,
    params: { nRounds: 250, patience: 20 },
    maxTrainRows: 40_000,
    templateLength: 30,
    // Issue-time updating, kept at the lead times where the held-out block shows it helps.
    updating: { mode: 'auto' },
    label: 'demo: tuned trees',
  });
  if (job.status !== 202) throw new Error(JSON.stringify(job.body));
  const jobId = (job.body as { id: string }).id;
  for (;;) {
    const j = (await send('GET', `/jobs/${jobId}`)).body as { status: string; stage: string; percent: number; error: string | null; result: { versionId: string; scores: any } | null };
    const bar = '#'.repeat(Math.round(j.percent / 5)).padEnd(20, '.');
    process.stdout.write(`\r         [${bar}] ${j.percent.toFixed(0).padStart(3)}% ${j.stage.padEnd(60).slice(0, 60)}`);
    if (j.status === 'succeeded') {
      process.stdout.write('\n');
      const s = j.result!.scores;
      say(`model version ${j.result!.versionId} active. Validation ${s.period.from.slice(0, 10)} … ${s.period.to.slice(0, 10)}:`);
      say(`  residual RMSE ${s.residualRmse.before.toFixed(2)} → ${s.residualRmse.after.toFixed(2)} m3/s; ensemble-mean NSE ${s.ensembleMean.nseBefore.toFixed(3)} → ${s.ensembleMean.nseAfter.toFixed(3)}, KGE ${s.ensembleMean.kgeBefore.toFixed(3)} → ${s.ensembleMean.kgeAfter.toFixed(3)}`);
      const u = s.updating as { status: string; reason?: string; method?: string; leads?: { lead: number; on: boolean }[] } | undefined;
      if (u?.status === 'on') say(`  issue-time updating on (${u.method}) at lead times ${u.leads!.filter((l) => l.on).map((l) => l.lead).join(', ')}: runs update on the latest observation`);
      else say(`  issue-time updating off: ${u?.reason ?? 'not fitted'}`);
      break;
    }
    if (j.status === 'failed' || j.status === 'cancelled') throw new Error(`the fit ${j.status}: ${j.error}`);
    await new Promise((r) => setTimeout(r, 400));
  }
}

// Post the last 10 daily runs up to today, so there is some history.
const last = today;
let posted = 0;
for (let i = last - 9; i <= last; i++) {
  const run = scenario.forecastRun(i);
  const res = await send('POST', `/gauges/${gaugeId}/runs`, {
    issueTime: run.issueTime,
    source: 'demo',
    unit: 'm3/s',
    warmupSteps: run.warmupSteps,
    members: run.members.map((m) => ({ id: m.id, values: m.values })),
    forcings: { precipitation: run.forcings.precipitation, air_temperature: run.forcings.air_temperature },
  });
  if (res.status === 201) posted++;
  else if (res.status !== 200) throw new Error(`posting the run of ${run.issueTime} failed: ${JSON.stringify(res.body)}`);
}
say(`posted the raw runs of the last 10 days (${posted} new); the latest was issued ${scenario.times[last]} ("today" in the scenario)`);

const table = await fetch(`${url}/gauges/${gaugeId}/forecasts/latest?format=text`, { headers: { authorization: `Bearer ${read}` } });
console.log(`\n${await table.text()}`);
const todayObserved = scenario.observedFlow[today];
console.log(`Try it: one token per role (read, ingest, admin) is in ${access.path}; load them into your shell:
  . ${access.path}
  curl -s -H "authorization: Bearer $READ_TOKEN" ${url}/gauges/${gaugeId}/forecasts/latest?format=text
  curl -s -H "authorization: Bearer $READ_TOKEN" ${url}/gauges/${gaugeId}/forecasts/latest?format=csv
  curl -s -H "authorization: Bearer $READ_TOKEN" ${url}/overview
  curl -s -H "authorization: Bearer $READ_TOKEN" ${url}/gauges/${gaugeId}/models
  curl -sN -H "authorization: Bearer $READ_TOKEN" ${url}/events          # waits for new runs
  # writing archive data needs the ingest role (this repeats today's stored observation, changing nothing):
  curl -s -H "authorization: Bearer $INGEST_TOKEN" -H 'content-type: text/csv' \\
    --data-binary $'time,flow (m3/s)\\n${scenario.times[today]},${todayObserved ?? ''}\\n' ${url}/gauges/${gaugeId}/observations
More tokens, also while this runs: npm run token -- create --role read --name "wall screen"
Page:  ${url}/view/${gaugeId}#token=${read}
API:   ${url}/api  (OpenAPI at ${url}/openapi.json)

Guidance only: flood warnings are decided and issued by the responsible local authority.
Serving until Ctrl-C.`);
say(`demo ready in ${((Date.now() - started) / 1000).toFixed(0)} s`);

const stop = () => {
  console.log('\nstopping…');
  service.stop().then(() => process.exit(0));
};
process.once('SIGINT', stop);
process.once('SIGTERM', stop);
