//! `tonight` outputs: the night's almanac and, per target, the block with its contact times.

use super::{hhmm, round, zone_label};
use crate::astro::atmosphere::airmass_kasten_young;
use crate::engine::almanac::NightAlmanac;
use crate::engine::plan::{Event, Verdict};
use crate::engine::tonight::{Absence, Tonight};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;

/// Width of the `tonight` screen: it reads on an 80-column terminal.
const WIDTH: usize = 80;

/// `text` folded at spaces into lines of at most [`WIDTH`] characters, the first prefixed with `first`, the
/// others with `rest`; each line ends with a line break.
fn wrap(text: &str, first: &str, rest: &str) -> String {
    let mut out = String::new();
    let mut line = first.to_string();
    let mut empty = true;
    for word in text.split(' ') {
        if !empty && line.chars().count() + 1 + word.chars().count() > WIDTH {
            out.push_str(line.trim_end());
            out.push('\n');
            line = rest.to_string();
            empty = true;
        }
        if !empty {
            line.push(' ');
        }
        line.push_str(word);
        empty = false;
    }
    out.push_str(line.trim_end());
    out.push('\n');
    out
}

fn airmass_text(alt_deg: f64) -> String {
    let x = airmass_kasten_young(alt_deg);
    if x.is_finite() && alt_deg > 0.0 {
        format!("airmass {x:.2}")
    } else {
        "below horizon".into()
    }
}

/// "starts in 3 h 12 min", "in progress, 25 min left", "over" for a block at `now` (UTC JD).
pub fn countdown(e: &Event, now: f64) -> String {
    let fmt = |days: f64| {
        let total = (days * 1440.0).round() as i64;
        if total >= 60 {
            format!("{} h {} min", total / 60, total % 60)
        } else {
            format!("{total} min")
        }
    };
    if now < e.block_start_utc {
        format!("starts in {}", fmt(e.block_start_utc - now))
    } else if now < e.block_end_utc {
        format!("in progress, {} left", fmt(e.block_end_utc - now))
    } else {
        "over".into()
    }
}

fn header(site: &Site, a: &NightAlmanac, utc: bool) -> String {
    let t = |x: Option<f64>| x.map(|v| hhmm(v, site, utc)).unwrap_or_else(|| "--".into());
    let mut s = format!(
        "Night of {} at {} ({}; times {})\n",
        a.night_of.format("%A %Y-%m-%d"),
        site.name,
        site.tz.name(),
        zone_label(a.window.start + 0.5, site, utc)
    );
    s.push_str(&format!(
        "  Sunset {}   civil {}   nautical {}   astronomical {}\n",
        t(a.sun.dusk),
        t(a.civil.dusk),
        t(a.nautical.dusk),
        t(a.astronomical.dusk)
    ));
    s.push_str(&format!(
        "  Dawn   astronomical {}   nautical {}   civil {}   sunrise {}\n",
        t(a.astronomical.dawn),
        t(a.nautical.dawn),
        t(a.civil.dawn),
        t(a.sun.dawn)
    ));
    s.push_str(&format!(
        "  Dark (Sun below {} deg): {} ({:.1} h)\n",
        site.darkness_alt_deg,
        match a.dark {
            Some(d) => format!("{} to {}", hhmm(d.start, site, utc), hhmm(d.end, site, utc)),
            None => "none tonight".into(),
        },
        a.dark_hours
    ));
    let mut moon_events: Vec<(f64, &str)> = [(a.moonrise, "rises"), (a.moonset, "sets")]
        .into_iter()
        .filter_map(|(t, w)| t.map(|t| (t, w)))
        .collect();
    moon_events.sort_by(|x, y| x.0.total_cmp(&y.0));
    let moon_text: Vec<String> = moon_events
        .iter()
        .map(|(t, w)| format!("{w} {}", hhmm(*t, site, utc)))
        .collect();
    s.push_str(&format!(
        "  Moon: {}{:.0}% lit\n",
        if moon_text.is_empty() {
            String::new()
        } else {
            format!("{}, ", moon_text.join(", "))
        },
        a.moon_illum * 100.0
    ));
    for n in &a.notes {
        s.push_str(&format!("  Note: {n}\n"));
    }
    s
}

