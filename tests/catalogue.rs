//! Catalogue exports read as they come: units in the column mapping, two-sided errors, and the hints for values
//! that only make sense in another unit.

mod common;
use common::{repo, temp};

/// The one-line mapping of the worked example in the README ("Importing a catalogue export").
const MAP: &str = "name=Object,ra=RA (h):hours,dec=Dec (deg):deg,t0=Tmid (BTJD):bjd-2457000,\
t0_sigma_days=Tmid err+ (min)|Tmid err- (min):min,period_days=Period (d),period_sigma_days=Period err (s):s,\
t0_period_cov_days2=T0xP cov,t14_hours=Duration (min):min,depth_ppt=Depth (ppm):ppm,time_system=Timescale,\
mag=Vmag,priority=Priority,notes=Comment";

fn dipwatch(args: &[&str]) -> std::process::Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(args)
        .output()
        .unwrap()
}

fn plan_csv(targets: &str, extra: &[&str]) -> String {
    let mut args = vec![
        "plan",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        targets,
        "--from",
        "2027-03-01",
        "--days",
        "30",
        "--format",
        "csv",
        "--include-unobservable",
    ]
    .into_iter()
    .map(String::from)
    .collect::<Vec<_>>();
    args.extend(extra.iter().map(|s| s.to_string()));
    let o = dipwatch(&args.iter().map(String::as_str).collect::<Vec<_>>());
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout).unwrap()
}

#[test]
fn the_foreign_export_plans_exactly_like_the_canonical_file() {
    let foreign = plan_csv(
        &repo("tests/data/foreign_catalogue.csv"),
        &["--columns", MAP],
    );
    let canonical = plan_csv(&repo("targets.example.csv"), &[]);
    assert!(foreign.lines().count() > 100);
    assert_eq!(foreign, canonical);
}

fn write(name: &str, text: &str) -> String {
    let d = temp(name);
    let p = d.join("t.csv");
    std::fs::write(&p, text).unwrap();
    p.to_str().unwrap().to_string()
}

fn plan_error(targets: &str, extra: &[&str]) -> String {
    let sites = repo("sites.example.toml");
    let mut args = vec!["plan", "--sites", &sites, "--targets", targets];
    args.extend_from_slice(extra);
    let o = dipwatch(&args);
    assert_eq!(
        o.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&o.stdout)
    );
    String::from_utf8_lossy(&o.stderr).to_string()
}

