//! Named crash points for the fault tests (RELIABILITY.md C1, R13).
//!
//! `crashpoint("write-rows")` aborts the process (`std::process::abort`, so
//! no destructor, rollback or flush runs) when the environment variable
//! `FLUE_CRASH_AT` equals the point's name. The variable is read once per
//! process and cached, so a point costs one string comparison. It is a test
//! hook, not a user setting: `tests/faults.rs` drives it.
//!
//! The points, in the order a write reaches them:
//! - `write-begin`: the input is parsed, no transaction is open yet
//!   (`Ledger::write`; the hourly import parses inside its transaction);
//! - `write-rows`: the rows are inserted, the journal entry is not;
//! - `write-journal`: the journal entry is written, `COMMIT` is not;
//! - `write-commit`: committed, nothing printed or written out yet;
//! - `out-temp`: an `--out` file is written in full under its temporary
//!   name and not yet renamed into place (`cli::emit`).

use std::sync::OnceLock;

/// Every named point, in the order a command reaches them.
pub const POINTS: &[&str] = &[
    "write-begin",
    "write-rows",
    "write-journal",
    "write-commit",
    "out-temp",
];

/// Abort here if `FLUE_CRASH_AT` names this point.
pub fn crashpoint(name: &str) {
    static CRASH_AT: OnceLock<Option<String>> = OnceLock::new();
    let at = CRASH_AT.get_or_init(|| std::env::var("FLUE_CRASH_AT").ok());
    if at.as_deref() == Some(name) {
        debug_assert!(POINTS.contains(&name), "unlisted crash point {name}");
        std::process::abort();
    }
}
