//! Charts as SVG: the night chart (altitude and airmass through one night) and the season grid (verdicts by
//! night and target), plus the O-C chart of a refinement.
//!
//! Hand-built SVG rather than a plotting crate: the charts need pattern fills that stay readable in greyscale,
//! a secondary airmass axis whose ticks are a non-linear function of the altitude axis, and bands shaded by the
//! Sun's altitude; `plotters` 0.3 (measured here) has no pattern fills or non-linear secondary ticks. Every
//! drawn element carries a class (`block`, `contact`, `event`, ...) so tests can count them.
//!
//! Palette (our own): ink #1d2433, teal #1f6f78, ochre #b9771e, plum #6e4a8e, slate #5b6675, night tints from
//! #c8d1e3 (dark) to #f4f6fa (civil). Verdict glyphs differ in shape, not only colour: whole = full square,
//! whole-short-baseline = framed square, ingress-only = left half, egress-only = right half,
//! middle-only = centre bar.

use crate::astro::atmosphere::alt_deg_for_airmass;
use crate::astro::barycentric::EarthTable;
use crate::astro::civil::{datetime_from_jd, local_hhmm, zone_abbreviation};
use crate::astro::frames::{wrap_pi, EarthOrientation};
use crate::astro::sky::{sun_alt_deg, target_alt_az_deg};
use crate::astro::time::{jd_tdb_from_utc, JdUtc};
use crate::engine::almanac::NightAlmanac;
use crate::engine::plan::{Event, Plan, Verdict};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use std::fmt::Write;

const INK: &str = "#1d2433";
const TEAL: &str = "#1f6f78";
const OCHRE: &str = "#b9771e";
const PLUM: &str = "#6e4a8e";
const SLATE: &str = "#5b6675";

/// Escape text for XML.
fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// A minimal SVG writer.
struct Svg {
    buf: String,
}

