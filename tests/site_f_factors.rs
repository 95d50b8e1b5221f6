//! Site-specific F-factors from an ultimate analysis (40 CFR 75 App. F
//! §3.3.6, Eq. F-7a; coefficients from memory, as REFERENCES.md marks them)
//! in place of App. F Table 1, named by a CEMS unit's `f_factors_sample`.

use assert_cmd::Command;
use rust_decimal::Decimal;
use std::path::Path;
use std::str::FromStr;

fn flue(ledger: &Path) -> Command {
    let mut c = Command::cargo_bin("flue").unwrap();
    c.env("FLUE_NOW", "2026-02-01T08:00:00Z")
        .env("FLUE_USER", "tester")
        .env("FLUE_LEDGER", ledger);
    c
}

fn d(s: &str) -> Decimal {
    Decimal::from_str(s).unwrap()
}

const SITE: &str = r#"[facility]
id = "QF1"
name = "Quillfeather Mill"
utc_offset = "-06:00"

[[units]]
id = "QB1"
kind = "boiler"
fuel = "bituminous"
max_load_mw = "300"
f_factors_sample = "QB1-UA-01"

[[units.methods]]
quantity = "heat_input"
method = "cems"
"#;

fn plant(analysis_row: &str) -> (tempfile::TempDir, std::path::PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let ledger = dir.path().join("flue.db");
    std::fs::write(dir.path().join("site.toml"), SITE).unwrap();
    std::fs::write(
        dir.path().join("a.csv"),
        format!("sample,fuel,sampled_on,sulfur_pct,gcv,gcv_uom,carbon_pct,hydrogen_pct,nitrogen_pct,oxygen_pct\n{analysis_row}\n"),
    )
    .unwrap();
    std::fs::write(
        dir.path().join("h.csv"),
        "unit,hour,op_time,load_mw,o2_pct_dry,flow_scfh_wet,h2o_pct\n\
         QB1,2025-04-01T00:00,1.00,250,5.4,30000000,8.0\n\
         QB1,2025-04-01T01:00,0.50,240,6.0,28000000,9.0\n",
    )
    .unwrap();
    flue(&ledger).arg("init").assert().success();
    flue(&ledger)
        .args(["site", "load"])
        .arg(dir.path().join("site.toml"))
        .assert()
        .success();
    flue(&ledger)
        .args(["import", "analyses"])
        .arg(dir.path().join("a.csv"))
        .assert()
        .success();
    flue(&ledger)
        .args(["import", "hourly"])
        .arg(dir.path().join("h.csv"))
        .assert()
        .success();
    (dir, ledger)
}

#[test]
fn heat_input_uses_the_f_factor_of_the_units_ultimate_analysis() {
    let (_dir, ledger) = plant("QB1-UA-01,bituminous,2025-01-15,2.1,12400,btu/lb,70.5,4.8,1.4,6.2");
    let out = flue(&ledger)
        .args(["report", "annual", "--year", "2025", "--format", "json"])
        .assert()
        .success()
        .get_output()
        .stdout
        .clone();
    let r: serde_json::Value = serde_json::from_slice(&out).unwrap();
    let got = d(r["units"][0]["heat_input_mmbtu"].as_str().unwrap());
    // Eq. F-7a (from memory): F = 10^6 (3.64 %H + 1.53 %C + 0.57 %S + 0.14 %N − 0.46 %O) / GCV.
    let f = d("1000000")
        * (d("3.64") * d("4.8")
            + d("1.53") * d("70.5")
            + d("0.57") * d("2.1")
            + d("0.14") * d("1.4")
            - d("0.46") * d("6.2"))
        / d("12400");
    // Eq. F-18 (form from memory): HI = Qw (100 − %H2O)/(100 F) (20.9 − %O2d)/20.9, × op time.
    let hi = |q: &str, h2o: &str, o2: &str, t: &str| {
        d(q) * (d("100") - d(h2o)) / (d("100") * f) * (d("20.9") - d(o2)) / d("20.9") * d(t)
    };
    let expected = hi("30000000", "8.0", "5.4", "1.00") + hi("28000000", "9.0", "6.0", "0.50");
    let diff = (got - expected).abs() / expected;
    assert!(diff < d("0.000000001"), "got {got}, expected {expected}");
    // The site-specific F differs from App. F Table 1's 9,780 for bituminous, so this test
    // would fail if the table value were used.
    assert!((f - d("9780")).abs() > d("10"), "F = {f}");
}

#[test]
fn an_analysis_without_hydrogen_is_refused_by_name() {
    let (_dir, ledger) = plant("QB1-UA-01,bituminous,2025-01-15,2.1,12400,btu/lb,70.5,,1.4,6.2");
    let err = flue(&ledger)
        .args(["report", "annual", "--year", "2025"])
        .assert()
        .code(1)
        .get_output()
        .stderr
        .clone();
    let err = String::from_utf8_lossy(&err);
    assert!(
        err.contains("f_factors_sample QB1-UA-01 has no hydrogen_pct"),
        "{err}"
    );
}
