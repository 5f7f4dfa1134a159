//! Calendar export checked against RFC 5545 and read back with a parser that did not write it (`ical` 0.11).
//!
//! The `ical` parser does not unescape TEXT values and trims whitespace at the end of each physical line before
//! joining a fold (so a space just before a fold is lost). The tests account for both: values are compared
//! exactly after an RFC 5545 unfold and unescape written here, and `ical`'s values are checked against the same
//! raw text with its documented trimming applied.

use dipwatch::engine::plan::{plan, PlanOptions};
use dipwatch::inputs::sites::parse_sites;
use dipwatch::inputs::targets::{parse_targets, ColumnMap};
use dipwatch::outputs::calendar::{description, summary, uid_of};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn repo(rel: &str) -> String {
    format!("{}/{rel}", env!("CARGO_MANIFEST_DIR"))
}

fn temp(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("dipwatch-cal-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn dipwatch(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .env("SOURCE_DATE_EPOCH", "1800000000")
        .args(args)
        .output()
        .unwrap()
}

fn export(sites: &str, targets: &str, out: &Path, extra: &[&str]) -> Output {
    let mut args = vec![
        "calendar",
        "--sites",
        sites,
        "--targets",
        targets,
        "--from",
        "2027-03-01",
        "--days",
        "20",
        "--out",
        out.to_str().unwrap(),
    ];
    args.extend_from_slice(extra);
    let o = dipwatch(&args);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    o
}

/// RFC 5545 section 3.1: a CRLF followed by one space or tab is removed.
fn rfc_unfold(raw: &str) -> String {
    raw.replace("\r\n ", "").replace("\r\n\t", "")
}

/// RFC 5545 section 3.3.11: \\ -> \, \; -> ;, \, -> ,, \n or \N -> newline.
fn rfc_unescape(v: &str) -> String {
    let mut out = String::new();
    let mut chars = v.chars();
    while let Some(c) = chars.next() {
        if c == '\\' {
            match chars.next() {
                Some('n') | Some('N') => out.push('\n'),
                Some(other) => out.push(other),
                None => out.push('\\'),
            }
        } else {
            out.push(c);
        }
    }
    out
}

/// Events as property maps from the raw text (our unfold), keyed by property name (parameters dropped).
fn raw_events(raw: &str) -> Vec<HashMap<String, String>> {
    let text = rfc_unfold(raw);
    let mut events = Vec::new();
    let mut cur: Option<HashMap<String, String>> = None;
    let mut depth_alarm = false;
    for line in text.split("\r\n") {
        match line {
            "BEGIN:VEVENT" => cur = Some(HashMap::new()),
            "END:VEVENT" => events.push(cur.take().unwrap()),
            "BEGIN:VALARM" => depth_alarm = true,
            "END:VALARM" => depth_alarm = false,
            _ => {
                if let (Some(ev), false) = (cur.as_mut(), depth_alarm) {
                    if let Some((k, v)) = line.split_once(':') {
                        let name = k.split(';').next().unwrap().to_string();
                        ev.insert(name, v.to_string());
                    }
                }
            }
        }
    }
    events
}

/// The same raw value as `ical` 0.11 reassembles it: each physical line trimmed at its end before joining.
fn ical_view_of(raw: &str, name: &str, uid: &str) -> Option<String> {
    let mut joined: Vec<String> = Vec::new();
    for line in raw.split("\r\n") {
        if let Some(rest) = line.strip_prefix(' ').or_else(|| line.strip_prefix('\t')) {
            if let Some(last) = joined.last_mut() {
                last.push_str(rest.trim_end());
            }
        } else {
            joined.push(line.trim_end().to_string());
        }
    }
    let mut in_event = false;
    let mut found = None;
    let mut this_uid = String::new();
    for l in &joined {
        if l == "BEGIN:VEVENT" {
            in_event = true;
            this_uid.clear();
            found = None;
        } else if l == "END:VEVENT" {
            if this_uid == uid {
                return found;
            }
            in_event = false;
        } else if in_event {
            if let Some(v) = l.strip_prefix("UID:") {
                this_uid = v.to_string();
            }
            if let Some(v) = l.strip_prefix(&format!("{name}:")) {
                found = Some(v.to_string());
            }
        }
    }
    None
}

fn ical_events(raw: &str) -> Vec<ical::parser::ical::component::IcalEvent> {
    let reader = ical::IcalParser::new(std::io::BufReader::new(raw.as_bytes()));
    let cals: Vec<_> = reader.map(|c| c.expect("ical parses the file")).collect();
    assert_eq!(cals.len(), 1);
    cals.into_iter().next().unwrap().events
}

fn prop(ev: &ical::parser::ical::component::IcalEvent, name: &str) -> Option<String> {
    ev.properties
        .iter()
        .find(|p| p.name == name)
        .and_then(|p| p.value.clone())
}

#[test]
fn rfc5545_3_1_content_lines_are_crlf_and_folded_at_75_octets() {
    let d = temp("fold");
    let out = d.join("plan.ics");
    export(
        &repo("sites.example.toml"),
        &repo("targets.example.csv"),
        &out,
        &["--alarm-minutes", "30"],
    );
    let raw = std::fs::read_to_string(&out).unwrap();
    assert!(
        !raw.replace("\r\n", "").contains('\n'),
        "bare LF in the file"
    );
    assert!(raw.ends_with("END:VCALENDAR\r\n"));
    for line in raw.split("\r\n") {
        assert!(
            line.len() <= 75,
            "RFC 5545 3.1: line of {} octets: {line:?}",
            line.len()
        );
    }
}

#[test]
fn every_event_round_trips_with_the_plans_times_and_text() {
    let d = temp("roundtrip");
    let out = d.join("plan.ics");
    export(
        &repo("sites.example.toml"),
        &repo("targets.example.csv"),
        &out,
        &[],
    );
    let raw = std::fs::read_to_string(&out).unwrap();
    // The plan the calendar was made from, computed through the library.
    let sites = parse_sites(
        "s",
        &std::fs::read_to_string(repo("sites.example.toml")).unwrap(),
    )
    .unwrap();
    let targets = parse_targets(
        "t",
        &std::fs::read_to_string(repo("targets.example.csv")).unwrap(),
        &ColumnMap::default(),
    )
    .unwrap();
    let opts = PlanOptions {
        first_night: "2027-03-01".parse().unwrap(),
        last_night: "2027-03-20".parse().unwrap(),
        sigma_k: 1.0,
        baseline_before_min: 30.0,
        baseline_after_min: 30.0,
        min_coverage: 0.0,
        min_in_transit_min: dipwatch::engine::plan::DEFAULT_MIN_IN_TRANSIT_MIN,
        min_snr: 0.0,
        include_unobservable: false,
        kinds: vec![dipwatch::orbit::EventKind::Transit],
        rv_window_hours: 1.0,
    };
    let p = plan(&sites, &targets, &opts);
    let planned: Vec<_> = p.sites.iter().flat_map(|s| s.events.iter()).collect();
    let raw_evs = raw_events(&raw);
    let ical_evs = ical_events(&raw);
    assert_eq!(raw_evs.len(), planned.len());
    assert_eq!(ical_evs.len(), planned.len());
    let by_uid: HashMap<String, &HashMap<String, String>> =
        raw_evs.iter().map(|e| (e["UID"].clone(), e)).collect();
    for e in planned {
        let site = &sites[e.site_index];
        let target = &targets[e.target_index];
        let uid = uid_of(e, site, target);
        let ev = by_uid.get(&uid).unwrap_or_else(|| panic!("no event {uid}"));
        // Times to the second (RFC 5545 3.3.5, UTC form with Z).
        let fmt = |jd: f64| {
            dipwatch::astro::civil::datetime_from_jd(jd)
                .format("%Y%m%dT%H%M%SZ")
                .to_string()
        };
        assert_eq!(ev["DTSTART"], fmt(e.block_start_utc), "{uid}");
        assert_eq!(ev["DTEND"], fmt(e.block_end_utc), "{uid}");
        assert_eq!(rfc_unescape(&ev["SUMMARY"]), summary(e, site, target));
        assert_eq!(
            rfc_unescape(&ev["DESCRIPTION"]),
            description(e, site, target)
        );
        assert_eq!(ev["CATEGORIES"], e.verdict.label());
        assert_eq!(
            ev["GEO"],
            format!("{:.6};{:.6}", site.lat_deg, site.lon_deg),
            "RFC 5545 3.8.1.6"
        );
        // The independent parser agrees with the raw text, given its documented trimming at folds.
        let ie = ical_evs
            .iter()
            .find(|x| prop(x, "UID").as_deref() == Some(uid.as_str()))
            .expect("ical sees the UID");
        assert_eq!(prop(ie, "DTSTART").unwrap(), ev["DTSTART"]);
        assert_eq!(
            prop(ie, "DESCRIPTION"),
            ical_view_of(&raw, "DESCRIPTION", &uid)
        );
        assert_eq!(prop(ie, "SUMMARY"), ical_view_of(&raw, "SUMMARY", &uid));
    }
}

#[test]
fn rfc5545_3_3_11_escaping_keeps_a_hostile_name_inside_its_event() {
    let d = temp("inject");
    let targets = d.join("t.csv");
    std::fs::write(
        &targets,
        "name,ra,dec,t0,t0_sigma_days,period_days,period_sigma_days,t14_hours,notes\n\
         \"Evil, \"\"quoted\"\"; name\nEND:VEVENT\nBEGIN:VEVENT\",10:12:40.9,+38:02:51,2460655.92544,0.00075,1.3390127,0.0000018,1.74,\"back\\\\slash\nEND:VCALENDAR\"\n",
    )
    .unwrap();
    let out = d.join("plan.ics");
    export(
        &repo("sites.example.toml"),
        targets.to_str().unwrap(),
        &out,
        &[],
    );
    let raw = std::fs::read_to_string(&out).unwrap();
    let evs = raw_events(&raw);
    let n_begin = raw.matches("\r\nBEGIN:VEVENT\r\n").count();
    assert_eq!(
        n_begin,
        evs.len(),
        "an injected BEGIN:VEVENT became a real one"
    );
    assert_eq!(
        rfc_unfold(&raw)
            .split("\r\n")
            .filter(|l| *l == "END:VCALENDAR")
            .count(),
        1
    );
    assert!(!evs.is_empty());
    let name = "Evil, \"quoted\"; name\nEND:VEVENT\nBEGIN:VEVENT";
    for ev in &evs {
        let s = rfc_unescape(&ev["SUMMARY"]);
        assert!(s.starts_with(name), "{s:?}");
        assert!(rfc_unescape(&ev["DESCRIPTION"]).contains("Notes: back\\\\slash\nEND:VCALENDAR"));
    }
    assert_eq!(ical_events(&raw).len(), evs.len());
}

#[test]
fn uids_are_stable_across_runs_and_unique() {
    let d = temp("uid");
    let (a, b) = (d.join("a.ics"), d.join("b.ics"));
    export(
        &repo("sites.example.toml"),
        &repo("targets.example.csv"),
        &a,
        &[],
    );
    export(
        &repo("sites.example.toml"),
        &repo("targets.example.csv"),
        &b,
        &[],
    );
    let (ra, rb) = (
        std::fs::read_to_string(&a).unwrap(),
        std::fs::read_to_string(&b).unwrap(),
    );
    assert_eq!(
        ra, rb,
        "same inputs and SOURCE_DATE_EPOCH give identical files"
    );
    let uids: Vec<String> = raw_events(&ra).iter().map(|e| e["UID"].clone()).collect();
    let unique: std::collections::HashSet<_> = uids.iter().collect();
    assert_eq!(
        unique.len(),
        uids.len(),
        "RFC 5545 3.8.4.7: UIDs must be unique"
    );
    for e in raw_events(&ra) {
        assert_eq!(
            e["DTSTAMP"], "20270115T080000Z",
            "RFC 5545 3.8.7.2: DTSTAMP is the export time"
        );
        assert_eq!(e["LAST-MODIFIED"], "20270115T080000Z");
    }
}

#[test]
fn re_export_after_a_period_change_moves_events_keeps_uids_and_cancels_dropped_ones() {
    let d = temp("update");
    let t1 = d.join("t1.csv");
    let header = "name,ra,dec,t0,t0_sigma_days,period_days,period_sigma_days,t14_hours\n";
    std::fs::write(&t1, format!("{header}Moss Harbour b,10:12:40.9,+38:02:51,2460655.92544,0.00075,1.3390127,0.0000018,1.74\n")).unwrap();
    let first = d.join("first.ics");
    export(
        &repo("sites.example.toml"),
        t1.to_str().unwrap(),
        &first,
        &[],
    );
    // The period grows by 20 s: by 2027 the transits move by about 1.9 h, so some blocks leave the night.
    let t2 = d.join("t2.csv");
    std::fs::write(&t2, format!("{header}Moss Harbour b,10:12:40.9,+38:02:51,2460655.92544,0.00075,1.3392442,0.0000018,1.74\n")).unwrap();
    let second = d.join("second.ics");
    let o = export(
        &repo("sites.example.toml"),
        t2.to_str().unwrap(),
        &second,
        &["--previous", first.to_str().unwrap()],
    );
    let before = raw_events(&std::fs::read_to_string(&first).unwrap());
    let after = raw_events(&std::fs::read_to_string(&second).unwrap());
    let before_by: HashMap<&str, &HashMap<String, String>> =
        before.iter().map(|e| (e["UID"].as_str(), e)).collect();
    let mut kept = 0;
    for e in &after {
        let Some(old) = before_by.get(e["UID"].as_str()) else {
            continue;
        };
        if e.get("STATUS").map(String::as_str) == Some("CANCELLED") {
            // RFC 5545 3.8.1.11 and 3.8.7.4: a dropped event is cancelled with a higher SEQUENCE.
            assert!(
                e["SEQUENCE"].parse::<u32>().unwrap() > old["SEQUENCE"].parse::<u32>().unwrap()
            );
            continue;
        }
        kept += 1;
        assert_ne!(e["DTSTART"], old["DTSTART"], "the event did not move");
        assert!(e["SEQUENCE"].parse::<u32>().unwrap() >= old["SEQUENCE"].parse::<u32>().unwrap());
    }
    assert!(kept > 0, "no event kept its UID");
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains(&format!("{kept} changed")), "{err}");
    let cancelled = after
        .iter()
        .filter(|e| e.get("STATUS").map(String::as_str) == Some("CANCELLED"))
        .count();
    assert!(err.contains(&format!("{cancelled} cancelled")), "{err}");
    assert!(
        cancelled > 0,
        "expected the period change to drop some events: {err}"
    );
}

