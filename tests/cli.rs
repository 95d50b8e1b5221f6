//! Golden CLI cases: every file in tests/cmd/ runs the `flue` binary in a
//! sandbox copied from its `*.in/` directory and compares stdout, stderr and
//! the exit status with the recorded ones. Regenerate with
//! `TRYCMD=overwrite cargo test --test cli`, then read the diff.
//!
//! FLUE_NOW and FLUE_USER fix who and when for everything a case writes, so
//! no case reads the real clock or depends on who runs it.

#[test]
fn cli() {
    trycmd::TestCases::new()
        .env("FLUE_NOW", "2026-01-20T09:00:00Z")
        .env("FLUE_USER", "golden-test")
        .env("FLUE_LEDGER", "flue.db")
        .env("COLUMNS", "200")
        .case("tests/cmd/*.toml")
        .case("tests/cmd/*.trycmd");
}
