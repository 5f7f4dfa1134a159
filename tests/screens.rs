//! Snapshot tests of every terminal screen on the example files: the text a user reads, byte for byte. After an
//! intended change, look at the new screens, then rewrite the snapshots with
//!     DIPWATCH_UPDATE_SNAPSHOTS=1 cargo test --test screens
//! and review the diff of tests/data/snapshots/ before committing.

mod common;
use common::repo;

fn screen(name: &str, args: &[&str]) {
    let mut full: Vec<String> = args.iter().map(|s| s.to_string()).collect();
    full.extend(
        [
            "--sites",
            &repo("sites.example.toml"),
            "--targets",
            &repo("targets.example.csv"),
        ]
        .map(String::from),
    );
    if args[0] == "nights" {
        full.truncate(full.len() - 2);
    }
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(&full)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let got = String::from_utf8(o.stdout).unwrap();
    let path = repo(&format!("tests/data/snapshots/{name}.txt"));
    if std::env::var_os("DIPWATCH_UPDATE_SNAPSHOTS").is_some() {
        std::fs::write(&path, &got).unwrap();
        return;
    }
    let want = std::fs::read_to_string(&path)
        .unwrap_or_else(|e| panic!("{path}: {e}; create it with DIPWATCH_UPDATE_SNAPSHOTS=1"));
    assert!(
        got == want,
        "screen {name} changed; if intended, rerun with DIPWATCH_UPDATE_SNAPSHOTS=1\n--- got\n{got}\n--- want\n{want}"
    );
    for line in got.lines() {
        assert!(
            line.chars().count() <= 120,
            "{name}: line wider than 120:\n{line}"
        );
    }
}

#[test]
fn plan_table() {
    screen("plan", &["plan", "--from", "2027-03-01", "--days", "14"]);
}

#[test]
fn tonight_text() {
    screen(
        "tonight",
        &[
            "tonight",
            "--site",
            "Kestrel Moor",
            "--date",
            "2027-03-07",
            "--target",
            "Amberfall b",
            "--target",
            "Moss Harbour b",
            "--target",
            "Saltmarsh d",
        ],
    );
}

#[test]
fn nights_table() {
    screen(
        "nights",
        &[
            "nights",
            "--site",
            "Quebrada Lenta",
            "--from",
            "2027-04-01",
            "--days",
            "5",
        ],
    );
}

#[test]
fn schedule_table() {
    screen(
        "schedule",
        &["schedule", "--from", "2027-03-01", "--days", "5"],
    );
}

#[test]
fn refine_report() {
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args([
            "refine",
            "--targets",
            &repo("targets.example.csv"),
            "--observed",
            &repo("observed.example.csv"),
            "--stale-at",
            "2027-09-01",
        ])
        .output()
        .unwrap();
    assert!(o.status.success());
    let got = String::from_utf8(o.stdout).unwrap();
    let path = repo("tests/data/snapshots/refine.txt");
    if std::env::var_os("DIPWATCH_UPDATE_SNAPSHOTS").is_some() {
        std::fs::write(&path, &got).unwrap();
        return;
    }
    assert_eq!(
        got,
        std::fs::read_to_string(&path).unwrap(),
        "refine report changed"
    );
}
