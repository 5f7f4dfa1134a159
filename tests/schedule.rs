//! Scheduling: the exact solver against brute force, hand-built collisions, one transit per programme, pairs.

use dipwatch::engine::plan::{plan, Event, PlanOptions, Verdict};
use dipwatch::engine::schedule::{
    best_subset, schedule, score, Job, ScoreWeights, TelescopeEvents,
};
use dipwatch::inputs::sites::parse_sites;
use dipwatch::inputs::targets::{parse_targets, ColumnMap, Target};
use proptest::prelude::*;

/// Best total value by trying every subset (2^n), for n <= 12.
fn brute_force(jobs: &[Job], gap: f64) -> f64 {
    let n = jobs.len();
    let mut best = 0.0_f64;
    for mask in 0u32..(1 << n) {
        let mut chosen: Vec<&Job> = (0..n)
            .filter(|i| mask & (1 << i) != 0)
            .map(|i| &jobs[i])
            .collect();
        chosen.sort_by(|a, b| a.start.total_cmp(&b.start));
        if chosen.windows(2).all(|w| w[0].end + gap <= w[1].start) {
            best = best.max(chosen.iter().map(|j| j.value).sum());
        }
    }
    best
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 300, ..ProptestConfig::default() })]
    #[test]
    fn exact_solver_matches_brute_force(
        raw in prop::collection::vec((0.0..10.0_f64, 0.1..4.0_f64, 0.1..10.0_f64), 1..11),
        gap in 0.0..1.0_f64,
    ) {
        let jobs: Vec<Job> = raw.iter().map(|&(s, len, v)| Job { start: s, end: s + len, value: v }).collect();
        let picked = best_subset(&jobs, gap);
        let total: f64 = picked.iter().map(|&i| jobs[i].value).sum();
        // The picked set is feasible...
        let mut sorted: Vec<&Job> = picked.iter().map(|&i| &jobs[i]).collect();
        sorted.sort_by(|a, b| a.start.total_cmp(&b.start));
        prop_assert!(sorted.windows(2).all(|w| w[0].end + gap <= w[1].start));
        // ...and optimal.
        prop_assert!((total - brute_force(&jobs, gap)).abs() < 1e-9, "got {} want {}", total, brute_force(&jobs, gap));
    }
}

fn inputs() -> (Vec<dipwatch::inputs::sites::Site>, Vec<Target>, Vec<Event>) {
    let root = env!("CARGO_MANIFEST_DIR");
    let sites = parse_sites(
        "s",
        &std::fs::read_to_string(format!("{root}/sites.example.toml")).unwrap(),
    )
    .unwrap();
    let targets = parse_targets(
        "t",
        &std::fs::read_to_string(format!("{root}/targets.example.csv")).unwrap(),
        &ColumnMap::default(),
    )
    .unwrap();
    let opts = PlanOptions {
        first_night: "2027-03-01".parse().unwrap(),
        last_night: "2027-03-10".parse().unwrap(),
        sigma_k: 1.0,
        baseline_before_min: 30.0,
        baseline_after_min: 30.0,
        min_coverage: 0.0,
        min_in_transit_min: 0.0,
        min_snr: 0.0,
        include_unobservable: false,
        kinds: vec![dipwatch::orbit::EventKind::Transit],
        rv_window_hours: 1.0,
    };
    let p = plan(&sites[..1], &targets, &opts);
    let events = p.sites[0].events.clone();
    (sites, targets, events)
}

#[test]
fn two_overlapping_blocks_of_different_priority() {
    let (_, mut targets, events) = inputs();
    // Two whole transits made to overlap on one night; the higher-priority target must win.
    let mut a = *events.iter().find(|e| e.verdict == Verdict::Whole).unwrap();
    let mut b = *events
        .iter()
        .find(|e| e.verdict == Verdict::Whole && e.target_index != a.target_index)
        .unwrap();
    b.night_of = a.night_of;
    b.block_start_utc = a.block_start_utc + 0.02;
    b.block_end_utc = a.block_end_utc + 0.02;
    a.coverage = 1.0;
    b.coverage = 1.0;
    targets[a.target_index].priority = 1.0;
    targets[b.target_index].priority = 5.0;
    let tels = vec![TelescopeEvents {
        site_index: 0,
        telescope_index: 0,
        telescope: "main".into(),
        events: vec![a, b],
    }];
    let chosen = schedule(&tels, &targets, &ScoreWeights::default(), 10.0, false);
    assert_eq!(chosen.len(), 1);
    assert_eq!(chosen[0].event.target_index, b.target_index);
    assert!((chosen[0].score - score(&b, 5.0, &ScoreWeights::default())).abs() < 1e-12);
}

