-- flue ledger, first schema.
-- Input rows are never updated or deleted: a correction is a new row whose
-- corrects_id names the row it supersedes, with a reason. Triggers refuse
-- UPDATE and DELETE on every input table. Decimal quantities are stored as
-- TEXT in canonical decimal form, never as REAL.

CREATE TABLE site_versions (
    id          INTEGER PRIMARY KEY,
    facility_id TEXT    NOT NULL,
    version     INTEGER NOT NULL CHECK (version >= 1),
    file_name   TEXT    NOT NULL,
    sha256      TEXT    NOT NULL CHECK (length(sha256) = 64),
    source      TEXT    NOT NULL,
    loaded_at   TEXT    NOT NULL,
    loaded_by   TEXT    NOT NULL,
    UNIQUE (facility_id, version)
);

-- Unit ids are unique across the ledger, so input files may name a unit alone.
CREATE TABLE unit_owners (
    unit        TEXT PRIMARY KEY,
    facility_id TEXT NOT NULL
);

CREATE TABLE import_batches (
    id             INTEGER PRIMARY KEY,
    kind           TEXT    NOT NULL CHECK (kind IN ('analyses', 'fuel', 'hourly', 'allowances')),
    file_name      TEXT    NOT NULL,
    sha256         TEXT    NOT NULL CHECK (length(sha256) = 64),
    rows_added     INTEGER NOT NULL CHECK (rows_added >= 0),
    rows_corrected INTEGER NOT NULL CHECK (rows_corrected >= 0),
    rows_present   INTEGER NOT NULL CHECK (rows_present >= 0),
    imported_at    TEXT    NOT NULL,
    imported_by    TEXT    NOT NULL,
    reason         TEXT,
    CHECK (rows_corrected = 0 OR reason IS NOT NULL)
);

CREATE TABLE analyses (
    id                   INTEGER PRIMARY KEY,
    batch_id             INTEGER NOT NULL REFERENCES import_batches (id),
    line                 INTEGER NOT NULL CHECK (line >= 1),
    sample               TEXT    NOT NULL,
    fuel                 TEXT    NOT NULL,
    sampled_on           TEXT    NOT NULL,
    sulfur_pct           TEXT,
    sulfur_gr_per_100scf TEXT,
    gcv                  TEXT,
    gcv_uom              TEXT,
    carbon_pct           TEXT,
    hydrogen_pct         TEXT,
    nitrogen_pct         TEXT,
    oxygen_pct           TEXT,
    density_lb_per_gal   TEXT,
    corrects_id          INTEGER UNIQUE REFERENCES analyses (id),
    reason               TEXT,
    CHECK ((corrects_id IS NULL) = (reason IS NULL))
);
CREATE INDEX analyses_by_sample ON analyses (sample);

CREATE TABLE fuel_records (
    id          INTEGER PRIMARY KEY,
    batch_id    INTEGER NOT NULL REFERENCES import_batches (id),
    line        INTEGER NOT NULL CHECK (line >= 1),
    unit        TEXT    NOT NULL REFERENCES unit_owners (unit),
    start_date  TEXT    NOT NULL,
    end_date    TEXT    NOT NULL CHECK (end_date >= start_date),
    fuel        TEXT    NOT NULL,
    quantity    TEXT    NOT NULL,
    uom         TEXT    NOT NULL,
    sample      TEXT    NOT NULL,
    corrects_id INTEGER UNIQUE REFERENCES fuel_records (id),
    reason      TEXT,
    CHECK ((corrects_id IS NULL) = (reason IS NULL))
);
CREATE INDEX fuel_records_by_key ON fuel_records (unit, fuel, start_date, end_date);

-- The rows in force: those no later row supersedes.
CREATE VIEW current_analyses AS
    SELECT a.* FROM analyses a
    WHERE NOT EXISTS (SELECT 1 FROM analyses b WHERE b.corrects_id = a.id);

CREATE VIEW current_fuel_records AS
    SELECT f.* FROM fuel_records f
    WHERE NOT EXISTS (SELECT 1 FROM fuel_records g WHERE g.corrects_id = f.id);

CREATE TRIGGER site_versions_append_only_u BEFORE UPDATE ON site_versions
    BEGIN SELECT RAISE(ABORT, 'site_versions is append-only'); END;
CREATE TRIGGER site_versions_append_only_d BEFORE DELETE ON site_versions
    BEGIN SELECT RAISE(ABORT, 'site_versions is append-only'); END;
CREATE TRIGGER unit_owners_append_only_u BEFORE UPDATE ON unit_owners
    BEGIN SELECT RAISE(ABORT, 'unit_owners is append-only'); END;
CREATE TRIGGER unit_owners_append_only_d BEFORE DELETE ON unit_owners
    BEGIN SELECT RAISE(ABORT, 'unit_owners is append-only'); END;
CREATE TRIGGER import_batches_append_only_u BEFORE UPDATE ON import_batches
    BEGIN SELECT RAISE(ABORT, 'import_batches is append-only'); END;
CREATE TRIGGER import_batches_append_only_d BEFORE DELETE ON import_batches
    BEGIN SELECT RAISE(ABORT, 'import_batches is append-only'); END;
CREATE TRIGGER analyses_append_only_u BEFORE UPDATE ON analyses
    BEGIN SELECT RAISE(ABORT, 'analyses is append-only'); END;
CREATE TRIGGER analyses_append_only_d BEFORE DELETE ON analyses
    BEGIN SELECT RAISE(ABORT, 'analyses is append-only'); END;
CREATE TRIGGER fuel_records_append_only_u BEFORE UPDATE ON fuel_records
    BEGIN SELECT RAISE(ABORT, 'fuel_records is append-only'); END;
CREATE TRIGGER fuel_records_append_only_d BEFORE DELETE ON fuel_records
    BEGIN SELECT RAISE(ABORT, 'fuel_records is append-only'); END;
