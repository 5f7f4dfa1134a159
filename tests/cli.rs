//! The `dipwatch` binary end to end: the README's example run, output formats, and bad input.

mod common;
use common::repo;
use std::path::PathBuf;
use std::process::{Command, Output};

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(args)
        .output()
        .expect("binary runs")
}

fn run_in(dir: &std::path::Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .current_dir(dir)
        .args(args)
        .output()
        .expect("binary runs")
}

fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn temp_dir(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("dipwatch-cli-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

const EXAMPLE: [&str; 10] = [
    "plan",
    "--sites",
    "SITES",
    "--targets",
    "TARGETS",
    "--from",
    "2027-03-01",
    "--days",
    "30",
    "--format",
];

fn example_args(format: &str) -> Vec<String> {
    let mut v: Vec<String> = EXAMPLE.iter().map(|s| s.to_string()).collect();
    v[2] = repo("sites.example.toml");
    v[4] = repo("targets.example.csv");
    v.push(format.into());
    v
}

#[test]
fn readme_example_table() {
    let args = example_args("table");
    let o = run(&args.iter().map(String::as_str).collect::<Vec<_>>());
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    for site in ["Kestrel Moor", "Juniper Draw Station", "Quebrada Lenta"] {
        assert!(out.contains(site), "{site} missing");
    }
    assert!(out.contains("whole"), "{out}");
    assert!(
        out.lines().all(|l| l.chars().count() <= 120),
        "a line is wider than 120 columns:\n{out}"
    );
    // Table rows: no blank separator rows and no row wrapped onto a second line (a row whose Night, Target and
    // Verdict cells are all empty is a continuation or a blank).
    let rows: Vec<&str> = out.lines().filter(|l| l.contains('\u{2502}')).collect();
    assert!(rows.len() > 20);
    for r in &rows {
        let cells: Vec<&str> = r.split('\u{2502}').collect();
        assert!(
            !(cells[1].trim().is_empty() && cells[2].trim().is_empty()),
            "blank or wrapped row:\n{r}\n{out}"
        );
    }
    assert!(out.contains("Verdict: whole = "), "verdict legend missing");
}

#[test]
fn json_has_the_documented_fields_and_matches_csv() {
    let o = run(&example_args("json")
        .iter()
        .map(String::as_str)
        .collect::<Vec<_>>());
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_str(&stdout(&o)).expect("valid JSON");
    let events = v["events"].as_array().expect("events array");
    assert!(events.len() > 20, "only {} events", events.len());
    let required = [
        "target",
        "site",
        "epoch",
        "verdict",
        "coverage",
        "mid_utc",
        "ingress_utc",
        "egress_utc",
        "block_start_utc",
        "block_end_utc",
        "sigma_min",
        "night_of",
        "night_start_utc",
        "night_end_utc",
        "alt_ingress_deg",
        "alt_mid_deg",
        "alt_egress_deg",
        "airmass_mid",
        "az_mid_deg",
        "sun_alt_mid_deg",
        "moon_alt_mid_deg",
        "moon_sep_deg",
        "moon_illum",
        "reasons",
    ];
    for e in events {
        for f in required {
            assert!(e.get(f).is_some(), "field {f} missing in {e}");
        }
        // RFC 3339 UTC with milliseconds (RFC 3339 section 5.6, "Z" for UTC).
        let mid = e["mid_utc"].as_str().unwrap();
        assert!(
            chrono::DateTime::parse_from_rfc3339(mid).is_ok()
                && mid.ends_with('Z')
                && mid.len() == 24,
            "{mid}"
        );
        let c = e["coverage"].as_f64().unwrap();
        assert!((0.0..=1.0).contains(&c));
        assert!(
            e["ingress_utc"].as_str() < e["mid_utc"].as_str()
                && e["mid_utc"].as_str() < e["egress_utc"].as_str()
        );
    }
    assert!(v["options"]["sigma_k"].as_f64() == Some(1.0));
    let csv_out = stdout(&run(&example_args("csv")
        .iter()
        .map(String::as_str)
        .collect::<Vec<_>>()));
    let mut rdr = csv::Reader::from_reader(csv_out.as_bytes());
    let header: Vec<String> = rdr.headers().unwrap().iter().map(str::to_string).collect();
    let keys: Vec<String> = events[0].as_object().unwrap().keys().cloned().collect();
    assert_eq!(header, keys, "CSV columns and JSON fields differ");
    assert_eq!(rdr.records().count(), events.len());
}

#[test]
fn same_inputs_give_identical_output() {
    let args = example_args("json");
    let a = run(&args.iter().map(String::as_str).collect::<Vec<_>>());
    let b = run(&args.iter().map(String::as_str).collect::<Vec<_>>());
    assert_eq!(a.stdout, b.stdout);
}

#[test]
fn missing_default_files_point_to_the_examples() {
    let d = temp_dir("missing");
    let o = run_in(&d, &["plan", "--from", "2027-03-01"]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(
        err.starts_with("dipwatch: no sites file given and ./sites.toml not found"),
        "{err}"
    );
    assert!(err.contains("sites.example.toml"), "{err}");
}

#[test]
fn bad_targets_are_all_reported_with_file_line_field_and_exit_2() {
    let d = temp_dir("bad");
    let targets = d.join("targets.csv");
    std::fs::write(
        &targets,
        "name,ra,dec,t0,t0_sigma_days,period_days,period_sigma_days,t14_hours\n\
         A,10:00:00,+95:00:00,2460000.5,0.001,3.0,0.00001,2.0\n\
         B,10:00:00,+10:00:00,2460000.5,0.001,-3.0,0.00001,2.0\n",
    )
    .unwrap();
    let out_file = d.join("plan.json");
    let o = run(&[
        "plan",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        targets.to_str().unwrap(),
        "--from",
        "2027-03-01",
        "--format",
        "json",
        "--out",
        out_file.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    let err = stderr(&o);
    assert!(
        err.contains("targets.csv:2: dec: found \"+95:00:00\", expected a declination"),
        "{err}"
    );
    assert!(
        err.contains("targets.csv:3: period_days: found -3, expected a period in days, > 0"),
        "{err}"
    );
    assert!(!err.contains("panicked"), "{err}");
    assert!(
        !out_file.exists(),
        "an output file was written despite the error"
    );
}

#[test]
fn out_file_is_written_whole_and_unknown_site_is_named() {
    let d = temp_dir("out");
    let out_file = d.join("plan.csv");
    let mut args = example_args("csv");
    args.extend(["--out".to_string(), out_file.to_str().unwrap().to_string()]);
    let o = run(&args.iter().map(String::as_str).collect::<Vec<_>>());
    assert!(o.status.success(), "{}", stderr(&o));
    let text = std::fs::read_to_string(&out_file).unwrap();
    assert!(text.starts_with("target,site,telescope,kind,epoch,verdict"));
    assert_eq!(
        std::fs::read_dir(&d).unwrap().count(),
        1,
        "temporary files left behind"
    );
    let o = run(&[
        "plan",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &repo("targets.example.csv"),
        "--site",
        "Nowhere",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(
        stderr(&o).contains("--site \"Nowhere\": no site of that name"),
        "{}",
        stderr(&o)
    );
}

#[test]
fn streamed_json_and_ecsv_are_the_documents_of_the_whole_plan() {
    // `plan --format json` streams one event per line; parsed, it is the document the library builds for the
    // whole plan (options, sites with their nights without darkness, events, lost ephemerides).
    let (sites, targets) = common::example_inputs();
    let opts = dipwatch::engine::plan::PlanOptions {
        first_night: "2027-03-01".parse().unwrap(),
        last_night: "2027-04-29".parse().unwrap(),
        sigma_k: 1.0,
        baseline_before_min: 30.0,
        baseline_after_min: 30.0,
        min_coverage: 0.0,
        min_in_transit_min: dipwatch::engine::plan::DEFAULT_MIN_IN_TRANSIT_MIN,
        min_snr: 0.0,
        include_unobservable: true,
        kinds: vec![dipwatch::orbit::EventKind::Transit],
        rv_window_hours: 1.0,
    };
    let p = dipwatch::engine::plan::plan(&sites, &targets, &opts);
    let want: serde_json::Value =
        serde_json::from_str(&dipwatch::outputs::plan_json(&p, &sites, &targets, &opts)).unwrap();
    let args = |format: &str| {
        vec![
            "plan".to_string(),
            "--sites".into(),
            repo("sites.example.toml"),
            "--targets".into(),
            repo("targets.example.csv"),
            "--from".into(),
            "2027-03-01".into(),
            "--days".into(),
            "60".into(),
            "--include-unobservable".into(),
            "--format".into(),
            format.into(),
        ]
    };
    let o = run(&args("json").iter().map(String::as_str).collect::<Vec<_>>());
    assert!(o.status.success(), "{}", stderr(&o));
    let got: serde_json::Value = serde_json::from_str(&stdout(&o)).unwrap();
    assert!(want["events"].as_array().unwrap().len() > 100);
    assert_eq!(got, want);
    // ECSV rows are the CSV rows with True/False.
    let e = run(&args("ecsv").iter().map(String::as_str).collect::<Vec<_>>());
    let c = run(&args("csv").iter().map(String::as_str).collect::<Vec<_>>());
    let ecsv_rows: Vec<String> = stdout(&e)
        .lines()
        .filter(|l| !l.starts_with('#'))
        .map(|l| l.replace(",True,", ",true,").replace(",False,", ",false,"))
        .collect();
    let csv_rows: Vec<String> = stdout(&c).lines().map(str::to_string).collect();
    assert_eq!(ecsv_rows, csv_rows);
}

#[test]
fn noise_budget_command() {
    let o = run(&[
        "noise",
        "--aperture",
        "1.0",
        "--mag",
        "11.5",
        "--band",
        "V",
        "--exposure",
        "60",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let out = stdout(&o);
    for term in [
        "source",
        "sky",
        "dark",
        "read",
        "scintillation",
        "total (white)",
        "per 10 min",
    ] {
        assert!(out.contains(term), "{term} missing:\n{out}");
    }
    // A bright star on a small telescope saturates even at the shortest exposure: say so.
    let o = run(&["noise", "--aperture", "0.4", "--mag", "6"]);
    assert!(
        stdout(&o).contains("SATURATES even at 1 s: defocus"),
        "{}",
        stdout(&o)
    );
    // A band that does not exist is an error naming the choices.
    let o = run(&["noise", "--aperture", "0.4", "--mag", "12", "--band", "Q"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--band: found \"Q\", expected U, B, V, R, I, g, r, i or z"));
}

#[test]
fn min_snr_drops_events_with_their_reason() {
    let base = [
        "plan",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &repo("targets.example.csv"),
        "--site",
        "Kestrel Moor",
        "--from",
        "2027-03-01",
        "--days",
        "10",
        "--format",
        "json",
    ]
    .map(String::from)
    .to_vec();
    let get = |extra: &[&str]| {
        let mut a = base.clone();
        a.extend(extra.iter().map(|s| s.to_string()));
        let o = run(&a.iter().map(String::as_str).collect::<Vec<_>>());
        assert!(o.status.success(), "{}", stderr(&o));
        serde_json::from_str::<serde_json::Value>(&stdout(&o)).unwrap()
    };
    let all = get(&[]);
    let events = all["events"].as_array().unwrap();
    assert!(!events.is_empty());
    // The example's Kestrel Moor has a photometric set-up and every example target a magnitude.
    for e in events {
        assert!(
            e["snr"].as_f64().unwrap() > 0.0 && e["exposure_s"].as_f64().unwrap() >= 1.0,
            "{e}"
        );
    }
    assert!(get(&["--min-snr", "100000"])["events"]
        .as_array()
        .unwrap()
        .is_empty());
    let why = get(&["--min-snr", "100000", "--include-unobservable"]);
    assert!(why["events"]
        .as_array()
        .unwrap()
        .iter()
        .any(|e| e["reasons"]
            .as_array()
            .unwrap()
            .iter()
            .any(|r| r == "snr-below-minimum")));
}
