-- The journal: one entry per change to the ledger, hash-chained.
--
-- Entry n covers the rows its write added: for each table, the rowids in
-- (the previous entries' highest rowid, last_rowid], listed in
-- journal_rows. Its content_digest is SHA-256 over a typed, length-prefixed
-- encoding of every column of those rows; its hash is SHA-256 over the
-- previous entry's hash and every column of the entry and of its
-- journal_rows (src/audit/mod.rs gives the encoding). `flue verify`
-- recomputes both from the stored rows.
--
-- Certifications and their amendments are rows like any other, so their
-- entries cover them too.

CREATE TABLE journal (
    seq            INTEGER PRIMARY KEY CHECK (seq >= 1),
    kind           TEXT    NOT NULL CHECK (kind IN ('site-version', 'import-batch', 'allowance-transactions',
                                                    'settlement', 'certification', 'amendment', 'existing-rows')),
    record_id      INTEGER,
    at             TEXT    NOT NULL,
    by             TEXT    NOT NULL,
    reason         TEXT,
    content_digest TEXT    NOT NULL CHECK (length(content_digest) = 64),
    schema_digest  TEXT    NOT NULL CHECK (length(schema_digest) = 64),
    prev_hash      TEXT    NOT NULL CHECK (length(prev_hash) = 64),
    hash           TEXT    NOT NULL UNIQUE CHECK (length(hash) = 64)
);

CREATE TABLE journal_rows (
    seq        INTEGER NOT NULL REFERENCES journal (seq),
    table_name TEXT    NOT NULL,
    first_rowid INTEGER NOT NULL,
    last_rowid  INTEGER NOT NULL CHECK (last_rowid >= first_rowid),
    row_count   INTEGER NOT NULL CHECK (row_count BETWEEN 1 AND last_rowid - first_rowid + 1),
    PRIMARY KEY (seq, table_name)
);
CREATE INDEX journal_rows_by_table ON journal_rows (table_name, last_rowid);

-- A certified year: the digest of its annual report and the journal head
-- when it was certified.
CREATE TABLE certifications (
    id            INTEGER PRIMARY KEY,
    year          INTEGER NOT NULL,
    certified_at  TEXT    NOT NULL,
    certified_by  TEXT    NOT NULL CHECK (length(certified_by) > 0),
    statement     TEXT,
    report_sha256 TEXT    NOT NULL CHECK (length(report_sha256) = 64),
    head_seq      INTEGER NOT NULL,
    head_hash     TEXT    NOT NULL CHECK (length(head_hash) = 64)
);

-- A write that touched a certified year with --correct REASON --amend.
CREATE TABLE amendments (
    id               INTEGER PRIMARY KEY,
    certification_id INTEGER NOT NULL REFERENCES certifications (id),
    journal_seq      INTEGER NOT NULL REFERENCES journal (seq),
    amended_at       TEXT    NOT NULL,
    amended_by       TEXT    NOT NULL,
    reason           TEXT    NOT NULL CHECK (length(reason) > 0)
);

CREATE TRIGGER journal_append_only_u BEFORE UPDATE ON journal
    BEGIN SELECT RAISE(ABORT, 'journal is append-only'); END;
CREATE TRIGGER journal_append_only_d BEFORE DELETE ON journal
    BEGIN SELECT RAISE(ABORT, 'journal is append-only'); END;
CREATE TRIGGER journal_rows_append_only_u BEFORE UPDATE ON journal_rows
    BEGIN SELECT RAISE(ABORT, 'journal_rows is append-only'); END;
CREATE TRIGGER journal_rows_append_only_d BEFORE DELETE ON journal_rows
    BEGIN SELECT RAISE(ABORT, 'journal_rows is append-only'); END;
CREATE TRIGGER certifications_append_only_u BEFORE UPDATE ON certifications
    BEGIN SELECT RAISE(ABORT, 'certifications is append-only'); END;
CREATE TRIGGER certifications_append_only_d BEFORE DELETE ON certifications
    BEGIN SELECT RAISE(ABORT, 'certifications is append-only'); END;
CREATE TRIGGER amendments_append_only_u BEFORE UPDATE ON amendments
    BEGIN SELECT RAISE(ABORT, 'amendments is append-only'); END;
CREATE TRIGGER amendments_append_only_d BEFORE DELETE ON amendments
    BEGIN SELECT RAISE(ABORT, 'amendments is append-only'); END;
