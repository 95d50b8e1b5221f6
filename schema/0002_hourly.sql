-- Hourly monitor data. Readings are stored as integers of fixed scale
-- (op_time in hundredths of an hour, every other reading in millionths of
-- its unit), so no REAL ever holds a value and sums stay exact. NULL is a
-- missing reading. `hour` counts hours since 1970-01-01T00:00 local
-- standard time.

-- Units with hourly data get a small integer, so each hourly row and its
-- index entry carry an integer rather than the unit's name.
CREATE TABLE hourly_units (
    unit_no INTEGER PRIMARY KEY,
    unit    TEXT NOT NULL UNIQUE REFERENCES unit_owners (unit)
);

-- Which reading columns a unit's hours have ever carried a value in, kept
-- by the import, so a report knows each unit's moisture bases without
-- scanning its rows.
CREATE TABLE hourly_unit_columns (
    unit_no INTEGER NOT NULL REFERENCES hourly_units (unit_no),
    reading TEXT    NOT NULL,
    PRIMARY KEY (unit_no, reading)
);

-- `batch_id` and `unit_no` carry no foreign-key clause: a per-row lookup
-- halves the import rate. The import checks both inside its transaction
-- (the batch row is written last, with the id reserved at the start).
CREATE TABLE hourly (
    id            INTEGER PRIMARY KEY,
    batch_id      INTEGER NOT NULL,
    line          INTEGER NOT NULL CHECK (line >= 1),
    unit_no       INTEGER NOT NULL,
    hour          INTEGER NOT NULL,
    op_time       INTEGER NOT NULL CHECK (op_time BETWEEN 0 AND 100),
    load_mw       INTEGER CHECK (load_mw >= 0),
    so2_ppm_wet   INTEGER CHECK (so2_ppm_wet >= 0),
    so2_ppm_dry   INTEGER CHECK (so2_ppm_dry >= 0),
    nox_ppm_wet   INTEGER CHECK (nox_ppm_wet >= 0),
    nox_ppm_dry   INTEGER CHECK (nox_ppm_dry >= 0),
    o2_pct_wet    INTEGER CHECK (o2_pct_wet >= 0 AND o2_pct_wet < 20900000),
    o2_pct_dry    INTEGER CHECK (o2_pct_dry >= 0 AND o2_pct_dry < 20900000),
    co2_pct_wet   INTEGER CHECK (co2_pct_wet >= 0 AND co2_pct_wet <= 100000000),
    co2_pct_dry   INTEGER CHECK (co2_pct_dry >= 0 AND co2_pct_dry <= 100000000),
    flow_scfh_wet INTEGER CHECK (flow_scfh_wet >= 0),
    h2o_pct       INTEGER CHECK (h2o_pct >= 0 AND h2o_pct < 100000000)
);
CREATE INDEX hourly_by_unit_hour ON hourly (unit_no, hour);

-- A corrected unit-hour: the new row supersedes the old one, with a reason.
-- Kept apart from `hourly` so the common uncorrected row carries no index entry.
CREATE TABLE hourly_corrections (
    id          INTEGER PRIMARY KEY REFERENCES hourly (id),
    corrects_id INTEGER NOT NULL UNIQUE REFERENCES hourly (id),
    reason      TEXT    NOT NULL CHECK (length(reason) > 0),
    CHECK (corrects_id < id)
);

CREATE TRIGGER hourly_append_only_u BEFORE UPDATE ON hourly
    BEGIN SELECT RAISE(ABORT, 'hourly is append-only'); END;
CREATE TRIGGER hourly_append_only_d BEFORE DELETE ON hourly
    BEGIN SELECT RAISE(ABORT, 'hourly is append-only'); END;
CREATE TRIGGER hourly_units_append_only_u BEFORE UPDATE ON hourly_units
    BEGIN SELECT RAISE(ABORT, 'hourly_units is append-only'); END;
CREATE TRIGGER hourly_units_append_only_d BEFORE DELETE ON hourly_units
    BEGIN SELECT RAISE(ABORT, 'hourly_units is append-only'); END;
CREATE TRIGGER hourly_unit_columns_append_only_u BEFORE UPDATE ON hourly_unit_columns
    BEGIN SELECT RAISE(ABORT, 'hourly_unit_columns is append-only'); END;
CREATE TRIGGER hourly_unit_columns_append_only_d BEFORE DELETE ON hourly_unit_columns
    BEGIN SELECT RAISE(ABORT, 'hourly_unit_columns is append-only'); END;
CREATE TRIGGER hourly_corrections_append_only_u BEFORE UPDATE ON hourly_corrections
    BEGIN SELECT RAISE(ABORT, 'hourly_corrections is append-only'); END;
CREATE TRIGGER hourly_corrections_append_only_d BEFORE DELETE ON hourly_corrections
    BEGIN SELECT RAISE(ABORT, 'hourly_corrections is append-only'); END;
