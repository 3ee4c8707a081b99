-- Gauges, their archive (what the river did, what drove it, what the raw model said), and access tokens.

create table gauges (
  id text primary key,
  name text not null,
  catchment_area_km2 double precision not null,
  time_step text not null,
  step_seconds integer not null,
  time_zone text not null,
  flow_unit text not null,
  latitude double precision,
  longitude double precision,
  elevation_m double precision,
  thresholds jsonb not null default '[]',
  created_at timestamptz not null default now(),
  updated_at timestamptz not null default now()
);

create table observed_flow (
  gauge_id text not null references gauges(id) on delete cascade,
  time timestamptz not null,
  value double precision,
  quality text,
  primary key (gauge_id, time)
);

create table forcing_variables (
  gauge_id text not null references gauges(id) on delete cascade,
  name text not null,
  unit text not null,
  primary key (gauge_id, name)
);

create table forcing_values (
  gauge_id text not null,
  variable text not null,
  time timestamptz not null,
  value double precision,
  primary key (gauge_id, variable, time),
  foreign key (gauge_id, variable) references forcing_variables(gauge_id, name) on delete cascade
);

-- A member is one parameter set of the raw model.
create table members (
  gauge_id text not null references gauges(id) on delete cascade,
  id text not null,
  primary key (gauge_id, id)
);

create table member_simulations (
  gauge_id text not null,
  member_id text not null,
  time timestamptz not null,
  value double precision,
  primary key (gauge_id, member_id, time),
  foreign key (gauge_id, member_id) references members(gauge_id, id) on delete cascade
);

-- Past forecast runs: lead is the step count after issue time (1 = first step).
create table reforecasts (
  gauge_id text not null,
  issue_time timestamptz not null,
  member_id text not null,
  lead integer not null check (lead >= 1),
  value double precision,
  primary key (gauge_id, issue_time, member_id, lead),
  foreign key (gauge_id, member_id) references members(gauge_id, id) on delete cascade
);

create table api_tokens (
  id text primary key,
  name text not null,
  role text not null check (role in ('admin', 'ingest', 'read')),
  token_hash text not null unique,
  created_at timestamptz not null default now(),
  last_used_at timestamptz,
  revoked_at timestamptz
);
