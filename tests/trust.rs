//! What people act on: coverage never shown higher than it is, a minimum of useful in-transit time, and the
//! block clipped to where observing can happen (table, tonight, calendar, scheduler busy time).

use dipwatch::engine::plan::{nights_at, plan, Reason, Verdict, DEFAULT_MIN_IN_TRANSIT_MIN};
use dipwatch::engine::schedule::{schedule, ScoreWeights, TelescopeEvents};

mod common;
use common::{date, opts, site, target_at};

#[test]
fn coverage_is_printed_rounded_down() {
    // 99.5% of the transit usable is not the whole transit.
    assert_eq!(dipwatch::outputs::percent_floor(0.995), "99%");
    assert_eq!(dipwatch::outputs::percent_floor(0.9999), "99%");
    assert_eq!(dipwatch::outputs::percent_floor(1.0), "100%");
    // Binary noise (0.29 * 100 = 28.999999999999996) is not rounded away from the true value.
    assert_eq!(dipwatch::outputs::percent_floor(0.29), "29%");
    assert_eq!(dipwatch::outputs::percent_floor(0.0049), "0%");
    assert_eq!(dipwatch::outputs::floor_to(0.9996, 3), 0.999);
}

#[test]
fn a_sliver_of_transit_is_not_observable_and_says_why() {
    let s = site("Sliver Test", 45.0, 5.0, "Europe/Paris");
    let d = date(2027, 10, 2);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    // A 3 h transit whose egress is 12 min after dark begins: 12 min of usable in-transit time.
    let t = target_at(
        "Sliver",
        &s,
        dark.start + 12.0 / 1440.0 - 1.5 / 24.0,
        40.0,
        3.0,
    );
    let mut o = opts(d, d);
    o.min_in_transit_min = DEFAULT_MIN_IN_TRANSIT_MIN;
    let e = plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o).sites[0].events[0];
    assert_eq!(e.verdict, Verdict::EgressOnly, "{e:?}");
    assert!(!e.observable, "{e:?}");
    assert!(e.reasons.contains(&Reason::InTransitBelowMinimum), "{e:?}");
    assert_eq!(
        Reason::InTransitBelowMinimum.label(),
        "in-transit-below-minimum"
    );
    // Not listed, so not scheduled, when unobservable events are not asked for.
    o.include_unobservable = false;
    assert!(
        plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o).sites[0]
            .events
            .is_empty()
    );
    // With a lower minimum the same event is a usable egress.
    o.min_in_transit_min = 10.0;
    let e = &plan(std::slice::from_ref(&s), std::slice::from_ref(&t), &o).sites[0].events[0];
    assert!(e.observable && e.verdict == Verdict::EgressOnly, "{e:?}");
    // The minimum never exceeds the transit itself: a 20 min transit seen whole passes a 30 min minimum.
    let midnight = 0.5 * (dark.start + dark.end);
    let short = target_at("Short", &s, midnight, 40.0, 20.0 / 60.0);
    o.min_in_transit_min = DEFAULT_MIN_IN_TRANSIT_MIN;
    let e = &plan(std::slice::from_ref(&s), std::slice::from_ref(&short), &o).sites[0].events[0];
    assert!(e.observable && e.verdict == Verdict::Whole, "{e:?}");
}

#[test]
fn an_egress_without_its_margin_is_not_an_egress() {
    // The run ends 0.3 min after egress, inside the 1-sigma margin (0.72 min): the egress is not seen.
    let s = site("Margin Test", 45.0, 5.0, "Europe/Paris");
    let d = date(2027, 10, 2);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    let t = target_at(
        "Margin",
        &s,
        dark.end - 0.3 / 1440.0 - 1.5 / 24.0,
        40.0,
        3.0,
    );
    let e = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts(d, d),
    )
    .sites[0]
        .events[0];
    assert_eq!(e.verdict, Verdict::IngressOnly, "{e:?}");
    // And 1 min after egress plus margin it is.
    let t = target_at(
        "Margin",
        &s,
        dark.end - 2.0 / 1440.0 - 1.5 / 24.0,
        40.0,
        3.0,
    );
    let e = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts(d, d),
    )
    .sites[0]
        .events[0];
    assert_eq!(e.verdict, Verdict::WholeShortBaseline, "{e:?}");
    // Egress 0.3 min after darkness begins: the egress is not seen with its margin on the early side either.
    let t = target_at(
        "Margin",
        &s,
        dark.start + 0.3 / 1440.0 - 1.5 / 24.0,
        40.0,
        3.0,
    );
    let e = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts(d, d),
    )
    .sites[0]
        .events[0];
    assert_eq!(e.verdict, Verdict::MiddleOnly, "{e:?}");
}