#[test]
fn each_transit_is_taken_once_across_telescopes_unless_repeats_are_allowed() {
    let (_, targets, events) = inputs();
    let tels = vec![
        TelescopeEvents {
            site_index: 0,
            telescope_index: 0,
            telescope: "A".into(),
            events: events.clone(),
        },
        TelescopeEvents {
            site_index: 0,
            telescope_index: 1,
            telescope: "B".into(),
            events: events.clone(),
        },
    ];
    let once = schedule(&tels, &targets, &ScoreWeights::default(), 10.0, false);
    let mut keys: Vec<(usize, i64)> = once
        .iter()
        .map(|c| (c.event.target_index, c.event.epoch))
        .collect();
    let n = keys.len();
    keys.sort();
    keys.dedup();
    assert_eq!(keys.len(), n, "a transit was scheduled twice");
    // With two identical telescopes, the second one takes transits the first could not fit.
    let single = schedule(&tels[..1], &targets, &ScoreWeights::default(), 10.0, false);
    assert!(once.len() >= single.len());
    let twice = schedule(&tels, &targets, &ScoreWeights::default(), 10.0, true);
    assert_eq!(twice.len(), 2 * single.len());
}

#[test]
fn complementary_ingress_and_egress_at_two_sites_are_paired() {
    let (_, targets, events) = inputs();
    let base = *events.iter().find(|e| e.verdict == Verdict::Whole).unwrap();
    let mid = base.mid_utc;
    let mut ing = base;
    ing.verdict = Verdict::IngressOnly;
    ing.usable = Some(dipwatch::astro::crossings::Interval {
        start: base.block_start_utc,
        end: mid + 0.01,
    });
    ing.coverage = 0.6;
    let mut egr = base;
    egr.site_index = 1;
    egr.verdict = Verdict::EgressOnly;
    egr.usable = Some(dipwatch::astro::crossings::Interval {
        start: mid - 0.01,
        end: base.block_end_utc,
    });
    egr.coverage = 0.6;
    let tels = vec![
        TelescopeEvents {
            site_index: 0,
            telescope_index: 0,
            telescope: "main".into(),
            events: vec![ing],
        },
        TelescopeEvents {
            site_index: 1,
            telescope_index: 0,
            telescope: "main".into(),
            events: vec![egr],
        },
    ];
    let chosen = schedule(&tels, &targets, &ScoreWeights::default(), 10.0, false);
    assert_eq!(chosen.len(), 2);
    for c in &chosen {
        let (_, cov) = c.pair.expect("paired");
        assert!((cov - 1.0).abs() < 1e-9, "combined coverage {cov}");
    }
}

#[test]
fn complementary_pairs_with_any_number_of_telescopes_per_site() {
    let (_, targets, events) = inputs();
    let base = *events.iter().find(|e| e.verdict == Verdict::Whole).unwrap();
    let mid = base.mid_utc;
    let mut ing = base;
    ing.verdict = Verdict::IngressOnly;
    ing.usable = Some(dipwatch::astro::crossings::Interval {
        start: base.block_start_utc,
        end: mid + 0.01,
    });
    ing.block_end_utc = mid + 0.01;
    ing.coverage = 0.6;
    let mut egr = base;
    egr.site_index = 1;
    egr.verdict = Verdict::EgressOnly;
    egr.usable = Some(dipwatch::astro::crossings::Interval {
        start: mid - 0.01,
        end: base.block_end_utc,
    });
    egr.block_start_utc = mid - 0.01;
    egr.coverage = 0.6;
    // Each telescope also has a transit of its own, later the same night (distinct epochs: distinct transits).
    let own = |e: &Event, n: i64| {
        let mut o = base;
        o.site_index = e.site_index;
        o.epoch = 10_000 + n;
        let shift = base.block_end_utc - base.block_start_utc + 0.05;
        o.block_start_utc += shift;
        o.block_end_utc += shift;
        o
    };
    for n_a in 1..=3 {
        for n_b in 1..=3 {
            let mut tels = Vec::new();
            for i in 0..n_a {
                tels.push(TelescopeEvents {
                    site_index: 0,
                    telescope_index: i,
                    telescope: format!("a{i}"),
                    events: vec![ing, own(&ing, tels.len() as i64)],
                });
            }
            for i in 0..n_b {
                tels.push(TelescopeEvents {
                    site_index: 1,
                    telescope_index: i,
                    telescope: format!("b{i}"),
                    events: vec![egr, own(&egr, tels.len() as i64)],
                });
            }
            let chosen = schedule(&tels, &targets, &ScoreWeights::default(), 10.0, false);
            let paired: Vec<_> = chosen.iter().filter(|c| c.pair.is_some()).collect();
            assert_eq!(paired.len(), 2, "{n_a} x {n_b}: {chosen:?}");
            for c in &paired {
                let (other, cov) = c.pair.unwrap();
                assert!((cov - 1.0).abs() < 1e-9, "combined coverage {cov}");
                assert_ne!(tels[other].site_index, tels[c.telescope_index].site_index);
            }
            // The shared transit is taken exactly twice (the pair) and every telescope keeps its own transit.
            let shared = chosen
                .iter()
                .filter(|c| c.event.epoch == base.epoch)
                .count();
            assert_eq!(shared, 2, "{n_a} x {n_b}");
            for ti in 0..tels.len() {
                assert!(
                    chosen
                        .iter()
                        .any(|c| c.telescope_index == ti && c.event.epoch >= 10_000),
                    "{n_a} x {n_b}: telescope {ti} lost its own transit"
                );
            }
        }
    }
}

