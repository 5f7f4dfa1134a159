//! Charts: valid XML, one drawn block and two contact markers per event, one glyph per planned event, and a
//! time axis that covers the night.

mod common;
use common::{repo, temp};
use std::process::Command;

fn run(args: &[&str]) -> std::process::Output {
    let o = Command::new(env!("CARGO_BIN_EXE_dipwatch"))
        .args(args)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    o
}

fn count_class(doc: &roxmltree::Document, class_prefix: &str) -> usize {
    doc.descendants()
        .filter(|n| {
            n.attribute("class")
                .is_some_and(|c| c == class_prefix || c.starts_with(&format!("{class_prefix} ")))
        })
        .count()
}

fn plan_json(args: &[&str]) -> serde_json::Value {
    serde_json::from_slice(&run(args).stdout).unwrap()
}

#[test]
fn night_chart_draws_each_event_and_covers_the_night() {
    let d = temp("night");
    let out = d.join("n.svg");
    let (s, t) = (repo("sites.example.toml"), repo("targets.example.csv"));
    run(&[
        "chart",
        "night",
        "--sites",
        &s,
        "--targets",
        &t,
        "--site",
        "Kestrel Moor",
        "--target",
        "Amberfall b",
        "--date",
        "2027-03-07",
        "--out",
        out.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&out).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("the SVG parses as XML");
    // The same events as plan (all of them, observable or not) for that target and night.
    let p = plan_json(&[
        "plan",
        "--sites",
        &s,
        "--targets",
        &t,
        "--site",
        "Kestrel Moor",
        "--target",
        "Amberfall b",
        "--from",
        "2027-03-07",
        "--days",
        "1",
        "--include-unobservable",
        "--format",
        "json",
    ]);
    let n_events = p["events"].as_array().unwrap().len();
    assert_eq!(n_events, 1);
    assert_eq!(count_class(&doc, "block"), n_events);
    assert_eq!(count_class(&doc, "contact"), 2 * n_events);
    assert_eq!(count_class(&doc, "sigma"), 2 * n_events);
    assert_eq!(count_class(&doc, "meridian"), 1);
    assert!(count_class(&doc, "target-alt") >= 1 && count_class(&doc, "limit") == 1);
    // The time axis covers sunset to sunrise.
    let sites =
        dipwatch::inputs::sites::parse_sites("s", &std::fs::read_to_string(&s).unwrap()).unwrap();
    let alm = dipwatch::engine::almanac::night_almanac(&sites[0], "2027-03-07".parse().unwrap());
    let (start, end) = dipwatch::engine::track::night_range(&alm, &[]);
    assert!(start < alm.sun.dusk.unwrap() && end > alm.sun.dawn.unwrap());
    let night_rects = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("twilight night"))
        .count();
    assert!(night_rects >= 1);
}

