-- Allowance transactions and settlements. Counts are INTEGER; prices are
-- TEXT in canonical decimal form, never REAL. Rows are only ever inserted:
-- a mistaken transaction is undone by a later adjustment, never edited.
--
-- A transaction moves `quantity` allowances of one program and vintage
-- from one holder to another. A holder is the program's issuer (where
-- allocations come from), the program's retirement (where settlements send
-- deductions) or an account of the site file. `seq` is the order of
-- recording, which breaks ties between transactions of the same date.

CREATE TABLE allowance_transactions (
    id            TEXT    PRIMARY KEY CHECK (length(id) > 0),
    seq           INTEGER NOT NULL UNIQUE CHECK (seq >= 1),
    batch_id      INTEGER NOT NULL REFERENCES import_batches (id),
    line          INTEGER NOT NULL CHECK (line >= 1),
    facility_id   TEXT    NOT NULL,
    date          TEXT    NOT NULL CHECK (date GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'),
    kind          TEXT    NOT NULL CHECK (kind IN ('allocation', 'transfer', 'adjustment', 'deduction', 'offset')),
    program       TEXT    NOT NULL,
    vintage       INTEGER NOT NULL,
    quantity      INTEGER NOT NULL CHECK (quantity BETWEEN 1 AND 1000000000000),
    from_party    TEXT    NOT NULL CHECK (from_party IN ('issuer', 'account')),
    from_account  TEXT    CHECK ((from_party = 'account') = (from_account IS NOT NULL)),
    to_party      TEXT    NOT NULL CHECK (to_party IN ('issuer', 'retirement', 'account')),
    to_account    TEXT    CHECK ((to_party = 'account') = (to_account IS NOT NULL)),
    price         TEXT    CHECK (price IS NULL OR (price NOT GLOB '*[^0-9.]*' AND length(price) > 0)),
    note          TEXT    NOT NULL,
    serial_from   INTEGER CHECK (serial_from >= 0),
    serial_to     INTEGER CHECK (serial_to >= serial_from),
    -- The compliance year a deduction or offset settles; NULL otherwise.
    settles_year  INTEGER,
    CHECK ((serial_from IS NULL) = (serial_to IS NULL)),
    CHECK (serial_from IS NULL OR serial_to - serial_from + 1 = quantity),
    CHECK ((kind IN ('deduction', 'offset')) = (settles_year IS NOT NULL)),
    CHECK ((kind IN ('deduction', 'offset')) = (to_party = 'retirement')),
    CHECK (NOT (from_party = to_party AND from_account IS to_account))
);
CREATE INDEX allowance_transactions_by_program ON allowance_transactions (facility_id, program, vintage);

-- One settlement per facility, program and year, even one that deducts
-- nothing: the UNIQUE key refuses a second.
CREATE TABLE allowance_settlements (
    id                 INTEGER PRIMARY KEY,
    batch_id           INTEGER NOT NULL REFERENCES import_batches (id),
    facility_id        TEXT    NOT NULL,
    program            TEXT    NOT NULL,
    year               INTEGER NOT NULL,
    true_up_date       TEXT    NOT NULL,
    deducted           INTEGER NOT NULL CHECK (deducted >= 0),
    offset_owed        INTEGER NOT NULL CHECK (offset_owed >= 0),
    offset_deducted    INTEGER NOT NULL CHECK (offset_deducted BETWEEN 0 AND offset_owed),
    offset_outstanding INTEGER NOT NULL CHECK (offset_outstanding = offset_owed - offset_deducted),
    settled_at         TEXT    NOT NULL,
    settled_by         TEXT    NOT NULL,
    UNIQUE (facility_id, program, year)
);

CREATE TRIGGER allowance_transactions_append_only_u BEFORE UPDATE ON allowance_transactions
    BEGIN SELECT RAISE(ABORT, 'allowance_transactions is append-only'); END;
CREATE TRIGGER allowance_transactions_append_only_d BEFORE DELETE ON allowance_transactions
    BEGIN SELECT RAISE(ABORT, 'allowance_transactions is append-only'); END;
CREATE TRIGGER allowance_settlements_append_only_u BEFORE UPDATE ON allowance_settlements
    BEGIN SELECT RAISE(ABORT, 'allowance_settlements is append-only'); END;
CREATE TRIGGER allowance_settlements_append_only_d BEFORE DELETE ON allowance_settlements
    BEGIN SELECT RAISE(ABORT, 'allowance_settlements is append-only'); END;