#[test]
fn schedule_command_and_calendar_of_the_schedule() {
    let root = env!("CARGO_MANIFEST_DIR");
    let run = |args: &[&str]| {
        std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
            .args(args)
            .output()
            .unwrap()
    };
    let (s, t) = (
        format!("{root}/sites.example.toml"),
        format!("{root}/targets.example.csv"),
    );
    let o = run(&[
        "schedule",
        "--sites",
        &s,
        "--targets",
        &t,
        "--from",
        "2027-03-01",
        "--days",
        "10",
        "--format",
        "json",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let chosen = v["scheduled"].as_array().unwrap();
    assert!(!chosen.is_empty());
    // Two telescopes at Juniper Draw Station appear by name.
    assert!(
        chosen.iter().any(|c| c["telescope"] == "0.4 m")
            || chosen.iter().any(|c| c["telescope"] == "0.6 m")
    );
    let d = std::env::temp_dir().join(format!("dipwatch-sched-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    let out = d.join("s.ics");
    let o = run(&[
        "calendar",
        "--sites",
        &s,
        "--targets",
        &t,
        "--from",
        "2027-03-01",
        "--days",
        "10",
        "--schedule",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let ics = std::fs::read_to_string(&out).unwrap();
    let unique: std::collections::HashSet<(String, String)> = chosen
        .iter()
        .map(|c| {
            (
                c["target"].as_str().unwrap().to_string(),
                c["epoch"].to_string() + c["site"].as_str().unwrap(),
            )
        })
        .collect();
    assert_eq!(ics.matches("BEGIN:VEVENT").count(), unique.len());
}

#[test]
fn plan_and_schedule_print_the_shared_columns_byte_for_byte() {
    // One definition per column: for the same event, the event columns of `schedule --format csv` are the
    // exact text of `plan --format csv` (before, 1.000 / 0.260 / 2 printed as 1.0 / 0.26 / 2.0), and the JSON
    // values agree too.
    let (sites, targets, events) = inputs();
    let tels = vec![TelescopeEvents {
        site_index: 0,
        telescope_index: 0,
        telescope: "main".into(),
        events: events.clone(),
    }];
    let chosen = schedule(&tels, &targets, &ScoreWeights::default(), 10.0, false);
    assert!(chosen.len() >= 3);
    let mut plan_out = Vec::new();
    dipwatch::outputs::push_event_csv_rows(&events, (&sites, &targets), None, &mut plan_out);
    let plan_out = String::from_utf8(plan_out).unwrap();
    let plan_lines: Vec<&str> = plan_out.lines().collect();
    let sched = dipwatch::outputs::schedule_csv(&chosen, &tels, &sites, &targets);
    let n_event_cols = dipwatch::outputs::event_field_names().count();
    let header: Vec<&str> = sched.lines().next().unwrap().split(',').collect();
    assert_eq!(
        header[..n_event_cols],
        dipwatch::outputs::event_field_names().collect::<Vec<_>>()[..]
    );
    for (c, line) in chosen.iter().zip(sched.lines().skip(1)) {
        let i = events.iter().position(|e| *e == c.event).unwrap();
        let want = plan_lines[i];
        assert!(
            line.starts_with(want) && line[want.len()..].starts_with(','),
            "schedule row\n{line}\ndoes not start with the plan row\n{want}"
        );
    }
    let sj: serde_json::Value = serde_json::from_str(&dipwatch::outputs::schedule_json(
        &chosen,
        &tels,
        &sites,
        &targets,
        &ScoreWeights::default(),
        10.0,
    ))
    .unwrap();
    for (c, s) in chosen.iter().zip(sj["scheduled"].as_array().unwrap()) {
        let e = serde_json::Value::Object(dipwatch::outputs::event_json(
            &dipwatch::outputs::EventRow::of(&c.event, &sites, &targets),
        ));
        for name in dipwatch::outputs::event_field_names() {
            assert_eq!(s[name], e[name], "{name}");
        }
    }
}