/// The text report for one night: the almanac header, then each event with its block and contacts.
///
/// `events` are the night's events (observable and not); `now` is the current UTC JD when the report is for the
/// night in progress or about to begin (adds "starts in ..."); `absences` explain named targets with no transit.
pub fn tonight_text(night: &Tonight<'_>, targets: &[Target], utc: bool) -> String {
    let (site, almanac, events, now) = (night.site, &night.almanac, &night.events, night.now_utc);
    let observable: Vec<&Event> = events.iter().filter(|e| e.observable).collect();
    let mut out = String::new();
    if let Some(n) = now {
        out.push_str(&next_action(&observable, targets, site, n, utc));
    }
    out.push_str(&header(site, almanac, utc));
    if let Some(n) = now {
        out.push_str(&format!(
            "  Now: {} {}\n",
            hhmm(n, site, utc),
            zone_label(n, site, utc)
        ));
    }
    if observable.is_empty() {
        out.push_str("\nNothing observable tonight.\n");
    }
    for e in &observable {
        push_event(&mut out, e, &targets[e.target_index], site, now, utc);
    }
    // Named targets: say why nothing is shown.
    push_explanations(
        &mut out,
        &night.asked,
        events,
        &night.absences,
        targets,
        site,
        utc,
    );
    out
}

/// The first line when run on the day: what to start when (or what is under way), so the next action comes
/// before the almanac.
fn next_action(
    observable: &[&Event],
    targets: &[Target],
    site: &Site,
    now: f64,
    utc: bool,
) -> String {
    let next = observable
        .iter()
        .filter(|e| e.block_end_utc > now)
        .min_by(|a, b| a.block_start_utc.total_cmp(&b.block_start_utc));
    let text = match next {
        None => "Next: nothing more to observe tonight.".to_string(),
        Some(e) if e.block_start_utc <= now => format!(
            "Next: {} is under way ({}); the block ends at {}, {}.",
            on_telescope(&targets[e.target_index].label(), e, site),
            e.verdict.label(),
            hhmm(e.block_end_utc, site, utc),
            countdown(e, now).replace("in progress, ", "")
        ),
        Some(e) => format!(
            "Next: start {} at {} ({}), {} of the transit usable; ingress {}, block ends {}.",
            on_telescope(&targets[e.target_index].label(), e, site),
            hhmm(e.block_start_utc, site, utc),
            countdown(e, now),
            crate::outputs::percent_floor(e.coverage),
            hhmm(e.ingress_utc, site, utc),
            hhmm(e.block_end_utc, site, utc)
        ),
    };
    let mut out = wrap(&text, "", "      ");
    out.push('\n');
    out
}

/// A target's name, with the telescope when the site has several (`Amberfall b on 0.4 m`).
fn on_telescope(name: &str, e: &Event, site: &Site) -> String {
    match site.telescopes.get(e.telescope_index) {
        Some(t) if site.telescopes.len() > 1 => format!("{name} on {}", t.name),
        _ => name.to_string(),
    }
}

