-- Corrected forecast runs: the posted raw run and everything returned for it, in one row.

create table forecast_runs (
  id text primary key,
  gauge_id text not null references gauges(id) on delete cascade,
  issue_time timestamptz not null,
  source text not null,
  request_hash text not null,
  idempotency_key text unique,
  status text not null check (status in ('corrected', 'degraded')),
  model_version_id bigint references model_versions(id) on delete set null,
  seed bigint not null,
  -- The posted body, as JSON text (never queried inside; jsonb would cost its parse on every post).
  input text not null,
  -- The JSON answer exactly as sent, so reads and ETags never change.
  output text not null,
  etag text not null,
  -- Per threshold: highest exceedance probability over the horizon and any-time probability.
  summary jsonb not null,
  -- The stochastic stage's quantiles at the 100 midpoint levels (i - 0.5)/100 per lead time, for
  -- verification: float32 little-endian, lead-major (lead * 100 + level).
  percentiles bytea not null,
  created_at timestamptz not null default now(),
  unique (gauge_id, issue_time, source)
);
create index forecast_runs_latest on forecast_runs (gauge_id, issue_time desc, created_at desc);
-- Stored uncompressed: compressing some 400 kB per run took about 20 ms of each post, the larger part
-- of storing it; the cost is disk (about 400 kB per run of 51 members x 240 lead times).
alter table forecast_runs alter column input set storage external;
alter table forecast_runs alter column output set storage external;
alter table forecast_runs alter column percentiles set storage external
