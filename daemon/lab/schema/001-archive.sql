-- plumbline archive, version 1: sessions, readings, events, sweeps and fits from station journals.
-- Applied by `plumbline archive` (daemon/lab/migrate.ts) in one transaction; never edited once
-- released: later changes go into 002-*.sql and onward.
--
-- Units are SI (V, A, ms since the session started; energies in eV inside fit parameters), as in
-- the journal. Every row of readings/events is keyed by (session_id, seq): the journal's sequence
-- number, shared by readings and events, so re-delivered data is ignored, never doubled.

CREATE TABLE stations (
  station      text PRIMARY KEY,               -- id in the broker's topics
  name         text,                           -- the station config's name
  first_seen   timestamptz NOT NULL DEFAULT now(),
  last_seen    timestamptz NOT NULL DEFAULT now(),
  last_status  jsonb                           -- the last retained status message
);

CREATE TABLE sessions (
  id           bigint GENERATED ALWAYS AS IDENTITY PRIMARY KEY,
  station      text NOT NULL,
  session      text NOT NULL,                  -- the session folder's name
  started_at   timestamptz,                    -- wall-clock time at t = 0
  source       jsonb,                          -- {kind, detail, control}
  instrument   text,
  plan         jsonb,
  analysis     jsonb,
  drift        jsonb,
  limits       jsonb,
  device       jsonb,                          -- device metadata carried by the run (wafer, site, …), if any
  wafer        text GENERATED ALWAYS AS (device ->> 'wafer') STORED,
  site         text GENERATED ALWAYS AS (device ->> 'site') STORED,
  outcome      text,                           -- run-end outcome (completed, aborted-drift, …); NULL while running
  reason       text,
  sweeps       integer,
  readings     bigint NOT NULL DEFAULT 0,      -- readings archived so far
  committed    int8multirange NOT NULL DEFAULT '{}', -- sequence numbers archived (gaps show as several ranges)
  known_last   bigint NOT NULL DEFAULT 0,      -- highest seq the station reported as published
  archived_at  timestamptz NOT NULL DEFAULT now(),
  updated_at   timestamptz NOT NULL DEFAULT now(),
  UNIQUE (station, session)
);
CREATE INDEX sessions_started ON sessions (started_at);
CREATE INDEX sessions_wafer_site ON sessions (wafer, site);

-- One row per journaled reading. No foreign key: the archive writes readings by COPY at the
-- station's full rate, and every row it writes belongs to a session row it has just locked.
CREATE TABLE readings (
  session_id   bigint NOT NULL,
  seq          bigint NOT NULL,
  sweep        integer NOT NULL,
  k            integer NOT NULL,               -- point index within the sweep, from 0
  t_ms         double precision NOT NULL,      -- ms since the session started
  voltage_v    double precision NOT NULL,
  current_a    double precision NOT NULL,      -- current into the device positive, as the SMU reports it
  flags        smallint NOT NULL,              -- 1 compliance, 2 overflow
  PRIMARY KEY (session_id, seq)
);

-- Every other journal event, whole (body), with the fields queries filter on.
CREATE TABLE events (
  session_id   bigint NOT NULL,
  seq          bigint NOT NULL,
  t_ms         double precision NOT NULL,
  type         text NOT NULL,                  -- session, sweep-start, fit, caution, decision, annotation, run-end, …
  sweep        integer,
  body         jsonb NOT NULL,
  PRIMARY KEY (session_id, seq)
);
CREATE INDEX events_type ON events (type, session_id);

CREATE TABLE sweeps (
  session_id   bigint NOT NULL,
  sweep        integer NOT NULL,
  label        text,
  planned      integer,                        -- points planned
  points       integer,                        -- points taken (from sweep-end)
  complete     boolean,                        -- false when cut short; NULL while running
  note         text,
  start_seq    bigint,
  end_seq      bigint,
  PRIMARY KEY (session_id, sweep)
);

-- Final fits (one per sweep and model as the station fitted it live).
CREATE TABLE fits (
  session_id     bigint NOT NULL,
  seq            bigint NOT NULL,
  sweep          integer NOT NULL,
  model          text,
  plausible      boolean,
  slope          double precision,
  slope_se       double precision,
  intercept      double precision,
  intercept_se   double precision,
  r2             double precision,
  n              integer,
  window_from    double precision,
  window_to      double precision,
  parameters     jsonb,                        -- {key: {value, stdErr, unit}}
  warnings       jsonb,
  error          text,                         -- why there is no fit, when there is none
  PRIMARY KEY (session_id, seq)
);
CREATE INDEX fits_sweep ON fits (session_id, sweep);

-- Fitted parameters one per row: SELECT * FROM fit_parameters WHERE parameter = 'barrierHeight'.
CREATE VIEW fit_parameters AS
  SELECT s.station, s.session, s.wafer, s.site, f.session_id, f.sweep, f.model, p.key AS parameter,
         (p.value ->> 'value')::double precision AS value,
         (p.value ->> 'stdErr')::double precision AS std_err,
         p.value ->> 'unit' AS unit, f.plausible
    FROM fits f
    JOIN sessions s ON s.id = f.session_id
    CROSS JOIN LATERAL jsonb_each(f.parameters) p;