#[test]
fn values_that_only_make_sense_in_another_unit_name_it() {
    let header = "name,ra,dec,t0,t0_sigma_days,period_days,period_sigma_days,t14_hours,depth_ppt\n";
    // RA in decimal hours read as degrees: every value below 24.
    let hours = write(
        "ra-hours",
        &format!(
            "{header}A b,3.239583,+10.0,2460700.5,0.001,2.5,0.00001,2.0,10\n\
             B b,12.5,-20.0,2460700.5,0.001,3.5,0.00001,2.0,10\n\
             C b,20.25,+30.0,2460700.5,0.001,4.5,0.00001,2.0,10\n"
        ),
    );
    let err = plan_error(&hours, &[]);
    assert!(
        err.contains("t.csv:1: ra: found only values below 24"),
        "{err}"
    );
    assert!(
        err.contains("likely unit: hours") && err.contains("ra=THEIRS:hours"),
        "{err}"
    );
    // ...and naming the unit reads them.
    let o = dipwatch(&[
        "plan",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &hours,
        "--columns",
        "ra=ra:hours",
        "--from",
        "2027-03-01",
        "--days",
        "2",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    // Depth in ppm.
    let ppm = write(
        "ppm",
        &format!("{header}A b,150.0,+10.0,2460700.5,0.001,2.5,0.00001,2.0,17300\n"),
    );
    let err = plan_error(&ppm, &[]);
    assert!(
        err.contains("t.csv:2: depth_ppt: found 17300")
            && err.contains("likely unit: ppm (17.3 ppt)"),
        "{err}"
    );
    // Duration in minutes.
    let minutes = write(
        "minutes",
        &format!("{header}A b,150.0,+10.0,2460700.5,0.001,2.5,0.00001,120,10\n"),
    );
    let err = plan_error(&minutes, &[]);
    assert!(
        err.contains("t14_hours: found 120 h") && err.contains("t14_hours=THEIRS:min"),
        "{err}"
    );
    // A unit that does not fit the column.
    let err = plan_error(&minutes, &["--columns", "ra=ra:min"]);
    assert!(
        err.contains("--columns: found unit \"min\" for ra, expected hours, deg or hms"),
        "{err}"
    );
}

#[test]
fn refine_writes_back_in_the_catalogues_own_units() {
    let d = temp("foreign-refine");
    let targets = d.join("foreign.csv");
    std::fs::copy(repo("tests/data/foreign_catalogue.csv"), &targets).unwrap();
    let out = d.join("refined.csv");
    let o = dipwatch(&[
        "refine",
        "--targets",
        targets.to_str().unwrap(),
        "--columns",
        MAP,
        "--observed",
        &repo("observed.example.csv"),
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    // Read back with the same mapping: the refined ephemeris, in days, equals what refine reports.
    let map = dipwatch::inputs::targets::ColumnMap::parse(MAP).unwrap();
    let text = std::fs::read_to_string(&out).unwrap();
    let refined = dipwatch::inputs::targets::parse_targets("r", &text, &map).unwrap();
    let amber = refined.iter().find(|t| t.name == "Amberfall b").unwrap();
    assert!(
        amber.ephemeris.t0 > 2_460_900.0,
        "T0 moved to the reference epoch: {}",
        amber.ephemeris.t0
    );
    assert!(amber.ephemeris.t0_sigma_days < 0.00042 && amber.ephemeris.t0_sigma_days > 1e-5);
    // The file itself keeps BTJD and minutes: both error columns hold the same magnitude, the minus one negative.
    let mut rdr = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(text.as_bytes());
    let rec = rdr.records().next().unwrap().unwrap();
    let t0: f64 = rec[3].parse().unwrap();
    let plus: f64 = rec[4].parse().unwrap();
    let minus: f64 = rec[5].parse().unwrap();
    assert!(
        t0 > 3000.0 && t0 < 5000.0,
        "T0 written as BJD-2457000: {t0}"
    );
    assert!(
        (plus - amber.ephemeris.t0_sigma_days * 1440.0).abs() < 1e-3 && minus == -plus,
        "{plus} {minus}"
    );
}

#[test]
fn ecsv_has_a_typed_self_describing_header() {
    // ECSV 1.0 (astropy APE 6): `# %ECSV 1.0`, `# ---`, then YAML (delimiter, datatype list with name, unit,
    // datatype, description) under "# ", then the CSV with the same column names.
    let o = dipwatch(&[
        "plan",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &repo("targets.example.csv"),
        "--from",
        "2027-03-01",
        "--days",
        "10",
        "--format",
        "ecsv",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8(o.stdout).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("# %ECSV 1.0"));
    assert_eq!(lines.next(), Some("# ---"));
    let yaml: String = text
        .lines()
        .skip(2)
        .take_while(|l| l.starts_with('#'))
        .map(|l| format!("{}\n", l.strip_prefix("# ").unwrap_or("")))
        .collect();
    let header: serde_yaml::Value = serde_yaml::from_str(&yaml).unwrap();
    assert_eq!(header["delimiter"], serde_yaml::Value::from(","));
    let cols = header["datatype"].as_sequence().unwrap();
    let names: Vec<&str> = cols.iter().map(|c| c["name"].as_str().unwrap()).collect();
    assert_eq!(
        names,
        dipwatch::outputs::event_field_names().collect::<Vec<_>>()
    );
    let col = |n: &str| cols.iter().find(|c| c["name"].as_str() == Some(n)).unwrap();
    assert_eq!(col("sigma_min")["unit"].as_str(), Some("min"));
    assert_eq!(col("alt_mid_deg")["unit"].as_str(), Some("deg"));
    assert_eq!(col("epoch")["datatype"].as_str(), Some("int64"));
    assert_eq!(col("observable")["datatype"].as_str(), Some("bool"));
    // The CSV part: a header of the same names, rows with as many fields, booleans True/False.
    let data: Vec<&str> = text.lines().filter(|l| !l.starts_with('#')).collect();
    assert_eq!(data[0].split(',').collect::<Vec<_>>(), names);
    let joined = data.join("\n");
    let mut rdr = csv::Reader::from_reader(joined.as_bytes());
    let mut n = 0;
    for r in rdr.records() {
        let r = r.unwrap();
        assert_eq!(r.len(), names.len());
        let observable = names.iter().position(|n| *n == "observable").unwrap();
        assert!(&r[observable] == "True" || &r[observable] == "False");
        n += 1;
    }
    assert!(n > 5);
    // tonight prints the night's events with the same columns.
    let o = dipwatch(&[
        "tonight",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &repo("targets.example.csv"),
        "--site",
        "Kestrel Moor",
        "--date",
        "2027-03-07",
        "--format",
        "ecsv",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let t = String::from_utf8(o.stdout).unwrap();
    assert!(
        t.starts_with("# %ECSV 1.0\n")
            && t.contains("\nAmberfall b,Kestrel Moor,main,transit,274,whole,True,"),
        "{t}"
    );
    // A command that prints no events refuses it.
    let o = dipwatch(&[
        "nights",
        "--sites",
        &repo("sites.example.toml"),
        "--site",
        "Kestrel Moor",
        "--format",
        "ecsv",
    ]);
    assert_eq!(o.status.code(), Some(2));
}

#[test]
fn a_project_file_holds_the_files_the_mapping_and_the_defaults() {
    let d = temp("project");
    std::fs::write(
        d.join("dipwatch.toml"),
        format!(
            "# The example programme, read from a foreign catalogue export.\nsites = {:?}\ntargets = {:?}\ncolumns = {:?}\n\n[plan]\nsigma = 2\nformat = \"csv\"\n",
            repo("sites.example.toml"),
            repo("tests/data/foreign_catalogue.csv"),
            MAP
        ),
    )
    .unwrap();
    let run_in = |args: &[&str]| {
        std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
            .args(args)
            .current_dir(&d)
            .output()
            .unwrap()
    };
    // Found in the working folder: no file options, the mapping applied, CSV by default, sigma 2 from the file.
    let o = run_in(&[
        "plan",
        "--from",
        "2027-03-01",
        "--days",
        "30",
        "--include-unobservable",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let with_file = String::from_utf8(o.stdout).unwrap();
    let canonical_sigma2 = plan_csv(&repo("targets.example.csv"), &["--sigma", "2"]);
    assert_eq!(with_file, canonical_sigma2);
    // The command line wins over the file.
    let o = run_in(&[
        "plan",
        "--from",
        "2027-03-01",
        "--days",
        "30",
        "--include-unobservable",
        "--sigma",
        "1",
    ]);
    assert_eq!(
        String::from_utf8(o.stdout).unwrap(),
        plan_csv(&repo("targets.example.csv"), &[])
    );
    // `config` says what is in effect and where it comes from.
    let o = run_in(&["config"]);
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(
        text.contains("sigma            2") && text.contains("dipwatch.toml:7"),
        "{text}"
    );
    assert!(
        text.contains("baseline_before  30") && text.contains("from built-in default"),
        "{text}"
    );
    // An unknown key is an error with its line.
    std::fs::write(d.join("bad.toml"), "sites = \"x\"\n[plan]\nsigmaa = 2\n").unwrap();
    let o = run_in(&["plan", "--config", "bad.toml"]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("bad.toml:3:") && err.contains("sigmaa"),
        "{err}"
    );
}