impl Svg {
    fn new(w: f64, h: f64, title: &str) -> Svg {
        let mut buf = String::new();
        let _ = write!(
            buf,
            r##"<svg xmlns="http://www.w3.org/2000/svg" width="{w}" height="{h}" viewBox="0 0 {w} {h}" font-family="DejaVu Sans, Verdana, sans-serif" font-size="12">"##
        );
        let _ = write!(buf, "<title>{}</title>", esc(title));
        buf.push_str(
            r##"<defs><pattern id="hatch" width="6" height="6" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="6" height="6" fill="#1f6f78" fill-opacity="0.10"/><line x1="0" y1="0" x2="0" y2="6" stroke="#1f6f78" stroke-width="1.2" stroke-opacity="0.45"/></pattern><pattern id="dots" width="5" height="5" patternUnits="userSpaceOnUse"><rect width="5" height="5" fill="#b9771e" fill-opacity="0.10"/><circle cx="2.5" cy="2.5" r="0.9" fill="#b9771e" fill-opacity="0.6"/></pattern></defs>"##,
        );
        let _ = write!(buf, r##"<rect width="{w}" height="{h}" fill="white"/>"##);
        Svg { buf }
    }

    fn raw(&mut self, s: &str) {
        self.buf.push_str(s);
    }

    fn rect(&mut self, x: f64, y: f64, w: f64, h: f64, style: &str, class: &str) {
        let _ = write!(
            self.buf,
            r##"<rect class="{class}" x="{x:.2}" y="{y:.2}" width="{:.2}" height="{:.2}" {style}/>"##,
            w.max(0.0),
            h.max(0.0)
        );
    }

    fn line(&mut self, x1: f64, y1: f64, x2: f64, y2: f64, style: &str, class: &str) {
        let _ = write!(
            self.buf,
            r##"<line class="{class}" x1="{x1:.2}" y1="{y1:.2}" x2="{x2:.2}" y2="{y2:.2}" {style}/>"##
        );
    }

    /// Polylines through the points where `keep` is true (one per unbroken run).
    fn polyline_where(&mut self, pts: &[(f64, f64)], keep: &[bool], style: &str, class: &str) {
        let mut run: Vec<(f64, f64)> = Vec::new();
        for (p, k) in pts.iter().zip(keep) {
            if *k {
                run.push(*p);
            } else {
                self.polyline(&run, style, class);
                run.clear();
            }
        }
        self.polyline(&run, style, class);
    }

    fn polyline(&mut self, pts: &[(f64, f64)], style: &str, class: &str) {
        if pts.len() < 2 {
            return;
        }
        let p: Vec<String> = pts.iter().map(|(x, y)| format!("{x:.1},{y:.1}")).collect();
        let _ = write!(
            self.buf,
            r##"<polyline class="{class}" fill="none" points="{}" {style}/>"##,
            p.join(" ")
        );
    }

    fn text(&mut self, x: f64, y: f64, s: &str, style: &str) {
        let _ = write!(
            self.buf,
            r##"<text x="{x:.1}" y="{y:.1}" {style}>{}</text>"##,
            esc(s)
        );
    }

    fn finish(mut self) -> String {
        self.buf.push_str("</svg>\n");
        self.buf
    }
}

/// Everything computed for a night chart, exposed for tests.
#[derive(Debug, Clone, PartialEq)]
pub struct NightChartRange {
    /// First and last instant on the time axis, UTC JD.
    pub start: f64,
    /// Last instant on the time axis, UTC JD.
    pub end: f64,
}

/// The time axis of a night chart: one hour before sunset to one hour after sunrise (the whole noon-to-noon
/// window when the Sun does not set or rise), widened to include every block.
pub fn night_range(almanac: &NightAlmanac, events: &[Event]) -> NightChartRange {
    let w = almanac.window;
    let mut start = almanac.sun.dusk.map(|t| t - 1.0 / 24.0).unwrap_or(w.start);
    let mut end = almanac.sun.dawn.map(|t| t + 1.0 / 24.0).unwrap_or(w.end);
    for e in events {
        start = start.min(e.full_block_start_utc - 0.25 / 24.0);
        end = end.max(e.full_block_end_utc + 0.25 / 24.0);
    }
    NightChartRange {
        start: start.max(w.start),
        end: end.min(w.end),
    }
}

/// The night chart of `target` at `site`: altitude (left) and airmass (right) against local time, twilight
/// shading, the site's limit and horizon along the track, the Moon, each observing block with ingress/egress,
/// their +-sigma bands and the baselines, and the meridian crossing.
pub fn night_chart_svg(
    site: &Site,
    target: &Target,
    almanac: &NightAlmanac,
    events: &[Event],
    sigma_k: f64,
) -> String {
    let range = night_range(almanac, events);
    let (w, h) = (940.0, 560.0);
    let (x0, x1, y0, y1) = (70.0, 860.0, 64.0, 420.0);
    let (alt_lo, alt_hi) = (0.0, 90.0);
    let xs = |t: f64| x0 + (t - range.start) / (range.end - range.start) * (x1 - x0);
    let ys = |alt: f64| y1 - (alt.clamp(alt_lo, alt_hi) - alt_lo) / (alt_hi - alt_lo) * (y1 - y0);
    let title = format!(
        "{} from {}, night of {}",
        target.name, site.name, almanac.night_of
    );
    let mut svg = Svg::new(w, h, &title);
    svg.text(
        x0,
        28.0,
        &title,
        &format!(r##"font-size="17" font-weight="bold" fill="{INK}""##),
    );
    let sub = match events.iter().find(|e| e.observable) {
        Some(e) => format!(
            "{}: {} of the transit usable; epoch {}, timing 1-sigma {:.1} min",
            e.verdict.label(),
            crate::outputs::percent_floor(e.coverage),
            e.epoch,
            e.sigma_min
        ),
        None if events.is_empty() => "no transit this night".to_string(),
        None => "transit not observable this night".to_string(),
    };
    svg.text(x0, 48.0, &sub, &format!(r##"fill="{SLATE}""##));

    // Samples every 5 minutes.
    let n = (((range.end - range.start) * 288.0).ceil() as usize).max(2);
    let ts: Vec<f64> = (0..=n)
        .map(|i| range.start + (range.end - range.start) * i as f64 / n as f64)
        .collect();
    let earth = EarthTable::new(range.start - 1.0, range.end + 1.0);
    let icrs = target.icrs_at(range.start);
    let sun: Vec<f64> = ts
        .iter()
        .map(|&t| sun_alt_deg(JdUtc(t), &site.observer))
        .collect();
    let tgt: Vec<(f64, f64)> = ts
        .iter()
        .map(|&t| target_alt_az_deg(&icrs, JdUtc(t), &site.observer, &earth))
        .collect();
    let moon: Vec<f64> = ts
        .iter()
        .map(|&t| crate::engine::almanac::moon_alt_deg(t, site))
        .collect();

    // Twilight shading: runs of equal band.
    let band = |a: f64| -> usize {
        if a >= -0.8333 {
            0
        } else if a >= -6.0 {
            1
        } else if a >= -12.0 {
            2
        } else if a >= -18.0 {
            3
        } else {
            4
        }
    };
    let fills = ["#ffffff", "#f4f6fa", "#e6ebf3", "#d7dfec", "#c8d1e3"];
    let names = ["day", "civil", "nautical", "astronomical", "night"];
    let mut i = 0;
    while i < ts.len() {
        let b = band(sun[i]);
        let mut j = i;
        while j + 1 < ts.len() && band(sun[j + 1]) == b {
            j += 1;
        }
        let xa = xs(if i == 0 {
            ts[0]
        } else {
            0.5 * (ts[i - 1] + ts[i])
        });
        let xb = xs(if j + 1 < ts.len() {
            0.5 * (ts[j] + ts[j + 1])
        } else {
            ts[j]
        });
        svg.rect(
            xa,
            y0,
            xb - xa,
            y1 - y0,
            &format!(r##"fill="{}""##, fills[b]),
            &format!("twilight {}", names[b]),
        );
        i = j + 1;
    }

    // Blocks: the observable block dotted (the planned block dashed where a limit clips it), in-transit window
    // hatched, sigma bands, contact lines.
    for e in events {
        let margin = sigma_k * e.sigma_min / 1440.0;
        if e.start_clipped() || e.end_clipped() {
            let (fs, fe) = (
                e.full_block_start_utc.max(range.start),
                e.full_block_end_utc.min(range.end),
            );
            svg.rect(
                xs(fs),
                y0,
                xs(fe) - xs(fs),
                y1 - y0,
                r##"fill="none" stroke="#b9771e" stroke-width="1" stroke-dasharray="4 3""##,
                "planned block (clipped by a limit)",
            );
        }
        let (bs, be) = (
            e.block_start_utc.max(range.start),
            e.block_end_utc.min(range.end),
        );
        svg.rect(
            xs(bs),
            y0,
            xs(be) - xs(bs),
            y1 - y0,
            r##"fill="url(#dots)" stroke="#b9771e" stroke-width="1""##,
            "block",
        );
        let (is, ie) = (
            (e.ingress_utc - margin).max(range.start),
            (e.egress_utc + margin).min(range.end),
        );
        svg.rect(
            xs(is),
            y0,
            xs(ie) - xs(is),
            y1 - y0,
            r##"fill="url(#hatch)""##,
            "transit",
        );
        let s = e.sigma_min / 1440.0;
        for (t, label) in [(e.ingress_utc, "ingress"), (e.egress_utc, "egress")] {
            if t < range.start || t > range.end {
                continue;
            }
            svg.rect(
                xs(t - s),
                y0,
                xs(t + s) - xs(t - s),
                y1 - y0,
                r##"fill="#6e4a8e" fill-opacity="0.22""##,
                "sigma",
            );
            svg.line(
                xs(t),
                y0,
                xs(t),
                y1,
                &format!(r##"stroke="{PLUM}" stroke-width="2""##),
                "contact",
            );
            svg.text(
                xs(t) + 3.0,
                y0 + 14.0,
                &format!("{label} {}", local_hhmm(t, site.tz)),
                &format!(r##"fill="{PLUM}" font-size="11""##),
            );
        }
        if e.mid_utc >= range.start && e.mid_utc <= range.end {
            svg.line(
                xs(e.mid_utc),
                y0,
                xs(e.mid_utc),
                y1,
                &format!(r##"stroke="{PLUM}" stroke-width="1" stroke-dasharray="2,3""##),
                "mid",
            );
        }
    }

    // Limit and horizon along the track.
    svg.line(
        x0,
        ys(site.min_alt_deg),
        x1,
        ys(site.min_alt_deg),
        &format!(r##"stroke="{INK}" stroke-width="1.2" stroke-dasharray="8,4""##),
        "limit",
    );
    if let Some(max_alt) = site.max_alt_deg {
        svg.line(
            x0,
            ys(max_alt),
            x1,
            ys(max_alt),
            &format!(r##"stroke="{INK}" stroke-width="1.2" stroke-dasharray="2,4""##),
            "zenith-limit",
        );
    }
    if !site.horizon.is_empty() {
        let pts: Vec<(f64, f64)> = ts
            .iter()
            .zip(&tgt)
            .map(|(&t, &(_, az))| (xs(t), ys(site.horizon.min_alt_deg(az))))
            .collect();
        svg.polyline(
            &pts,
            &format!(r##"stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="1,3""##),
            "horizon",
        );
    }
    // Moon and target curves, above the horizon only.
    let moon_pts: Vec<(f64, f64)> = ts
        .iter()
        .zip(&moon)
        .map(|(&t, &a)| (xs(t), ys(a)))
        .collect();
    let moon_up: Vec<bool> = moon.iter().map(|&a| a >= 0.0).collect();
    svg.polyline_where(
        &moon_pts,
        &moon_up,
        &format!(r##"stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="6,3""##),
        "moon-alt",
    );
    let tgt_pts: Vec<(f64, f64)> = ts
        .iter()
        .zip(&tgt)
        .map(|(&t, &(a, _))| (xs(t), ys(a)))
        .collect();
    let tgt_up: Vec<bool> = tgt.iter().map(|&(a, _)| a >= 0.0).collect();
    svg.polyline_where(
        &tgt_pts,
        &tgt_up,
        &format!(r##"stroke="{TEAL}" stroke-width="3""##),
        "target-alt",
    );

    // Meridian crossing (upper culmination) from the hour angle.
    let eo = EarthOrientation::at(JdUtc(range.start));
    let vel = earth.earth_bary_vel_au_per_day(jd_tdb_from_utc(JdUtc(range.start)).0);
    let (ra, _) = eo.apparent_radec(&icrs, Some(&vel));
    let ha = wrap_pi(eo.last_rad(site.observer.lon_rad) - ra);
    let sidereal_day = 1.0 / crate::astro::frames::GMST_RATE_PER_UT1_DAY;
    let mut tm = range.start - ha / std::f64::consts::TAU * sidereal_day;
    while tm < range.start {
        tm += sidereal_day;
    }
    if tm <= range.end {
        let (alt, _) = target_alt_az_deg(&icrs, JdUtc(tm), &site.observer, &earth);
        let (x, y) = (xs(tm), ys(alt));
        svg.raw(&format!(
            r##"<path class="meridian" d="M {:.1} {:.1} l -6 -11 l 12 0 z" fill="{INK}"/>"##,
            x,
            y - 4.0
        ));
        svg.text(
            x + 8.0,
            y - 8.0,
            &format!("meridian {}", local_hhmm(tm, site.tz)),
            &format!(r##"fill="{INK}" font-size="11""##),
        );
    }

    // Axes: altitude (left), airmass (right), local time (bottom).
    svg.rect(
        x0,
        y0,
        x1 - x0,
        y1 - y0,
        &format!(r##"fill="none" stroke="{INK}" stroke-width="1""##),
        "frame",
    );
    for a in (0..=90).step_by(15) {
        let y = ys(a as f64);
        svg.line(x0 - 5.0, y, x0, y, &format!(r##"stroke="{INK}""##), "tick");
        svg.text(
            x0 - 8.0,
            y + 4.0,
            &format!("{a}"),
            &format!(r##"text-anchor="end" fill="{INK}""##),
        );
    }
    svg.raw(&format!(
        r##"<text transform="translate(24 {:.1}) rotate(-90)" text-anchor="middle" fill="{INK}">altitude (deg)</text>"##,
        0.5 * (y0 + y1)
    ));
    for x in [1.0, 1.1, 1.2, 1.5, 2.0, 3.0, 5.0] {
        let y = ys(alt_deg_for_airmass(x));
        svg.line(x1, y, x1 + 5.0, y, &format!(r##"stroke="{INK}""##), "tick");
        svg.text(
            x1 + 8.0,
            y + 4.0,
            &format!("{x:.1}"),
            &format!(r##"fill="{INK}""##),
        );
    }
    svg.raw(&format!(
        r##"<text transform="translate({:.1} {:.1}) rotate(90)" text-anchor="middle" fill="{INK}">airmass (Kasten-Young)</text>"##,
        x1 + 52.0,
        0.5 * (y0 + y1)
    ));
    let first_local = datetime_from_jd(range.start).with_timezone(&site.tz);
    let to_next_hour = 60 - i64::from(chrono::Timelike::minute(&first_local));
    let mut t = range.start + to_next_hour as f64 / 1440.0
        - f64::from(chrono::Timelike::second(&first_local)) / 86_400.0;
    while t <= range.end {
        let x = xs(t);
        svg.line(x, y1, x, y1 + 5.0, &format!(r##"stroke="{INK}""##), "tick");
        svg.text(
            x,
            y1 + 19.0,
            &local_hhmm(t, site.tz),
            &format!(r##"text-anchor="middle" fill="{INK}""##),
        );
        t += 1.0 / 24.0;
    }
    svg.text(
        0.5 * (x0 + x1),
        y1 + 38.0,
        &format!(
            "local time ({}, {})",
            zone_abbreviation(range.start, site.tz),
            site.tz.name()
        ),
        &format!(r##"text-anchor="middle" fill="{INK}""##),
    );

    // Legend.
    let ly = 490.0;
    let mut lx = x0;
    let item = |svg: &mut Svg, glyph: &str, label: &str, lx: &mut f64| {
        svg.raw(
            &glyph
                .replace("{x}", &format!("{:.1}", *lx))
                .replace("{y}", &format!("{ly:.1}")),
        );
        svg.text(*lx + 30.0, ly + 4.0, label, &format!(r##"fill="{INK}""##));
        *lx += 30.0 + 7.0 * label.len() as f64 + 18.0;
    };
    item(
        &mut svg,
        &format!(r##"<path d="M {{x}} {{y}} h 24" stroke="{TEAL}" stroke-width="3"/>"##),
        "target altitude",
        &mut lx,
    );
    item(
        &mut svg,
        &format!(
            r##"<path d="M {{x}} {{y}} h 24" stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="6,3"/>"##
        ),
        "Moon",
        &mut lx,
    );
    item(
        &mut svg,
        &format!(
            r##"<path d="M {{x}} {{y}} h 24" stroke="{INK}" stroke-width="1.2" stroke-dasharray="8,4"/>"##
        ),
        "altitude limit",
        &mut lx,
    );
    if site.max_alt_deg.is_some() {
        item(
            &mut svg,
            &format!(
                r##"<path d="M {{x}} {{y}} h 24" stroke="{INK}" stroke-width="1.2" stroke-dasharray="2,4"/>"##
            ),
            "highest trackable",
            &mut lx,
        );
    }
    if !site.horizon.is_empty() {
        item(
            &mut svg,
            &format!(
                r##"<path d="M {{x}} {{y}} h 24" stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="1,3"/>"##
            ),
            "horizon",
            &mut lx,
        );
    }
    let ly2 = ly + 24.0;
    let mut lx2 = x0;
    let mut item2 = |svg: &mut Svg, style: &str, label: &str| {
        svg.raw(&format!(
            r##"<rect x="{lx2:.1}" y="{:.1}" width="24" height="12" {style}/>"##,
            ly2 - 8.0
        ));
        svg.text(lx2 + 30.0, ly2 + 3.0, label, &format!(r##"fill="{INK}""##));
        lx2 += 30.0 + 7.0 * label.len() as f64 + 18.0;
    };
    item2(
        &mut svg,
        r##"fill="url(#dots)" stroke="#b9771e""##,
        "baseline",
    );
    item2(
        &mut svg,
        r##"fill="url(#hatch)" stroke="#1f6f78""##,
        "transit + k sigma",
    );
    item2(
        &mut svg,
        r##"fill="#6e4a8e" fill-opacity="0.22""##,
        "+-1 sigma at each contact",
    );
    item2(&mut svg, r##"fill="#c8d1e3""##, "night");
    item2(&mut svg, r##"fill="#e6ebf3""##, "twilight");
    svg.finish()
}

/// Draw a verdict glyph in a cell of size `s` at (x, y).
fn glyph(svg: &mut Svg, v: Verdict, x: f64, y: f64, s: f64, title: &str) {
    let t = format!("<title>{}</title>", esc(title));
    let class = format!("event verdict-{}", v.label());
    let body = match v {
        Verdict::Whole => format!(
            r##"<rect x="{x:.1}" y="{y:.1}" width="{s:.1}" height="{s:.1}" fill="{TEAL}"/>"##
        ),
        Verdict::WholeShortBaseline => format!(
            r##"<rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="white" stroke="{TEAL}" stroke-width="2"/><rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="{TEAL}"/>"##,
            x + 1.0,
            y + 1.0,
            s - 2.0,
            s - 2.0,
            x + s * 0.3,
            y + s * 0.3,
            s * 0.4,
            s * 0.4
        ),
        Verdict::IngressOnly => format!(
            r##"<rect x="{x:.1}" y="{y:.1}" width="{s:.1}" height="{s:.1}" fill="white" stroke="{OCHRE}"/><rect x="{x:.1}" y="{y:.1}" width="{:.1}" height="{s:.1}" fill="{OCHRE}"/>"##,
            s / 2.0
        ),
        Verdict::EgressOnly => format!(
            r##"<rect x="{x:.1}" y="{y:.1}" width="{s:.1}" height="{s:.1}" fill="white" stroke="{PLUM}"/><rect x="{:.1}" y="{y:.1}" width="{:.1}" height="{s:.1}" fill="{PLUM}"/>"##,
            x + s / 2.0,
            s / 2.0
        ),
        Verdict::MiddleOnly | Verdict::NotObservable => format!(
            r##"<rect x="{x:.1}" y="{y:.1}" width="{s:.1}" height="{s:.1}" fill="white" stroke="{SLATE}"/><rect x="{:.1}" y="{:.1}" width="{s:.1}" height="{:.1}" fill="{SLATE}"/>"##,
            x,
            y + s * 0.38,
            s * 0.24
        ),
    };
    svg.raw(&format!(r##"<g class="{class}">{t}{body}</g>"##));
}

/// The season grid: nights (columns) by targets (rows), one section per site, each event's verdict as a
/// glyph (two events of one target in one night share the cell side by side), the Moon's illuminated fraction
/// along the top.
pub fn season_svg(
    plan: &Plan,
    sites: &[Site],
    targets: &[Target],
    moon_illum: &[(chrono::NaiveDate, f64)],
) -> String {
    season_svg_linked(plan, sites, targets, moon_illum, None)
}

/// [`season_svg`] with each event's glyph a link to `link(event)` (the HTML page uses it to reach the night
/// charts).
pub fn season_svg_linked(
    plan: &Plan,
    sites: &[Site],
    targets: &[Target],
    moon_illum: &[(chrono::NaiveDate, f64)],
    link: Option<&dyn Fn(&Event) -> String>,
) -> String {
    let cell = 14.0;
    let label_w = 170.0;
    let nights: Vec<chrono::NaiveDate> = moon_illum.iter().map(|(d, _)| *d).collect();
    let n_cols = nights.len().max(1) as f64;
    let top = 110.0;
    let rows_per_site: Vec<Vec<usize>> = plan
        .sites
        .iter()
        .map(|sp| {
            let mut r: Vec<usize> = sp.events.iter().map(|e| e.target_index).collect();
            r.sort_unstable();
            r.dedup();
            r
        })
        .collect();
    let total_rows: usize = rows_per_site.iter().map(|r| r.len() + 2).sum();
    let w = label_w + n_cols * cell + 40.0;
    let h = top + total_rows as f64 * cell + 50.0;
    let title = format!(
        "Transits by night, {} to {}",
        nights.first().map(|d| d.to_string()).unwrap_or_default(),
        nights.last().map(|d| d.to_string()).unwrap_or_default()
    );
    let mut svg = Svg::new(w.max(760.0), h, &title);
    svg.text(
        12.0,
        26.0,
        &title,
        &format!(r##"font-size="16" font-weight="bold" fill="{INK}""##),
    );
    // Moon strip: bar height = illuminated fraction.
    svg.text(12.0, 74.0, "Moon lit", &format!(r##"fill="{SLATE}""##));
    for (i, (d, f)) in moon_illum.iter().enumerate() {
        let x = label_w + i as f64 * cell;
        svg.rect(
            x + 2.0,
            80.0 - 24.0 * f,
            cell - 4.0,
            24.0 * f,
            &format!(r##"fill="{SLATE}" fill-opacity="0.55""##),
            "moon",
        );
        if i % 7 == 0 {
            svg.text(
                x,
                46.0,
                &d.format("%m-%d").to_string(),
                &format!(r##"fill="{INK}" font-size="11""##),
            );
            svg.line(x, 50.0, x, 54.0, &format!(r##"stroke="{INK}""##), "tick");
        }
    }
    let mut y = top;
    for (sp, rows) in plan.sites.iter().zip(&rows_per_site) {
        let site = &sites[sp.site_index];
        svg.text(
            12.0,
            y + 11.0,
            &site.name,
            &format!(r##"font-weight="bold" fill="{INK}""##),
        );
        y += cell + 4.0;
        for (k, &ti) in rows.iter().enumerate() {
            let ry = y + k as f64 * cell;
            if k % 2 == 0 {
                svg.rect(
                    label_w,
                    ry,
                    n_cols * cell,
                    cell,
                    r##"fill="#f4f6fa""##,
                    "row",
                );
            }
            svg.text(
                16.0,
                ry + 11.0,
                &targets[ti].name,
                &format!(r##"fill="{INK}" font-size="11""##),
            );
            for (ci, d) in nights.iter().enumerate() {
                let evs: Vec<&Event> = sp
                    .events
                    .iter()
                    .filter(|e| e.target_index == ti && e.night_of == *d)
                    .collect();
                let m = evs.len();
                for (j, e) in evs.iter().enumerate() {
                    let s = (cell - 3.0) / m as f64;
                    let x = label_w + ci as f64 * cell + 1.5 + j as f64 * s;
                    let tip = format!(
                        "{} epoch {} on {}: {} {}",
                        targets[ti].name,
                        e.epoch,
                        d,
                        e.verdict.label(),
                        crate::outputs::percent_floor(e.coverage)
                    );
                    if let Some(link) = link {
                        svg.raw(&format!(r##"<a href="{}">"##, esc(&link(e))));
                    }
                    glyph(
                        &mut svg,
                        e.verdict,
                        x,
                        ry + 1.5 + (cell - 3.0 - s) / 2.0,
                        s,
                        &tip,
                    );
                    if link.is_some() {
                        svg.raw("</a>");
                    }
                }
            }
        }
        y += rows.len() as f64 * cell + cell;
    }
    // Legend.
    let mut lx = 12.0;
    let ly = y + 16.0;
    for v in [
        Verdict::Whole,
        Verdict::WholeShortBaseline,
        Verdict::IngressOnly,
        Verdict::EgressOnly,
        Verdict::MiddleOnly,
    ] {
        let mut g = Svg { buf: String::new() };
        glyph(&mut g, v, lx, ly - 10.0, 11.0, v.label());
        svg.raw(&g.buf.replace("class=\"event ", "class=\"legend "));
        svg.text(
            lx + 16.0,
            ly,
            v.label(),
            &format!(r##"fill="{INK}" font-size="11""##),
        );
        lx += 16.0 + 7.0 * v.label().len() as f64 + 16.0;
    }
    svg.finish()
}

/// File name of an event's night chart inside the HTML bundle: `<site>-<target>-<night>.svg`, slugged.
pub fn night_chart_file(e: &Event, sites: &[Site], targets: &[Target]) -> String {
    let slug = crate::outputs::names::slug;
    format!(
        "{}-{}-{}.svg",
        slug(&sites[e.site_index].name),
        slug(&targets[e.target_index].name),
        e.night_of
    )
}

/// The HTML page bundling the season grid (inline, its glyphs linking to the night charts in `nights/`) with
/// a list of every event by site and night. Well-formed XHTML, so any XML parser can read it.
pub fn season_html(
    plan: &Plan,
    sites: &[Site],
    targets: &[Target],
    moon_illum: &[(chrono::NaiveDate, f64)],
) -> String {
    let link = |e: &Event| format!("nights/{}", night_chart_file(e, sites, targets));
    let grid = season_svg_linked(plan, sites, targets, moon_illum, Some(&link));
    let mut html = String::from(
        "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\"><head><meta charset=\"utf-8\"/><title>dipwatch season</title><style>body{font-family:sans-serif;color:#1d2433;margin:1.5em}li{margin:0.15em 0}</style></head><body>\n<h1>Transits by night</h1>\n<p>Click a glyph, or an entry below, for the night chart.</p>\n",
    );
    html.push_str(&grid);
    for sp in &plan.sites {
        let site = &sites[sp.site_index];
        let _ = write!(html, "<h2>{}</h2>\n<ul>\n", esc(&site.name));
        for e in &sp.events {
            let _ = writeln!(
                html,
                r##"<li><a href="{}">{} {}, {} ({})</a></li>"##,
                esc(&link(e)),
                e.night_of,
                esc(&targets[e.target_index].name),
                e.verdict.label(),
                crate::outputs::percent_floor(e.coverage)
            );
        }
        html.push_str("</ul>\n");
    }
    html.push_str("</body></html>\n");
    html
}

/// The O-C chart of a refinement: observed minus computed (minutes) against epoch with 1-sigma error bars;
/// points beyond 3 sigma drawn as open diamonds.
pub fn oc_chart_svg(name: &str, rows: &[crate::engine::refine::OcRow]) -> String {
    let (w, h) = (760.0, 420.0);
    let (x0, x1, y0, y1) = (80.0, 730.0, 60.0, 350.0);
    let e_min = rows.iter().map(|r| r.epoch).min().unwrap_or(0) as f64;
    let e_max = rows.iter().map(|r| r.epoch).max().unwrap_or(1) as f64;
    let span = (e_max - e_min).max(1.0);
    let (ea, eb) = (e_min - 0.05 * span, e_max + 0.05 * span);
    let lim = rows
        .iter()
        .map(|r| r.o_minus_c_min.abs() + r.sigma_min)
        .fold(1.0_f64, f64::max)
        * 1.15;
    let xs = |e: f64| x0 + (e - ea) / (eb - ea) * (x1 - x0);
    let ys = |m: f64| y0 + (lim - m) / (2.0 * lim) * (y1 - y0);
    let title = format!("{name}: observed minus computed mid-transit times");
    let mut svg = Svg::new(w, h, &title);
    svg.text(
        x0,
        30.0,
        &title,
        &format!(r##"font-size="16" font-weight="bold" fill="{INK}""##),
    );
    svg.rect(
        x0,
        y0,
        x1 - x0,
        y1 - y0,
        &format!(r##"fill="none" stroke="{INK}""##),
        "frame",
    );
    svg.line(
        x0,
        ys(0.0),
        x1,
        ys(0.0),
        &format!(r##"stroke="{SLATE}" stroke-dasharray="6,4""##),
        "zero",
    );
    for r in rows {
        let (x, y) = (xs(r.epoch as f64), ys(r.o_minus_c_min));
        svg.line(
            x,
            ys(r.o_minus_c_min - r.sigma_min),
            x,
            ys(r.o_minus_c_min + r.sigma_min),
            &format!(r##"stroke="{INK}""##),
            "errorbar",
        );
        if r.outlier {
            svg.raw(&format!(r##"<path class="point outlier" d="M {x:.1} {:.1} l 6 6 l -6 6 l -6 -6 z" fill="white" stroke="{OCHRE}" stroke-width="2"/>"##, y - 6.0));
        } else {
            svg.raw(&format!(
                r##"<circle class="point" cx="{x:.1}" cy="{y:.1}" r="4.5" fill="{TEAL}"/>"##
            ));
        }
    }
    for k in 0..=4 {
        let m = -lim + 2.0 * lim * k as f64 / 4.0;
        svg.text(
            x0 - 8.0,
            ys(m) + 4.0,
            &format!("{m:+.1}"),
            &format!(r##"text-anchor="end" fill="{INK}""##),
        );
    }
    for k in 0..=4 {
        let e = ea + (eb - ea) * k as f64 / 4.0;
        svg.text(
            xs(e),
            y1 + 18.0,
            &format!("{e:.0}"),
            &format!(r##"text-anchor="middle" fill="{INK}""##),
        );
    }
    svg.text(
        0.5 * (x0 + x1),
        y1 + 40.0,
        "epoch (transits since the catalogue T0)",
        &format!(r##"text-anchor="middle" fill="{INK}""##),
    );
    svg.raw(&format!(r##"<text transform="translate(26 {:.1}) rotate(-90)" text-anchor="middle" fill="{INK}">O-C (minutes)</text>"##, 0.5 * (y0 + y1)));
    svg.text(
        x0,
        y1 + 62.0,
        "filled circles: points within 3 sigma; open diamonds: beyond 3 sigma; bars: 1 sigma",
        &format!(r##"fill="{SLATE}" font-size="11""##),
    );
    svg.finish()
}