#[test]
fn re_referencing_t0_keeps_every_identity() {
    // The same ephemeris with T0 moved 517 periods later (what `refine` does when it picks a new reference
    // epoch): every transit is the same instant, so every UID must survive, nothing new, nothing cancelled.
    let d = temp("reref");
    let header = "name,ra,dec,t0,t0_sigma_days,period_days,period_sigma_days,t14_hours\n";
    let (t0, p) = (2_460_655.925_44_f64, 1.339_012_7_f64);
    let row = |t0: f64| {
        format!("{header}Moss Harbour b,10:12:40.9,+38:02:51,{t0:.7},0.00075,{p},0.0000018,1.74\n")
    };
    let t1 = d.join("t1.csv");
    std::fs::write(&t1, row(t0)).unwrap();
    let first = d.join("first.ics");
    export(
        &repo("sites.example.toml"),
        t1.to_str().unwrap(),
        &first,
        &[],
    );
    let t2 = d.join("t2.csv");
    std::fs::write(&t2, row(t0 + 517.0 * p)).unwrap();
    let second = d.join("second.ics");
    let o = export(
        &repo("sites.example.toml"),
        t2.to_str().unwrap(),
        &second,
        &["--previous", first.to_str().unwrap()],
    );
    let uids = |path: &Path| {
        let mut v: Vec<String> = raw_events(&std::fs::read_to_string(path).unwrap())
            .iter()
            .map(|e| e["UID"].clone())
            .collect();
        v.sort();
        v
    };
    let (a, b) = (uids(&first), uids(&second));
    assert!(!a.is_empty());
    assert_eq!(a, b);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("0 new,") && err.contains(" 0 cancelled"),
        "{err}"
    );
}

