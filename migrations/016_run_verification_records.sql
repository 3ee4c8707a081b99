-- Per stored run, what the verification of stored runs reads of it, in a compact binary form
-- (src/core/verification/run-record.ts): members per lead ascending, the stage's quantiles, the
-- any-time shares and the probabilities as issued. Nothing in it depends on an observation, so a
-- revised observation never leaves a record stale; the scores are computed when asked. Written
-- when a run is stored; runs stored before (or whose record was built for other thresholds or
-- another format) get theirs on the first verification that reads them.
create table run_verification_records (
  run_id text primary key references forecast_runs(id) on delete cascade,
  format integer not null,
  -- The gauge's thresholds the record was built for (labels and values): the any-time shares and
  -- the check of the issued thresholds depend on them.
  thresholds_key text not null,
  bytes bytea not null
);
-- Read whole, never searched inside; compressing float bytes gains little and costs every read.
alter table run_verification_records alter column bytes set storage external;
