-- Verification: the level each model version is held to by the drift watch, and each gauge's
-- latest drift status (refreshed after observations arrive and on a timer; read by the overview,
-- the gauge and /metrics). Hindcast results live in their job's result.

-- The stochastic stage's 90 % coverage and CRPS on a hindcast of the version's validation period.
create table drift_references (
  version_id bigint primary key references model_versions(id) on delete cascade,
  gauge_id text not null references gauges(id) on delete cascade,
  coverage90 double precision not null,
  crps double precision not null,
  -- Where the level comes from: hindcast job, mode, period, cases.
  basis jsonb not null,
  created_at timestamptz not null default now()
);

create table gauge_status (
  gauge_id text primary key references gauges(id) on delete cascade,
  status text not null check (status in ('ok', 'drifting', 'insufficient-data')),
  version_id bigint references model_versions(id) on delete set null,
  reasons jsonb not null,
  evidence jsonb not null,
  computed_at timestamptz not null default now()
);
