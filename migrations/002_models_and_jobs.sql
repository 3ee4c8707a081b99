-- Residual model versions per gauge, their error archives, and background jobs.

create table model_versions (
  id bigserial primary key,
  gauge_id text not null references gauges(id) on delete cascade,
  origin text not null check (origin in ('fitted', 'uploaded')),
  label text not null,
  feature_spec jsonb not null,
  trainer jsonb not null,
  periods jsonb not null,
  scores jsonb not null,
  created_by text,
  created_at timestamptz not null default now(),
  active boolean not null default false,
  activated_at timestamptz
);
create unique index model_versions_one_active on model_versions (gauge_id) where active;

-- A version may bundle several residual models (the best few tuning candidates).
create table model_parts (
  version_id bigint not null references model_versions(id) on delete cascade,
  part integer not null,
  onnx bytea not null,
  primary key (version_id, part)
);

-- Error archives for the stochastic stage: of a model version's corrected members, or of the raw
-- members (version_id null) for degraded mode.
create table error_archives (
  id bigserial primary key,
  gauge_id text not null references gauges(id) on delete cascade,
  version_id bigint references model_versions(id) on delete cascade,
  kind text not null check (kind in ('corrected', 'raw')),
  lead_mode text not null check (lead_mode in ('lead-free', 'per-lead')),
  cases integer not null,
  summary jsonb not null,
  bytes bytea not null,
  created_at timestamptz not null default now()
);
create index error_archives_lookup on error_archives (gauge_id, kind, created_at desc);

create table jobs (
  id bigserial primary key,
  kind text not null,
  gauge_id text references gauges(id) on delete cascade,
  params jsonb not null,
  status text not null default 'queued' check (status in ('queued', 'running', 'succeeded', 'failed', 'cancelled')),
  stage text not null default 'queued',
  percent double precision not null default 0,
  cancel_requested boolean not null default false,
  result jsonb,
  error text,
  created_by text,
  claimed_by text,
  heartbeat_at timestamptz,
  created_at timestamptz not null default now(),
  started_at timestamptz,
  finished_at timestamptz
);
create index jobs_queue on jobs (status, created_at);