#[test]
fn season_grid_has_one_glyph_per_planned_event() {
    let d = temp("season");
    let out = d.join("s.svg");
    let (s, t) = (repo("sites.example.toml"), repo("targets.example.csv"));
    run(&[
        "chart",
        "season",
        "--sites",
        &s,
        "--targets",
        &t,
        "--from",
        "2027-03-01",
        "--to",
        "2027-03-31",
        "--out",
        out.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&out).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("the SVG parses as XML");
    let p = plan_json(&[
        "plan",
        "--sites",
        &s,
        "--targets",
        &t,
        "--from",
        "2027-03-01",
        "--to",
        "2027-03-31",
        "--format",
        "json",
    ]);
    let events = p["events"].as_array().unwrap();
    assert_eq!(count_class(&doc, "event"), events.len());
    for v in ["whole", "ingress-only", "egress-only"] {
        let want = events.iter().filter(|e| e["verdict"] == v).count();
        assert_eq!(
            count_class(&doc, &format!("event verdict-{v}")),
            want,
            "{v}"
        );
    }
    assert_eq!(count_class(&doc, "moon"), 31);
}

#[test]
fn oc_chart_marks_every_point() {
    let d = temp("oc");
    let out = d.join("oc.svg");
    run(&[
        "refine",
        "--targets",
        &repo("targets.example.csv"),
        "--observed",
        &repo("observed.example.csv"),
        "--target",
        "Glasswater b",
        "--chart",
        out.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&out).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("the SVG parses as XML");
    assert_eq!(count_class(&doc, "point"), 4);
    assert_eq!(count_class(&doc, "errorbar"), 4);
}

#[test]
fn season_html_links_every_event_to_its_night_chart() {
    let d = temp("html");
    let (s, t) = (repo("sites.example.toml"), repo("targets.example.csv"));
    run(&[
        "chart",
        "season",
        "--sites",
        &s,
        "--targets",
        &t,
        "--site",
        "Quebrada Lenta",
        "--from",
        "2027-03-01",
        "--to",
        "2027-03-10",
        "--out",
        d.join("s.svg").to_str().unwrap(),
        "--html",
        d.join("page").to_str().unwrap(),
    ]);
    let html = std::fs::read_to_string(d.join("page/index.html")).unwrap();
    let doc = roxmltree::Document::parse_with_options(
        &html,
        roxmltree::ParsingOptions {
            allow_dtd: true,
            ..Default::default()
        },
    )
    .expect("the page is well-formed XHTML");
    let p = plan_json(&[
        "plan",
        "--sites",
        &s,
        "--targets",
        &t,
        "--site",
        "Quebrada Lenta",
        "--from",
        "2027-03-01",
        "--to",
        "2027-03-10",
        "--format",
        "json",
    ]);
    let n = p["events"].as_array().unwrap().len();
    // One link per glyph in the grid and one per list entry, each to a night chart that exists and parses.
    let links: Vec<&str> = doc
        .descendants()
        .filter_map(|x| x.attribute("href"))
        .collect();
    assert_eq!(links.len(), 2 * n);
    for l in links {
        let chart =
            std::fs::read_to_string(d.join("page").join(l)).unwrap_or_else(|e| panic!("{l}: {e}"));
        roxmltree::Document::parse(&chart).unwrap();
    }
}

#[test]
fn night_chart_draws_the_zenith_limit_when_the_site_has_one() {
    let d = temp("zenith");
    let sites = d.join("sites.toml");
    let text = std::fs::read_to_string(repo("sites.example.toml"))
        .unwrap()
        .replace(
            "min_moon_sep_deg = 15\n",
            "min_moon_sep_deg = 15\nmax_alt_deg = 85\n",
        );
    std::fs::write(&sites, text).unwrap();
    let draw = |sites: &str, name: &str| {
        let out = d.join(name);
        run(&[
            "chart",
            "night",
            "--sites",
            sites,
            "--targets",
            &repo("targets.example.csv"),
            "--site",
            "Kestrel Moor",
            "--target",
            "Amberfall b",
            "--date",
            "2027-03-07",
            "--out",
            out.to_str().unwrap(),
        ]);
        std::fs::read_to_string(&out).unwrap()
    };
    let with = draw(sites.to_str().unwrap(), "with.svg");
    let doc = roxmltree::Document::parse(&with).unwrap();
    assert_eq!(count_class(&doc, "zenith-limit"), 1);
    assert!(with.contains("highest trackable"));
    let without = draw(&repo("sites.example.toml"), "without.svg");
    let doc = roxmltree::Document::parse(&without).unwrap();
    assert_eq!(count_class(&doc, "zenith-limit"), 0);
}

#[test]
fn night_chart_twilight_edges_are_the_almanac_crossings() {
    // The shading is cut exactly at the almanac's crossing times (before, a 5-minute sampling of hard-coded levels
    // put the edges up to 2.5 min off). Every civil/nautical/astronomical dusk and dawn inside the axis is an edge.
    let (sites, targets) = common::example_inputs();
    let alm = dipwatch::engine::almanac::night_almanac(&sites[0], "2027-03-07".parse().unwrap());
    let track = dipwatch::engine::track::night_track(&sites[0], &targets[0], &alm, &[]);
    let edges: Vec<f64> = track.twilight.iter().map(|s| s.start_utc).skip(1).collect();
    for level in [&alm.sun, &alm.civil, &alm.nautical, &alm.astronomical] {
        for t in [level.dusk, level.dawn].into_iter().flatten() {
            if t > track.start_utc && t < track.end_utc {
                assert!(
                    edges.iter().any(|e| (e - t).abs() < 1e-9),
                    "crossing {t} is not an edge of {:?}",
                    track.twilight
                );
            }
        }
    }
    // Night in the middle, day at the ends.
    assert_eq!(track.twilight.first().unwrap().band.name(), "day");
    assert!(track.twilight.iter().any(|s| s.band.name() == "night"));
}

#[test]
fn contact_labels_of_a_short_transit_do_not_collide() {
    // Glasswater b lasts 1.38 h: at this scale ingress and egress are about 80 px apart, less than a label.
    let d = temp("short");
    let out = d.join("n.svg");
    run(&[
        "chart",
        "night",
        "--sites",
        &repo("sites.example.toml"),
        "--targets",
        &repo("targets.example.csv"),
        "--site",
        "Quebrada Lenta",
        "--target",
        "Glasswater b",
        "--date",
        "2027-03-05",
        "--out",
        out.to_str().unwrap(),
    ]);
    let text = std::fs::read_to_string(&out).unwrap();
    let doc = roxmltree::Document::parse(&text).unwrap();
    let label = |prefix: &str| {
        doc.descendants()
            .find(|n| n.has_tag_name("text") && n.text().is_some_and(|t| t.starts_with(prefix)))
            .map(|n| {
                let f = |a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
                (
                    f("x"),
                    f("y"),
                    n.text().unwrap().chars().count() as f64 * 7.0,
                )
            })
            .unwrap_or_else(|| panic!("no {prefix} label"))
    };
    let (xi, yi, wi) = label("ingress ");
    let (xe, ye, _) = label("egress ");
    assert!(xe - xi < wi, "the scenario should be a short transit");
    assert!(
        (ye - yi).abs() >= 12.0,
        "labels overlap: ingress at ({xi}, {yi}), egress at ({xe}, {ye})"
    );
}