#[test]
fn a_partial_event_is_acted_on_only_where_the_sky_allows() {
    let s = site("Dusk Test", -25.0, -60.0, "America/Argentina/Salta");
    let d = date(2027, 6, 10);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    // Mid-transit 20 min after dark: the planned block starts about 2 h before darkness.
    let t = target_at("Dusk", &s, dark.start + 20.0 / 1440.0, -25.0, 2.0);
    let e = plan(
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts(d, d),
    )
    .sites[0]
        .events[0];
    assert_eq!(e.verdict, Verdict::EgressOnly, "{e:?}");
    assert!(e.full_block_start_utc < dark.start - 1.0 / 24.0);
    // The start acted on is in darkness, on the first whole minute of it.
    assert!(e.block_start_utc >= dark.start, "{e:?}");
    assert!(e.block_start_utc - dark.start < 1.0 / 1440.0, "{e:?}");
    assert!(e.start_clipped() && !e.end_clipped());
    let sun = dipwatch::astro::sky::sun_moon_at(
        dipwatch::astro::time::JdUtc(e.block_start_utc),
        &s.observer,
    );
    assert!(sun.sun_alt_deg < s.darkness_alt_deg, "{}", sun.sun_alt_deg);

    // tonight's countdown goes to the start acted on, not to the planned block an hour and more earlier.
    let now = e.full_block_start_utc - 10.0 / 1440.0;
    let want = ((e.block_start_utc - now) * 1440.0).round() as i64;
    assert_eq!(
        dipwatch::outputs::countdown(&e, now),
        format!("starts in {} h {} min", want / 60, want % 60)
    );

    // The table marks the clipped edge and prints the start acted on.
    let table = dipwatch::outputs::plan_table(
        &plan(
            std::slice::from_ref(&s),
            std::slice::from_ref(&t),
            &opts(d, d),
        ),
        std::slice::from_ref(&s),
        std::slice::from_ref(&t),
        &opts(d, d),
        true,
    );
    let start = dipwatch::astro::civil::datetime_from_jd(e.block_start_utc)
        .format("~%H:%M-")
        .to_string();
    assert!(table.contains(&start), "{start} not in\n{table}");
}

#[test]
fn the_scheduler_keeps_a_telescope_busy_only_while_it_can_observe() {
    // An ingress-only event cut by dawn, and a second event placed after the cut but inside the planned block:
    // both fit on one telescope because the first is only busy until dawn.
    let s = site("Busy Test", 45.0, 5.0, "Europe/Paris");
    let d = date(2027, 10, 2);
    let dark = nights_at(&s, d, d)[0].dark.unwrap();
    let a_t = target_at("Dawn", &s, dark.end - 20.0 / 1440.0, 40.0, 2.0);
    let b_t = target_at("Later", &s, dark.end - 3.0 / 24.0, 40.0, 1.0);
    let targets = vec![a_t, b_t];
    let p = plan(std::slice::from_ref(&s), &targets, &opts(d, d));
    let a = p.sites[0]
        .events
        .iter()
        .find(|e| e.target_index == 0)
        .unwrap();
    assert_eq!(a.verdict, Verdict::IngressOnly, "{a:?}");
    assert!(a.end_clipped());
    let mut b = *p.sites[0]
        .events
        .iter()
        .find(|e| e.target_index == 1)
        .unwrap();
    // Move the second event into the gap between the first's usable end and its planned end.
    let shift = a.block_end_utc + 15.0 / 1440.0 - b.block_start_utc;
    assert!(a.block_end_utc + 15.0 / 1440.0 < a.full_block_end_utc);
    for t in [
        &mut b.block_start_utc,
        &mut b.block_end_utc,
        &mut b.full_block_start_utc,
        &mut b.full_block_end_utc,
    ] {
        *t += shift;
    }
    let tels = vec![TelescopeEvents {
        site_index: 0,
        telescope_index: 0,
        telescope: "main".into(),
        events: vec![*a, b],
    }];
    let chosen = schedule(&tels, &targets, &ScoreWeights::default(), 10.0, false);
    assert_eq!(chosen.len(), 2, "{chosen:?}");
}

