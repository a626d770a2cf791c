-- mixd PostgreSQL schema, migration 1: model versions.
--
-- mixd_models has one row per model id ever written, holding the highest
-- version number ever assigned to it (kept when versions are deleted, so
-- numbers are never reused). Create takes this row's lock (INSERT ... ON
-- CONFLICT DO UPDATE), which orders concurrent writers of one model.
--
-- mixd_model_versions has one immutable row per stored version: the model
-- document (daemon/modeldoc/FORMAT.md) and the SHA-256 of its exact bytes,
-- checked on every read. Ids compare in byte order (COLLATE "C"), as the
-- directory store sorts them.
CREATE TABLE mixd_models (
    id         text COLLATE "C" PRIMARY KEY,
    high_water bigint NOT NULL CHECK (high_water >= 1)
);

CREATE TABLE mixd_model_versions (
    id          text COLLATE "C" NOT NULL REFERENCES mixd_models (id),
    version     bigint NOT NULL CHECK (version >= 1),
    create_time timestamptz NOT NULL,
    sha256      text NOT NULL,
    document    bytea NOT NULL,
    PRIMARY KEY (id, version)
);

-- A stored version never changes: updates are refused.
CREATE FUNCTION mixd_model_versions_immutable() RETURNS trigger
LANGUAGE plpgsql AS $$
BEGIN
    RAISE EXCEPTION 'mixd model versions are immutable (models/% version %)', OLD.id, OLD.version;
END
$$;

CREATE TRIGGER mixd_model_versions_no_update
    BEFORE UPDATE ON mixd_model_versions
    FOR EACH ROW EXECUTE FUNCTION mixd_model_versions_immutable();
