-- Corrections of allowance transactions (`flue import allowances --correct
-- REASON`). The rows of allowance_transactions never change, and no column
-- is added to them: the journal's content digest covers every column of
-- every row, so a new column would change the digest of entries already
-- written. A correction is a row here instead, with the full new values of
-- the transaction it supersedes, the batch and line it came from, and why.
--
-- A transaction's versions form one chain: the original row, then its
-- corrections, each superseding the one before (`corrects_id` NULL: the
-- original). The version in force is the one nothing supersedes; it keeps
-- the original's `seq`, so a corrected transaction keeps its place in the
-- order of recording. Settlement rows (deduction, offset) are never
-- corrected: the kinds and the retirement are left out here.

CREATE TABLE allowance_corrections (
    id             INTEGER PRIMARY KEY,
    transaction_id TEXT    NOT NULL REFERENCES allowance_transactions (id),
    corrects_id    INTEGER UNIQUE REFERENCES allowance_corrections (id),
    batch_id       INTEGER NOT NULL REFERENCES import_batches (id),
    line           INTEGER NOT NULL CHECK (line >= 1),
    date           TEXT    NOT NULL CHECK (date GLOB '[0-9][0-9][0-9][0-9]-[0-9][0-9]-[0-9][0-9]'),
    kind           TEXT    NOT NULL CHECK (kind IN ('allocation', 'transfer', 'adjustment')),
    program        TEXT    NOT NULL,
    vintage        INTEGER NOT NULL,
    quantity       INTEGER NOT NULL CHECK (quantity BETWEEN 1 AND 1000000000000),
    from_party     TEXT    NOT NULL CHECK (from_party IN ('issuer', 'account')),
    from_account   TEXT    CHECK ((from_party = 'account') = (from_account IS NOT NULL)),
    to_party       TEXT    NOT NULL CHECK (to_party IN ('issuer', 'account')),
    to_account     TEXT    CHECK ((to_party = 'account') = (to_account IS NOT NULL)),
    price          TEXT    CHECK (price IS NULL OR (price NOT GLOB '*[^0-9.]*' AND length(price) > 0)),
    note           TEXT    NOT NULL,
    serial_from    INTEGER CHECK (serial_from >= 0),
    serial_to      INTEGER CHECK (serial_to >= serial_from),
    reason         TEXT    NOT NULL CHECK (length(reason) > 0),
    CHECK ((serial_from IS NULL) = (serial_to IS NULL)),
    CHECK (serial_from IS NULL OR serial_to - serial_from + 1 = quantity),
    CHECK (NOT (from_party = to_party AND from_account IS to_account))
);
CREATE INDEX allowance_corrections_by_transaction ON allowance_corrections (transaction_id);
-- One first correction per transaction; with UNIQUE corrects_id, the chain never forks.
CREATE UNIQUE INDEX allowance_corrections_first ON allowance_corrections (transaction_id)
    WHERE corrects_id IS NULL;

-- A correction supersedes a version of its own transaction, never a settlement row.
CREATE TRIGGER allowance_corrections_chain BEFORE INSERT ON allowance_corrections
    WHEN (NEW.corrects_id IS NOT NULL AND NOT EXISTS (
              SELECT 1 FROM allowance_corrections p
              WHERE p.id = NEW.corrects_id AND p.transaction_id = NEW.transaction_id))
      OR EXISTS (SELECT 1 FROM allowance_transactions t
                 WHERE t.id = NEW.transaction_id AND t.settles_year IS NOT NULL)
    BEGIN SELECT RAISE(ABORT, 'allowance_corrections: a correction supersedes a version of its own transaction, never a settlement row'); END;

CREATE TRIGGER allowance_corrections_append_only_u BEFORE UPDATE ON allowance_corrections
    BEGIN SELECT RAISE(ABORT, 'allowance_corrections is append-only'); END;
CREATE TRIGGER allowance_corrections_append_only_d BEFORE DELETE ON allowance_corrections
    BEGIN SELECT RAISE(ABORT, 'allowance_corrections is append-only'); END;

-- Every transaction's version in force, at its original `seq`, with the
-- batch and line that version came from; `correction_id` is NULL for an
-- original never corrected.
CREATE VIEW current_allowance_transactions AS
    SELECT t.seq, t.batch_id, t.line, t.id, t.date, t.kind, t.program, t.vintage, t.quantity,
           t.from_party, t.from_account, t.to_party, t.to_account, t.price, t.note,
           t.serial_from, t.serial_to, t.settles_year, t.facility_id, NULL AS correction_id
    FROM allowance_transactions t
    WHERE NOT EXISTS (SELECT 1 FROM allowance_corrections c WHERE c.transaction_id = t.id)
    UNION ALL
    SELECT t.seq, c.batch_id, c.line, t.id, c.date, c.kind, c.program, c.vintage, c.quantity,
           c.from_party, c.from_account, c.to_party, c.to_account, c.price, c.note,
           c.serial_from, c.serial_to, NULL, t.facility_id, c.id
    FROM allowance_corrections c JOIN allowance_transactions t ON t.id = c.transaction_id
    WHERE NOT EXISTS (SELECT 1 FROM allowance_corrections d WHERE d.corrects_id = c.id);
