-- mixd PostgreSQL schema, migration 2: fit jobs shared by every daemon.
--
-- mixd_replicas: one row per daemon process (its replica id) with the
-- time of its last heartbeat, by the database's clock.
--
-- mixd_fit_jobs: one row per fit job, written by the daemon that runs it
-- (owner) when the job is created and on every change (progress at most
-- about once a second). Other daemons read it and set cancel_requested.
-- finished is true once state is final; a finished row is never changed
-- again. progress is a serialized mixd.v1.FitProgress message.
CREATE TABLE mixd_replicas (
    id           text COLLATE "C" PRIMARY KEY,
    started_at   timestamptz NOT NULL DEFAULT now(),
    heartbeat_at timestamptz NOT NULL DEFAULT now()
);

CREATE TABLE mixd_fit_jobs (
    name             text COLLATE "C" PRIMARY KEY,
    seq              bigint GENERATED ALWAYS AS IDENTITY UNIQUE,
    owner            text COLLATE "C" NOT NULL,
    model            text NOT NULL,
    fitter           text NOT NULL,
    state            integer NOT NULL,
    finished         boolean NOT NULL,
    model_version    bigint NOT NULL DEFAULT 0,
    rows_received    bigint NOT NULL DEFAULT 0,
    progress         bytea,
    error_code       integer NOT NULL DEFAULT 0,
    error_message    text NOT NULL DEFAULT '',
    create_time      timestamptz NOT NULL,
    end_time         timestamptz,
    cancel_requested boolean NOT NULL DEFAULT false,
    updated_at       timestamptz NOT NULL DEFAULT now()
);

CREATE INDEX mixd_fit_jobs_unfinished ON mixd_fit_jobs (owner) WHERE NOT finished;
CREATE INDEX mixd_fit_jobs_finished ON mixd_fit_jobs (seq) WHERE finished;
