-- Hourly monitor rows move into blocks: one row per run of up to 512
-- unit-hours of one unit from one import, in ascending hour and line
-- order, packed as src/ledger/blocks.rs describes. A fleet-year is
-- 8.76 M unit-hours; a table row for each made the import spend most of
-- its time inside SQLite, while a block costs one insert per 512 hours.
--
-- A unit-hour held more than once is corrected: the version in the block
-- with the highest id is in force, and each later version supersedes the
-- one before it with its import batch's reason (`--correct REASON`), so
-- `hourly_corrections` is no longer needed.
--
-- Migrating drops the per-row tables. A ledger that holds rows in them
-- (made by a development build) is refused before this runs
-- (src/ledger/mod.rs), so no row is ever dropped.

DROP TRIGGER hourly_append_only_u;
DROP TRIGGER hourly_append_only_d;
DROP TRIGGER hourly_corrections_append_only_u;
DROP TRIGGER hourly_corrections_append_only_d;
DROP TABLE hourly_corrections;
DROP TABLE hourly;

CREATE TABLE hourly_blocks (
    id         INTEGER PRIMARY KEY,
    batch_id   INTEGER NOT NULL REFERENCES import_batches (id) DEFERRABLE INITIALLY DEFERRED,
    unit_no    INTEGER NOT NULL REFERENCES hourly_units (unit_no),
    first_hour INTEGER NOT NULL,
    last_hour  INTEGER NOT NULL CHECK (last_hour >= first_hour),
    row_count  INTEGER NOT NULL CHECK (row_count BETWEEN 1 AND 512),
    rows       BLOB    NOT NULL CHECK (length(rows) >= 4 * row_count)
);
CREATE INDEX hourly_blocks_by_unit ON hourly_blocks (unit_no, last_hour);

CREATE TRIGGER hourly_blocks_append_only_u BEFORE UPDATE ON hourly_blocks
    BEGIN SELECT RAISE(ABORT, 'hourly_blocks is append-only'); END;
CREATE TRIGGER hourly_blocks_append_only_d BEFORE DELETE ON hourly_blocks
    BEGIN SELECT RAISE(ABORT, 'hourly_blocks is append-only'); END;
