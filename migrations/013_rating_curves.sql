-- Rating curves (stage → flow, piecewise power law), versioned by the time from which each applies.
-- Flood thresholds may now be given as a water level: gauges.thresholds entries are {label, value}
-- (flow, m3/s) or {label, level} (stage, m); no change to that column is needed.
create table rating_curves (
  gauge_id text not null references gauges(id) on delete cascade,
  valid_from timestamptz not null,
  -- [{fromStage, toStage, a, b, h0}, ...] in ascending stage: Q = a·(h − h0)^b within [fromStage, toStage]
  segments jsonb not null,
  join_tolerance double precision not null,
  note text,
  created_at timestamptz not null default now(),
  primary key (gauge_id, valid_from)
);
