//! Calendar export (RFC 5545 iCalendar): one VEVENT per observing block, with stable identities.
//!
//! Text escaping (RFC 5545 section 3.3.11) and line folding at 75 octets on UTF-8 boundaries with CRLF
//! (section 3.1) are done by the `icalendar` crate; dipwatch sets every property whose crate default would not
//! be reproducible (DTSTAMP, UID).
//!
//! Identity and updates: the UID is derived from (target, site, night, slot within the night) only, never from
//! the epoch count since T0, so a re-export after an ephemeris update (refined or re-referenced T0 and P)
//! replaces the same events. SEQUENCE (section 3.8.7.4) is the number of minutes from 2024-01-01T00:00Z
//! to the export time whenever an event is new or changed, and the previous value when it is unchanged, so it
//! only ever grows. When the previous export is given, events that dropped out of the plan are written again
//! with STATUS:CANCELLED (section 3.8.1.11) so that calendar programs remove them.

use crate::astro::civil::{datetime_from_jd, jd_from_datetime, local_hhmm, zone_abbreviation};
use crate::engine::plan::{Event, Plan};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use chrono::{DateTime, NaiveDate, TimeZone, Utc};
use icalendar::{
    Alarm, Calendar, CalendarComponent, Component, Event as IcsEvent, EventLike, EventStatus,
    Trigger,
};
use std::collections::HashMap;

/// Name of the non-standard property carrying the site of an event (RFC 5545 section 3.8.8.2, "X-" names).
pub const SITE_PROPERTY: &str = "X-DIPWATCH-SITE";
/// Name of the property carrying a digest of the event's content, used to tell changed events from unchanged.
pub const DIGEST_PROPERTY: &str = "X-DIPWATCH-DIGEST";

/// Options of a calendar export.
#[derive(Debug, Clone, PartialEq)]
pub struct CalendarOptions {
    /// Add a display reminder this many minutes before each block (RFC 5545 section 3.6.6).
    pub alarm_minutes: Option<u32>,
    /// The export time: DTSTAMP and LAST-MODIFIED.
    pub stamp: DateTime<Utc>,
}

/// An event of a previous export, as needed to update it.
#[derive(Debug, Clone, PartialEq)]
pub struct PreviousEvent {
    /// UID.
    pub uid: String,
    /// SEQUENCE (0 if absent).
    pub sequence: u32,
    /// DTSTART, UTC JD.
    pub start_utc: f64,
    /// DTEND, UTC JD.
    pub end_utc: f64,
    /// SUMMARY (unescaped).
    pub summary: String,
    /// Site name from [`SITE_PROPERTY`].
    pub site: String,
    /// Content digest from [`DIGEST_PROPERTY`].
    pub digest: String,
    /// Whether it was already cancelled.
    pub cancelled: bool,
}

/// What changed relative to the previous export.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ExportSummary {
    /// Events written.
    pub events: usize,
    /// Events not in the previous export.
    pub new: usize,
    /// Events whose times or text changed.
    pub changed: usize,
    /// Previous events written as cancelled: (summary, start UTC JD).
    pub cancelled: Vec<(String, f64)>,
}