/// One observable event: heading with verdict, coverage and countdown, the five instants with altitude and
/// airmass, then the Moon, the meridian crossing, baselines and limits.
fn push_event(out: &mut String, e: &Event, t: &Target, site: &Site, now: Option<f64>, utc: bool) {
    let sig = format!("+-{:.1} min", e.sigma_min);
    out.push_str(&format!(
        "\n{}  epoch {}  {}, {} of the {}{}{}\n",
        t.label(),
        e.epoch,
        e.verdict.label(),
        crate::outputs::percent_floor(e.coverage),
        t.kind.noun(),
        t.depth_ppt
            .map(|d| format!(", depth {d} ppt"))
            .unwrap_or_default(),
        now.map(|n| format!("  [{}]", countdown(e, n)))
            .unwrap_or_default()
    ));
    if site.telescopes.len() > 1 {
        if let Some(tel) = site.telescopes.get(e.telescope_index) {
            out.push_str(&format!("  telescope {}\n", tel.name));
        }
    }
    let names = t.kind.instant_labels();
    let rows = [
        (
            "block start",
            e.block_start_utc,
            e.alt_block_start_deg,
            String::new(),
        ),
        (names[0], e.ingress_utc, e.alt_ingress_deg, sig.clone()),
        (names[1], e.mid_utc, e.alt_mid_deg, sig.clone()),
        (names[2], e.egress_utc, e.alt_egress_deg, sig),
        (
            "block end",
            e.block_end_utc,
            e.alt_block_end_deg,
            String::new(),
        ),
    ];
    // In time order: a block clipped by dawn ends before the egress it could not reach.
    let mut rows = rows;
    rows.sort_by(|a, b| a.1.total_cmp(&b.1));
    for (label, jd, alt, sigma) in rows {
        out.push_str(&format!(
            "  {label:<12} {}  {sigma:<12} alt {:>5.1} deg  {}\n",
            hhmm(jd, site, utc),
            alt,
            airmass_text(alt)
        ));
    }
    if let Some(n) = &e.noise {
        out.push_str(&wrap(&crate::outputs::photometry_line(n), "  ", "  "));
    }
    let mut extra = vec![format!(
        "Moon {:.0} deg away ({})",
        e.moon_sep_deg,
        if e.moon_alt_mid_deg > 0.0 {
            "up"
        } else {
            "down"
        }
    )];
    if let Some(m) = e.meridian_utc {
        extra.push(format!(
            "meridian crossing {} (equatorial mounts flip)",
            hhmm(m, site, utc)
        ));
    }
    if e.verdict != Verdict::Whole {
        extra.push(format!(
            "usable baseline {:.0}/{:.0} min",
            e.baseline_before_min, e.baseline_after_min
        ));
    }
    if !e.reasons.is_empty() {
        extra.push(format!(
            "cut by: {}",
            e.reasons
                .iter()
                .map(|r| r.label())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    out.push_str(&wrap(&extra.join("; "), "  ", "  "));
}

/// For each target asked for by name with nothing observable: why (never high enough, the limits that block
/// its transit, or no transit this night and when the next one is).
fn push_explanations(
    out: &mut String,
    asked: &[usize],
    events: &[Event],
    absences: &[Absence],
    targets: &[Target],
    site: &Site,
    utc: bool,
) {
    for &ti in asked {
        if events.iter().any(|e| e.observable && e.target_index == ti) {
            continue;
        }
        let name = &targets[ti].name;
        // Highest altitude the target ever reaches here (upper culmination, catalogue place).
        let highest = 90.0 - (site.lat_deg - targets[ti].dec_deg).abs();
        if highest < site.min_alt_deg {
            out.push('\n');
            out.push_str(&wrap(
                &format!(
                    "{name}: never rises above this site's limit of {:.1} deg (highest altitude {:.1} deg)",
                    site.min_alt_deg, highest
                ),
                "",
                "  ",
            ));
            continue;
        }
        for e in events.iter().filter(|e| e.target_index == ti) {
            out.push('\n');
            out.push_str(&wrap(
                &format!(
                    "{name}: the transit at {} (mid) cannot be observed: {}",
                    hhmm(e.mid_utc, site, utc),
                    if e.reasons.is_empty() {
                        "no usable in-transit time".to_string()
                    } else {
                        e.reasons
                            .iter()
                            .map(|r| r.label())
                            .collect::<Vec<_>>()
                            .join(", ")
                    }
                ),
                "",
                "  ",
            ));
        }
        for a in absences {
            let Absence::NoTransit {
                target_index,
                next_mid_utc,
            } = a;
            if *target_index == ti {
                out.push('\n');
                out.push_str(&wrap(
                    &format!(
                        "{name}: no transit during this night; the next mid-transit is at {} UTC",
                        crate::astro::civil::rfc3339_utc(*next_mid_utc)
                    ),
                    "",
                    "  ",
                ));
            }
        }
    }
}

/// JSON for one night: `{"site", "night": {...}, "events": [...], "absent": [...]}`.
pub fn tonight_json(night: &Tonight<'_>, sites: &[Site], targets: &[Target]) -> String {
    let (site, almanac, events, absences, now) = (
        night.site,
        &night.almanac,
        &night.events,
        &night.absences,
        night.now_utc,
    );
    let recs: Vec<serde_json::Value> = events
        .iter()
        .map(|e| {
            let mut obj = super::event_json(&super::EventRow::of(e, sites, targets));
            if let Some(n) = now {
                obj.insert("status".into(), countdown(e, n).into());
                obj.insert(
                    "minutes_to_block_start".into(),
                    round((e.block_start_utc - n) * 1440.0, 1).into(),
                );
            }
            serde_json::Value::Object(obj)
        })
        .collect();
    let absent: Vec<serde_json::Value> = absences
        .iter()
        .map(|Absence::NoTransit { target_index, next_mid_utc }| {
            serde_json::json!({"target": targets[*target_index].name, "next_mid_utc": crate::astro::civil::rfc3339_utc(*next_mid_utc)})
        })
        .collect();
    let doc = serde_json::json!({
        "site": site.name,
        "night": super::NightRecord::new(almanac),
        "now_utc": now.map(crate::astro::civil::rfc3339_utc),
        "events": recs,
        "absent": absent,
    });
    let mut s = serde_json::to_string_pretty(&doc).unwrap_or_default();
    s.push('\n');
    s
}

#[cfg(test)]
mod tests {
    use super::countdown;

    #[test]
    fn countdown_reads_naturally() {
        let mut e = crate::engine::plan::tests_support::sample_event();
        e.block_start_utc = 2_461_000.5;
        e.block_end_utc = 2_461_000.7;
        let min = 1.0 / 1440.0;
        assert_eq!(
            countdown(&e, 2_461_000.5 - 192.0 * min),
            "starts in 3 h 12 min"
        );
        assert_eq!(countdown(&e, 2_461_000.5 - 25.0 * min), "starts in 25 min");
        assert_eq!(countdown(&e, 2_461_000.6), "in progress, 2 h 24 min left");
        assert_eq!(countdown(&e, 2_461_000.8), "over");
    }
}