#[test]
fn a_bad_previous_file_leaves_no_calendar_behind() {
    let d = temp("bad");
    let prev = d.join("prev.ics");
    std::fs::write(&prev, "this is not a calendar").unwrap();
    let out = d.join("plan.ics");
    let o = dipwatch(&[
        "calendar",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &repo("targets.example.csv"),
        "--from",
        "2027-03-01",
        "--out",
        out.to_str().unwrap(),
        "--previous",
        prev.to_str().unwrap(),
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(!out.exists());
    assert!(String::from_utf8_lossy(&o.stderr).contains("prev.ics"));
}

#[test]
fn per_site_files_and_alarm() {
    let d = temp("persite");
    let out = d.join("team.ics");
    export(
        &repo("sites.example.toml"),
        &repo("targets.example.csv"),
        &out,
        &["--per-site", "--alarm-minutes", "45"],
    );
    for site in ["kestrel-moor", "juniper-draw-station", "quebrada-lenta"] {
        let raw = std::fs::read_to_string(d.join(format!("team-{site}.ics"))).unwrap();
        // RFC 5545 3.6.6 and 3.8.6.3: a display alarm 45 minutes before the start.
        assert!(raw.contains("BEGIN:VALARM\r\nACTION:DISPLAY\r\n"));
        assert!(raw.contains("TRIGGER;RELATED=START:-PT2700S\r\n"));
        for e in raw_events(&raw) {
            assert!(e["UID"].contains(site), "{} in the wrong file", e["UID"]);
        }
    }
}