/// FNV-1a 64-bit hash (Fowler, Noll, Vo): a stable digest that does not depend on the Rust version.
fn fnv1a64(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in bytes {
        h ^= u64::from(*b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// A name's slug, at most 40 characters, for UIDs.
fn slug(text: &str) -> String {
    crate::outputs::names::slug(text).chars().take(40).collect()
}

/// The UID of a transit of `target` at `site` on the night `night_of`, the `slot`-th period-long slot of that
/// night (0 unless the period is shorter than a day): readable slugs plus a hash of the exact names (RFC 5545
/// section 3.8.4.7: globally unique and persistent). Nothing here depends on the ephemeris' reference epoch, so
/// re-referencing or refining T0 and P keeps the identity of every transit that stays on its night.
pub fn event_uid(target: &str, night_of: NaiveDate, slot: i64, site: &str) -> String {
    let h = fnv1a64(format!("{target}\u{1f}{night_of}\u{1f}{slot}\u{1f}{site}").as_bytes());
    format!(
        "{}.{}.{slot}.{}.{:016x}@dipwatch",
        slug(target),
        night_of.format("%Y%m%d"),
        slug(site),
        h
    )
}

/// The UID of a planned event (see [`event_uid`]): the slot counts whole periods from the start of the night
/// (local mean solar noon) to mid-transit. At a site with several telescopes each telescope's event has its own
/// UID (the site part is `Site / telescope`); a one-telescope site keeps the plain site name.
pub fn uid_of(e: &Event, site: &Site, target: &Target) -> String {
    let night_start = crate::astro::civil::night_start_jd(e.night_of, site.lon_deg, site.tz);
    let slot = ((e.mid_utc - night_start) / target.ephemeris.period_days)
        .floor()
        .max(0.0) as i64;
    // A transit keeps the plain name (calendars written before kinds existed keep their UIDs).
    let name = match target.kind {
        crate::orbit::EventKind::Transit => target.name.clone(),
        k => format!("{} {}", target.name, k.label()),
    };
    event_uid(
        &name,
        e.night_of,
        slot,
        &site.station_label(e.telescope_index),
    )
}

/// SEQUENCE for a new or changed event at `stamp`: minutes since 2024-01-01T00:00Z.
pub fn sequence_at(stamp: &DateTime<Utc>) -> u32 {
    let base = Utc
        .with_ymd_and_hms(2024, 1, 1, 0, 0, 0)
        .single()
        .expect("valid date");
    ((*stamp - base).num_minutes()).clamp(0, i64::from(u32::MAX)) as u32
}

fn both_times(jd: f64, site: &Site) -> String {
    format!(
        "{} {} ({} UTC)",
        local_hhmm(jd, site.tz),
        zone_abbreviation(jd, site.tz),
        datetime_from_jd(jd).format("%H:%M")
    )
}

fn airmass_text(x: f64) -> String {
    if x.is_finite() {
        format!("airmass {x:.2}")
    } else {
        "below the horizon".into()
    }
}

/// `text` with its first letter in capitals.
fn capitalised(text: &str) -> String {
    let mut c = text.chars();
    c.next()
        .map(|f| f.to_uppercase().chain(c).collect())
        .unwrap_or_default()
}

/// SUMMARY of an event: target, verdict and site.
pub fn summary(e: &Event, site: &Site, target: &Target) -> String {
    format!(
        "{} {} ({}) at {}",
        target.name,
        target.kind.noun(),
        e.verdict.label(),
        site.station_label(e.telescope_index)
    )
}

/// DESCRIPTION of an event: contacts in local time and UTC with +-sigma, altitudes and airmass, Moon, meridian,
/// depth and the ephemeris used.
pub fn description(e: &Event, site: &Site, target: &Target) -> String {
    let eph = &target.ephemeris;
    let sig = format!("+-{:.1} min", e.sigma_min);
    let names = target.kind.instant_labels();
    let mut lines = vec![
        format!(
            "{} epoch {}: {}, {} of the {} in usable time",
            target.name,
            e.epoch,
            e.verdict.label(),
            crate::outputs::percent_floor(e.coverage),
            target.kind.noun()
        ),
        format!(
            "Night of {} at {}",
            e.night_of,
            site.station_label(e.telescope_index)
        ),
        format!(
            "Block start: {}, alt {:.1} deg",
            both_times(e.block_start_utc, site),
            e.alt_block_start_deg
        ),
        format!(
            "{}: {} {sig}, alt {:.1} deg, {}",
            capitalised(names[0]),
            both_times(e.ingress_utc, site),
            e.alt_ingress_deg,
            airmass_text(e.airmass_ingress)
        ),
        format!(
            "{}: {} {sig}, alt {:.1} deg, {}",
            capitalised(names[1]),
            both_times(e.mid_utc, site),
            e.alt_mid_deg,
            airmass_text(e.airmass_mid)
        ),
        format!(
            "{}: {} {sig}, alt {:.1} deg, {}",
            capitalised(names[2]),
            both_times(e.egress_utc, site),
            e.alt_egress_deg,
            airmass_text(e.airmass_egress)
        ),
        format!(
            "Block end: {}, alt {:.1} deg",
            both_times(e.block_end_utc, site),
            e.alt_block_end_deg
        ),
        format!(
            "Moon: {:.0} deg away, {:.0}% lit, altitude {:.0} deg",
            e.moon_sep_deg,
            e.moon_illum * 100.0,
            e.moon_alt_mid_deg
        ),
    ];
    if let Some(n) = &e.noise {
        lines.push(crate::outputs::photometry_line(n));
    }
    if let Some(m) = e.meridian_utc {
        lines.push(format!(
            "Meridian crossing: {} (equatorial mounts flip)",
            both_times(m, site)
        ));
    }
    if !e.reasons.is_empty() {
        lines.push(format!(
            "Limits cutting the block: {}",
            e.reasons
                .iter()
                .map(|r| r.label())
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }
    if let Some(d) = target.depth_ppt {
        lines.push(format!("Depth: {d} ppt"));
    }
    lines.push(format!(
        "Ephemeris: T0 {} {} +- {} d, P {} +- {} d",
        eph.t0,
        eph.system.name(),
        eph.t0_sigma_days,
        eph.period_days,
        eph.period_sigma_days
    ));
    if !target.notes.is_empty() {
        lines.push(format!("Notes: {}", target.notes));
    }
    lines.join("\n")
}

/// Build the iCalendar text for the events of `plan` at the sites in `site_filter` (all if `None`).
///
/// Given: the plan and its inputs; `previous` events of an earlier export (empty if none); `range` the UTC JD
/// span of this export (previous events inside it that are no longer planned are cancelled). Returns the
/// calendar text (CRLF line ends) and what changed.
pub fn build_calendar(
    plan: &Plan,
    sites: &[Site],
    targets: &[Target],
    site_filter: Option<usize>,
    previous: &[PreviousEvent],
    range: (f64, f64),
    opts: &CalendarOptions,
) -> (String, ExportSummary) {
    let prev: HashMap<&str, &PreviousEvent> =
        previous.iter().map(|p| (p.uid.as_str(), p)).collect();
    let new_sequence = sequence_at(&opts.stamp);
    let mut cal = Calendar::empty();
    cal.append_property(("VERSION", "2.0"));
    cal.append_property((
        "PRODID",
        concat!("-//dipwatch//dipwatch ", env!("CARGO_PKG_VERSION"), "//EN"),
    ));
    cal.append_property(("CALSCALE", "GREGORIAN"));
    let name = match site_filter {
        Some(i) => format!("dipwatch transits at {}", sites[i].name),
        None => "dipwatch transits".to_string(),
    };
    cal.name(&name);
    let mut summary_out = ExportSummary::default();
    let mut written = std::collections::HashSet::new();
    let mut exported_sites = Vec::new();
    for sp in &plan.sites {
        if site_filter.is_some_and(|i| i != sp.site_index) {
            continue;
        }
        let site = &sites[sp.site_index];
        exported_sites.push(site.name.clone());
        for e in sp.events.iter().filter(|e| e.observable) {
            let target = &targets[e.target_index];
            let uid = uid_of(e, site, target);
            let sum = summary(e, site, target);
            let desc = description(e, site, target);
            let start = datetime_from_jd(e.block_start_utc);
            let end = datetime_from_jd(e.block_end_utc);
            let digest = format!(
                "{:016x}",
                fnv1a64(
                    format!("{}|{}|{sum}|{desc}", start.timestamp(), end.timestamp()).as_bytes()
                )
            );
            let sequence = match prev.get(uid.as_str()) {
                Some(p) if p.digest == digest && !p.cancelled => p.sequence,
                Some(p) => {
                    summary_out.changed += 1;
                    new_sequence.max(p.sequence + 1)
                }
                None => {
                    summary_out.new += usize::from(!previous.is_empty());
                    new_sequence
                }
            };
            let ev = planned_event(
                (e, site, target),
                (&sum, &desc),
                (&uid, sequence, &digest),
                opts,
            );
            cal.push(ev);
            written.insert(uid);
            summary_out.events += 1;
        }
    }
    for p in previous {
        let in_scope = exported_sites.contains(&p.site);
        if written.contains(&p.uid) || !in_scope || p.start_utc < range.0 || p.start_utc > range.1 {
            continue;
        }
        cal.push(cancelled_event(p, new_sequence, opts));
        if !p.cancelled {
            summary_out.cancelled.push((p.summary.clone(), p.start_utc));
        }
    }
    (refold(&cal.done().to_string()), summary_out)
}

/// The VEVENT of one planned event: its block as it can be observed, its texts (`summary`, `description`,
/// already built for the digest), place, verdict, and the optional alarm; `(uid, sequence, digest)` from the
/// comparison with the previous export.
fn planned_event(
    (e, site, target): (&Event, &Site, &Target),
    (summary_text, description_text): (&str, &str),
    (uid, sequence, digest): (&str, u32, &str),
    opts: &CalendarOptions,
) -> CalendarComponent {
    let mut ev = IcsEvent::new();
    ev.uid(uid)
        .timestamp(opts.stamp)
        .last_modified(opts.stamp)
        .sequence(sequence)
        .starts(datetime_from_jd(e.block_start_utc))
        .ends(datetime_from_jd(e.block_end_utc))
        .summary(summary_text)
        .description(description_text)
        .location(&format!(
            "{} ({:.4}, {:.4}, {:.0} m)",
            site.name, site.lat_deg, site.lon_deg, site.elevation_m
        ))
        .add_property("GEO", format!("{:.6};{:.6}", site.lat_deg, site.lon_deg))
        .categories(vec![e.verdict.label()])
        .status(EventStatus::Confirmed)
        .add_property(SITE_PROPERTY, &site.name)
        .add_property(DIGEST_PROPERTY, digest);
    if let Some(m) = opts.alarm_minutes {
        let mut alarm = Alarm::display(
            &format!("{} block starts in {m} min", target.name),
            Trigger::before_start(chrono::Duration::minutes(i64::from(m))),
        );
        // The crate would otherwise add a random UID and the current time to the alarm.
        alarm.uid(&format!("alarm-{uid}")).timestamp(opts.stamp);
        ev.alarm(alarm.done());
    }
    ev.done().into()
}

/// A previous export's event that is no longer planned, written again as cancelled (RFC 5545 3.8.1.11) with a
/// higher SEQUENCE (unless it was already cancelled).
fn cancelled_event(
    p: &PreviousEvent,
    new_sequence: u32,
    opts: &CalendarOptions,
) -> CalendarComponent {
    let summary_text = if p.cancelled || p.summary.starts_with("Cancelled: ") {
        p.summary.clone()
    } else {
        format!("Cancelled: {}", p.summary)
    };
    let mut ev = IcsEvent::new();
    ev.uid(&p.uid)
        .timestamp(opts.stamp)
        .last_modified(opts.stamp)
        .sequence(if p.cancelled { p.sequence } else { new_sequence.max(p.sequence + 1) })
        .starts(datetime_from_jd(p.start_utc))
        .ends(datetime_from_jd(p.end_utc))
        .summary(&summary_text)
        .description("This transit is no longer in the plan after an update of the ephemeris or the planning options.")
        .status(EventStatus::Cancelled)
        .add_property(SITE_PROPERTY, &p.site)
        .add_property(DIGEST_PROPERTY, "cancelled");
    ev.done().into()
}

/// Unfold the `icalendar` crate's output and fold it again so that every physical line, including the leading
/// space of a continuation, is at most 75 octets (RFC 5545 section 3.1: the crate writes 75 octets after the
/// space). Folds fall on UTF-8 boundaries and never right after a space or tab, so parsers that trim line ends
/// keep every space.
pub fn refold(text: &str) -> String {
    let unfolded = text.replace("\r\n ", "").replace("\r\n\t", "");
    let mut out = String::with_capacity(unfolded.len() + unfolded.len() / 70 * 3);
    for line in unfolded.split_terminator("\r\n") {
        fold_line(line, &mut out);
    }
    out
}

/// Append one content line to `out`, folded at 75 octets (74 after the leading space of continuations).
fn fold_line(line: &str, out: &mut String) {
    const LIMIT: usize = 75;
    let mut rest = line;
    let mut first = true;
    loop {
        let room = if first { LIMIT } else { LIMIT - 1 };
        if !first {
            out.push(' ');
        }
        if rest.len() <= room {
            out.push_str(rest);
            out.push_str("\r\n");
            return;
        }
        let mut cut = room;
        while !rest.is_char_boundary(cut) {
            cut -= 1;
        }
        // Do not leave whitespace at the end of a physical line (some parsers trim it).
        let mut c = cut;
        while c > 1 && rest[..c].ends_with([' ', '\t']) {
            c -= 1;
            while !rest.is_char_boundary(c) {
                c -= 1;
            }
        }
        if c > 1 {
            cut = c;
        }
        out.push_str(&rest[..cut]);
        out.push_str("\r\n");
        rest = &rest[cut..];
        first = false;
    }
}

/// Read the events of a previous dipwatch export.
///
/// Returns a message naming the problem if the text is not an iCalendar file.
pub fn parse_previous(text: &str) -> Result<Vec<PreviousEvent>, String> {
    let unfolded = icalendar::parser::unfold(text);
    let cal = icalendar::parser::read_calendar(&unfolded).map_err(|e| {
        format!(
            "not an iCalendar file: {}",
            e.lines().next().unwrap_or("parse error")
        )
    })?;
    let cal: Calendar = cal.into();
    let mut out = Vec::new();
    for c in &cal.components {
        let CalendarComponent::Event(ev) = c else {
            continue;
        };
        let (Some(uid), Some(start), Some(end)) = (ev.get_uid(), ev.get_start(), ev.get_end())
        else {
            continue;
        };
        let to_jd = |d: icalendar::DatePerhapsTime| match d {
            icalendar::DatePerhapsTime::DateTime(icalendar::CalendarDateTime::Utc(t)) => {
                Some(jd_from_datetime(&t))
            }
            _ => None,
        };
        let (Some(start_utc), Some(end_utc)) = (to_jd(start), to_jd(end)) else {
            continue;
        };
        out.push(PreviousEvent {
            uid: uid.to_string(),
            sequence: ev.get_sequence().unwrap_or(0),
            start_utc,
            end_utc,
            summary: ev.get_summary().unwrap_or_default().to_string(),
            site: ev
                .property_value(SITE_PROPERTY)
                .unwrap_or_default()
                .to_string(),
            digest: ev
                .property_value(DIGEST_PROPERTY)
                .unwrap_or_default()
                .to_string(),
            cancelled: ev.get_status() == Some(EventStatus::Cancelled),
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uid_is_stable_and_distinguishes_names() {
        let d = NaiveDate::from_ymd_opt(2027, 3, 1).unwrap();
        let uid = |t: &str, d: NaiveDate, k: i64, s: &str| event_uid(t, d, k, s);
        assert_eq!(
            uid("Amberfall b", d, 0, "Kestrel Moor"),
            uid("Amberfall b", d, 0, "Kestrel Moor")
        );
        assert_ne!(
            uid("Amberfall b", d, 0, "Kestrel Moor"),
            uid("Amberfall-b", d, 0, "Kestrel Moor")
        );
        assert_ne!(
            uid("Amberfall b", d, 0, "Kestrel Moor"),
            uid("Amberfall b", d.succ_opt().unwrap(), 0, "Kestrel Moor")
        );
        assert_ne!(
            uid("Amberfall b", d, 0, "Kestrel Moor"),
            uid("Amberfall b", d, 1, "Kestrel Moor")
        );
        assert!(uid("A\nEND:VEVENT", d, 0, "S")
            .chars()
            .all(|c| c.is_ascii_graphic()));
    }

    #[test]
    fn folding_respects_75_octets_and_utf8() {
        let long = format!("DESCRIPTION:{}end", "ab cd \u{e9}f ".repeat(40));
        let folded = refold(&format!("{long}\r\n"));
        for l in folded.split_terminator("\r\n") {
            assert!(l.len() <= 75, "{} octets: {l:?}", l.len());
            assert!(!l.ends_with(' '), "line ends with a space: {l:?}");
        }
        assert_eq!(folded.replace("\r\n ", ""), format!("{long}\r\n"));
    }

    #[test]
    fn fnv_reference_values() {
        // FNV-1a 64 test vectors (Fowler/Noll/Vo reference page, from memory): "" and "a".
        assert_eq!(fnv1a64(b""), 0xcbf2_9ce4_8422_2325);
        assert_eq!(fnv1a64(b"a"), 0xaf63_dc4c_8601_ec8c);
    }
}