#[test]
fn tonight_needs_no_site_name_when_the_file_holds_one_site() {
    let d = common::temp("one-site");
    let sites = d.join("sites.toml");
    let all = std::fs::read_to_string(common::repo("sites.example.toml")).unwrap();
    // The first [[site]] table of the example only.
    let first: String = all
        .split("\n[[site]]\n")
        .take(2)
        .collect::<Vec<_>>()
        .join("\n[[site]]\n");
    std::fs::write(&sites, first).unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args([
            "tonight",
            "--sites",
            sites.to_str().unwrap(),
            "--targets",
            &common::repo("targets.example.csv"),
            "--date",
            "2027-03-07",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.starts_with("Night of Sunday 2027-03-07 at Kestrel Moor"),
        "{out}"
    );
}

#[test]
fn tonight_on_the_day_puts_the_next_action_first() {
    let (sites, targets) = common::example_inputs();
    let d = date(2027, 3, 2);
    let mut o = opts(d, d);
    o.min_in_transit_min = DEFAULT_MIN_IN_TRANSIT_MIN;
    // At 17:00 UTC on 2027-03-02 at Kestrel Moor the next block is Moss Harbour b from 19:17 GMT.
    let now = dipwatch::astro::time::jd_from_calendar(2027, 3, 2.0 + 17.0 / 24.0);
    let night = dipwatch::engine::tonight::tonight(&sites[0], &targets, &o, false, Some(now));
    let text = dipwatch::outputs::tonight_text(&night, &targets, false);
    let first = text.lines().next().unwrap();
    assert!(
        first.starts_with("Next: start Moss Harbour b at 19:17 (starts in 2 h 17 min)"),
        "{text}"
    );
    // During the block it says so; after the last block, that nothing is left.
    let during =
        dipwatch::engine::tonight::tonight(&sites[0], &targets, &o, false, Some(now + 3.0 / 24.0));
    let t = dipwatch::outputs::tonight_text(&during, &targets, false);
    assert!(t.starts_with("Next: Moss Harbour b is under way"), "{t}");
    let late = dipwatch::engine::tonight::tonight(&sites[0], &targets, &o, false, Some(now + 0.6));
    let t = dipwatch::outputs::tonight_text(&late, &targets, false);
    assert!(
        t.starts_with("Next: nothing more to observe tonight."),
        "{t}"
    );
}

#[test]
fn tonight_in_the_morning_means_the_coming_night() {
    let (sites, _) = common::example_inputs();
    let kestrel = &sites[0];
    // 2027-03-02 at Kestrel Moor (GMT): at 23:00 UTC on the 1st the night of the 1st is in progress; at 03:00 on
    // the 2nd it still is (dark until 05:38); at 11:00 on the 2nd its dark time is over, so "tonight" is the 2nd.
    let at = |d: f64| dipwatch::astro::time::jd_from_calendar(2027, 3, d);
    let night = |jd| dipwatch::engine::tonight::current_or_coming_night(kestrel, jd);
    assert_eq!(night(at(1.0 + 23.0 / 24.0)), date(2027, 3, 1));
    assert_eq!(night(at(2.0 + 3.0 / 24.0)), date(2027, 3, 1));
    assert_eq!(night(at(2.0 + 11.0 / 24.0)), date(2027, 3, 2));
    assert_eq!(night(at(2.0 + 15.0 / 24.0)), date(2027, 3, 2));
}
