//! Schema migrations, applied in order; the count applied is `PRAGMA user_version`.
//! Never edit a released migration: add a new one.

pub const MIGRATIONS: &[(&str, &str)] = &[
    ("0001_init", include_str!("../../schema/0001_init.sql")),
    ("0002_hourly", include_str!("../../schema/0002_hourly.sql")),
    (
        "0003_allowances",
        include_str!("../../schema/0003_allowances.sql"),
    ),
    (
        "0004_journal",
        include_str!("../../schema/0004_journal.sql"),
    ),
    (
        "0005_hourly_blocks",
        include_str!("../../schema/0005_hourly_blocks.sql"),
    ),
    (
        "0006_allowance_corrections",
        include_str!("../../schema/0006_allowance_corrections.sql"),
    ),
];

/// Our own SQLite `application_id`: the ASCII bytes "FLUE". A file without
/// it is not a flue ledger and is refused.
pub const APPLICATION_ID: i32 = 0x464C_5545;

pub fn latest_version() -> i32 {
    MIGRATIONS.len() as i32
}
