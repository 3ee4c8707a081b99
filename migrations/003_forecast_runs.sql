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
  input jsonb not null,
  -- The JSON answer exactly as sent, so reads and ETags never change.
  output text not null,
  etag text not null,
  -- Per threshold: highest exceedance probability over the horizon and any-time probability.
  summary jsonb not null,
  -- Percentiles 1..99 per lead time of the stochastic stage, for verification.
  percentiles jsonb not null,
  created_at timestamptz not null default now(),
  unique (gauge_id, issue_time, source)
);
create index forecast_runs_latest on forecast_runs (gauge_id, issue_time desc, created_at desc);
