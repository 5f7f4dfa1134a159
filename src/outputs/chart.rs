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
use crate::astro::civil::{datetime_from_jd, local_hhmm, zone_abbreviation};
use crate::engine::almanac::NightAlmanac;
use crate::engine::plan::{Event, Plan, Verdict};
use crate::engine::track::{night_track, NightTrack, SkyBand, TrackSample};
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

/// The plotting area of a night chart and its scales.
struct NightCanvas {
    svg: Svg,
    x0: f64,
    x1: f64,
    y0: f64,
    y1: f64,
    start: f64,
    end: f64,
}

impl NightCanvas {
    /// x of a UTC JD.
    fn xs(&self, t: f64) -> f64 {
        self.x0 + (t - self.start) / (self.end - self.start) * (self.x1 - self.x0)
    }

    /// y of an altitude, deg (0-90 shown).
    fn ys(&self, alt: f64) -> f64 {
        self.y1 - alt.clamp(0.0, 90.0) / 90.0 * (self.y1 - self.y0)
    }

    /// A full-height band from `a` to `b` (UTC JD), clipped to the axis.
    fn band(&mut self, a: f64, b: f64, style: &str, class: &str) {
        let (xa, xb) = (self.xs(a.max(self.start)), self.xs(b.min(self.end)));
        let (y0, h) = (self.y0, self.y1 - self.y0);
        self.svg.rect(xa, y0, xb - xa, h, style, class);
    }

    /// A horizontal dashed line at altitude `alt` across the plot.
    fn level(&mut self, alt: f64, style: &str, class: &str) {
        let y = self.ys(alt);
        let (x0, x1) = (self.x0, self.x1);
        self.svg.line(x0, y, x1, y, style, class);
    }
}

/// Fill of each sky band, lightest by day.
fn band_fill(b: SkyBand) -> &'static str {
    match b {
        SkyBand::Day => "#ffffff",
        SkyBand::Civil => "#f4f6fa",
        SkyBand::Nautical => "#e6ebf3",
        SkyBand::Astronomical => "#d7dfec",
        SkyBand::Night => "#c8d1e3",
    }
}

/// The night chart of `target` at `site`: altitude (left) and airmass (right) against local time, twilight
/// shading at the almanac's crossing times, the site's limits and horizon along the track, the Moon, each
/// observing block with ingress/egress, their +-sigma bands and the baselines, and the meridian crossing. The
/// curves, bands and crossing come from [`crate::engine::track::night_track`]; this only draws them.
pub fn night_chart_svg(
    site: &Site,
    target: &Target,
    almanac: &NightAlmanac,
    events: &[Event],
    sigma_k: f64,
) -> String {
    let track = night_track(site, target, almanac, events);
    let title = format!(
        "{} from {}, night of {}",
        target.label(),
        site.name,
        almanac.night_of
    );
    let mut c = NightCanvas {
        svg: Svg::new(940.0, 560.0, &title),
        x0: 70.0,
        x1: 860.0,
        y0: 64.0,
        y1: 420.0,
        start: track.start_utc,
        end: track.end_utc,
    };
    draw_heading(&mut c, &title, events, target.kind.noun());
    for span in &track.twilight {
        let class = format!("twilight {}", span.band.name());
        let style = format!(r##"fill="{}""##, band_fill(span.band));
        c.band(span.start_utc, span.end_utc, &style, &class);
    }
    for e in events {
        draw_event(&mut c, e, site, sigma_k);
    }
    draw_limits(&mut c, site, &track);
    draw_curves(&mut c, &track);
    draw_meridian(&mut c, site, &track);
    draw_axes(&mut c, site);
    draw_legend(&mut c, site);
    c.svg.finish()
}

/// Title and the verdict line under it.
fn draw_heading(c: &mut NightCanvas, title: &str, events: &[Event], noun: &str) {
    let x0 = c.x0;
    c.svg.text(
        x0,
        28.0,
        title,
        &format!(r##"font-size="17" font-weight="bold" fill="{INK}""##),
    );
    let sub = match events.iter().find(|e| e.observable) {
        Some(e) => format!(
            "{}: {} of the {noun} usable; epoch {}, timing 1-sigma {:.1} min{}",
            e.verdict.label(),
            crate::outputs::percent_floor(e.coverage),
            e.epoch,
            e.sigma_min,
            e.noise
                .and_then(|n| n.snr)
                .map(|x| format!("; expected SNR {:.1}", crate::outputs::floor_to(x, 1)))
                .unwrap_or_default()
        ),
        None if events.is_empty() => format!("no {noun} this night"),
        None => format!("{noun} not observable this night"),
    };
    c.svg.text(x0, 48.0, &sub, &format!(r##"fill="{SLATE}""##));
}

/// One event: the planned block dashed where a limit clips it, the block as it can be observed dotted, the
/// in-transit window with its K-sigma margins hatched, a +-1 sigma band and a line at each contact, and mid.
fn draw_event(c: &mut NightCanvas, e: &Event, site: &Site, sigma_k: f64) {
    if e.start_clipped() || e.end_clipped() {
        c.band(
            e.full_block_start_utc,
            e.full_block_end_utc,
            r##"fill="none" stroke="#b9771e" stroke-width="1" stroke-dasharray="4 3""##,
            "planned block (clipped by a limit)",
        );
    }
    c.band(
        e.block_start_utc,
        e.block_end_utc,
        r##"fill="url(#dots)" stroke="#b9771e" stroke-width="1""##,
        "block",
    );
    let margin = sigma_k * e.sigma_min / 1440.0;
    c.band(
        e.ingress_utc - margin,
        e.egress_utc + margin,
        r##"fill="url(#hatch)""##,
        "transit",
    );
    let s = e.sigma_min / 1440.0;
    // Contact labels are about 7 px per character; on a short transit the egress label goes one line lower so
    // that the two never overlap.
    let ingress_label_end = c.xs(e.ingress_utc) + 3.0 + 7.0 * 14.0;
    for (t, label) in [(e.ingress_utc, "ingress"), (e.egress_utc, "egress")] {
        if t < c.start || t > c.end {
            continue;
        }
        let label_y = if label == "egress" && c.xs(t) < ingress_label_end {
            c.y0 + 28.0
        } else {
            c.y0 + 14.0
        };
        c.band(
            t - s,
            t + s,
            r##"fill="#6e4a8e" fill-opacity="0.22""##,
            "sigma",
        );
        let (x, y0, y1) = (c.xs(t), c.y0, c.y1);
        let stroke = format!(r##"stroke="{PLUM}" stroke-width="2""##);
        c.svg.line(x, y0, x, y1, &stroke, "contact");
        c.svg.text(
            x + 3.0,
            label_y,
            &format!("{label} {}", local_hhmm(t, site.tz)),
            &format!(r##"fill="{PLUM}" font-size="11""##),
        );
    }
    if e.mid_utc >= c.start && e.mid_utc <= c.end {
        let (x, y0, y1) = (c.xs(e.mid_utc), c.y0, c.y1);
        let stroke = format!(r##"stroke="{PLUM}" stroke-width="1" stroke-dasharray="2,3""##);
        c.svg.line(x, y0, x, y1, &stroke, "mid");
    }
}

/// The site's altitude limit, its highest trackable altitude, and its horizon profile along the track.
fn draw_limits(c: &mut NightCanvas, site: &Site, track: &NightTrack) {
    c.level(
        site.min_alt_deg,
        &format!(r##"stroke="{INK}" stroke-width="1.2" stroke-dasharray="8,4""##),
        "limit",
    );
    if let Some(max_alt) = site.max_alt_deg {
        c.level(
            max_alt,
            &format!(r##"stroke="{INK}" stroke-width="1.2" stroke-dasharray="2,4""##),
            "zenith-limit",
        );
    }
    if !site.horizon.is_empty() {
        let pts: Vec<(f64, f64)> = track
            .samples
            .iter()
            .map(|p| (c.xs(p.utc), c.ys(site.horizon.min_alt_deg(p.target_az_deg))))
            .collect();
        c.svg.polyline(
            &pts,
            &format!(r##"stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="1,3""##),
            "horizon",
        );
    }
}

/// The Moon's and the target's altitude, drawn where above the horizon.
fn draw_curves(c: &mut NightCanvas, track: &NightTrack) {
    for (alt, style, class) in [
        (
            (|p: &TrackSample| p.moon_alt_deg) as fn(&TrackSample) -> f64,
            format!(r##"stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="6,3""##),
            "moon-alt",
        ),
        (
            |p: &TrackSample| p.target_alt_deg,
            format!(r##"stroke="{TEAL}" stroke-width="3""##),
            "target-alt",
        ),
    ] {
        let pts: Vec<(f64, f64)> = track
            .samples
            .iter()
            .map(|p| (c.xs(p.utc), c.ys(alt(p))))
            .collect();
        let up: Vec<bool> = track.samples.iter().map(|p| alt(p) >= 0.0).collect();
        c.svg.polyline_where(&pts, &up, &style, class);
    }
}

/// A marker and the local time at the upper meridian crossing.
fn draw_meridian(c: &mut NightCanvas, site: &Site, track: &NightTrack) {
    let Some((tm, alt)) = track.meridian else {
        return;
    };
    let (x, y) = (c.xs(tm), c.ys(alt));
    c.svg.raw(&format!(
        r##"<path class="meridian" d="M {:.1} {:.1} l -6 -11 l 12 0 z" fill="{INK}"/>"##,
        x,
        y - 4.0
    ));
    c.svg.text(
        x + 8.0,
        y - 8.0,
        &format!("meridian {}", local_hhmm(tm, site.tz)),
        &format!(r##"fill="{INK}" font-size="11""##),
    );
}

/// Frame, altitude axis (left), Kasten-Young airmass axis (right), local-time axis (bottom).
fn draw_axes(c: &mut NightCanvas, site: &Site) {
    let (x0, x1, y0, y1) = (c.x0, c.x1, c.y0, c.y1);
    let ink = format!(r##"stroke="{INK}""##);
    c.svg.rect(
        x0,
        y0,
        x1 - x0,
        y1 - y0,
        &format!(r##"fill="none" stroke="{INK}" stroke-width="1""##),
        "frame",
    );
    for a in (0..=90).step_by(15) {
        let y = c.ys(a as f64);
        c.svg.line(x0 - 5.0, y, x0, y, &ink, "tick");
        let style = format!(r##"text-anchor="end" fill="{INK}""##);
        c.svg.text(x0 - 8.0, y + 4.0, &format!("{a}"), &style);
    }
    c.svg.raw(&format!(
        r##"<text transform="translate(24 {:.1}) rotate(-90)" text-anchor="middle" fill="{INK}">altitude (deg)</text>"##,
        0.5 * (y0 + y1)
    ));
    for x in [1.0, 1.1, 1.2, 1.5, 2.0, 3.0, 5.0] {
        let y = c.ys(alt_deg_for_airmass(x));
        c.svg.line(x1, y, x1 + 5.0, y, &ink, "tick");
        c.svg.text(
            x1 + 8.0,
            y + 4.0,
            &format!("{x:.1}"),
            &format!(r##"fill="{INK}""##),
        );
    }
    c.svg.raw(&format!(
        r##"<text transform="translate({:.1} {:.1}) rotate(90)" text-anchor="middle" fill="{INK}">airmass (Kasten-Young)</text>"##,
        x1 + 52.0,
        0.5 * (y0 + y1)
    ));
    let first_local = datetime_from_jd(c.start).with_timezone(&site.tz);
    let to_next_hour = 60 - i64::from(chrono::Timelike::minute(&first_local));
    let mut t = c.start + to_next_hour as f64 / 1440.0
        - f64::from(chrono::Timelike::second(&first_local)) / 86_400.0;
    let centred = format!(r##"text-anchor="middle" fill="{INK}""##);
    while t <= c.end {
        let x = c.xs(t);
        c.svg.line(x, y1, x, y1 + 5.0, &ink, "tick");
        c.svg.text(x, y1 + 19.0, &local_hhmm(t, site.tz), &centred);
        t += 1.0 / 24.0;
    }
    let label = format!(
        "local time ({}, {})",
        zone_abbreviation(c.start, site.tz),
        site.tz.name()
    );
    c.svg.text(0.5 * (x0 + x1), y1 + 38.0, &label, &centred);
}

/// The two legend rows: lines (curves and limits), then fills (block, transit, sigma, night, twilight).
fn draw_legend(c: &mut NightCanvas, site: &Site) {
    let ly = 490.0;
    let mut lx = c.x0;
    let mut lines: Vec<(String, &str)> = vec![
        (
            format!(r##"stroke="{TEAL}" stroke-width="3""##),
            "target altitude",
        ),
        (
            format!(r##"stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="6,3""##),
            "Moon",
        ),
        (
            format!(r##"stroke="{INK}" stroke-width="1.2" stroke-dasharray="8,4""##),
            "altitude limit",
        ),
    ];
    if site.max_alt_deg.is_some() {
        lines.push((
            format!(r##"stroke="{INK}" stroke-width="1.2" stroke-dasharray="2,4""##),
            "highest trackable",
        ));
    }
    if !site.horizon.is_empty() {
        lines.push((
            format!(r##"stroke="{SLATE}" stroke-width="1.5" stroke-dasharray="1,3""##),
            "horizon",
        ));
    }
    for (style, label) in lines {
        c.svg
            .raw(&format!(r##"<path d="M {lx:.1} {ly:.1} h 24" {style}/>"##));
        c.svg
            .text(lx + 30.0, ly + 4.0, label, &format!(r##"fill="{INK}""##));
        lx += 30.0 + 7.0 * label.len() as f64 + 18.0;
    }
    let ly2 = ly + 24.0;
    let mut lx2 = c.x0;
    for (style, label) in [
        (r##"fill="url(#dots)" stroke="#b9771e""##, "baseline"),
        (
            r##"fill="url(#hatch)" stroke="#1f6f78""##,
            "transit + k sigma",
        ),
        (
            r##"fill="#6e4a8e" fill-opacity="0.22""##,
            "+-1 sigma at each contact",
        ),
        (r##"fill="#c8d1e3""##, "night"),
        (r##"fill="#e6ebf3""##, "twilight"),
    ] {
        c.svg.raw(&format!(
            r##"<rect x="{lx2:.1}" y="{:.1}" width="24" height="12" {style}/>"##,
            ly2 - 8.0
        ));
        c.svg
            .text(lx2 + 30.0, ly2 + 3.0, label, &format!(r##"fill="{INK}""##));
        lx2 += 30.0 + 7.0 * label.len() as f64 + 18.0;
    }
}

/// One event of the season grid in an `s` x `s` cell at (x, y): the *shape* tells the verdict (a plain frame for
/// whole, a dashed frame for a short baseline, a heavy left edge for ingress only, a heavy right edge for egress
/// only, heavy top and bottom edges for middle only) and the fill, rising from the bottom, how much of the
/// transit is usable (`coverage`, rounded down to a tenth so it never looks fuller than it is). Colour only repeats
/// the verdict, so the grid reads in greyscale.
///
/// The outline tells the event's kind: a square for a transit, a circle for an occultation, a square with its
/// top-right corner cut by a heavy diagonal for a window (radial-velocity extreme or phase window).
fn glyph(
    svg: &mut Svg,
    (v, kind): (Verdict, crate::orbit::EventKind),
    coverage: f64,
    (x, y, s): (f64, f64, f64),
    title: &str,
) {
    let t = format!("<title>{}</title>", esc(title));
    let class = format!(
        "event verdict-{} kind-{}",
        v.label(),
        kind.label().replace([':', '.'], "-")
    );
    let colour = match v {
        Verdict::Whole | Verdict::WholeShortBaseline | Verdict::WholeWindow => TEAL,
        Verdict::IngressOnly => OCHRE,
        Verdict::EgressOnly => PLUM,
        Verdict::MiddleOnly | Verdict::PartWindow | Verdict::NotObservable => SLATE,
    };
    let rx = if kind == crate::orbit::EventKind::Occultation {
        s / 2.0
    } else {
        0.0
    };
    let h = s * crate::outputs::floor_to(coverage.clamp(0.0, 1.0), 1);
    let dash = if v == Verdict::WholeShortBaseline {
        r##" stroke-dasharray="2,1.5""##
    } else {
        ""
    };
    let mut body = format!(
        r##"<rect x="{x:.1}" y="{y:.1}" width="{s:.1}" height="{s:.1}" rx="{rx:.1}" fill="white" stroke="{colour}" stroke-width="1"{dash}/><rect class="fill" x="{x:.1}" y="{:.1}" width="{s:.1}" height="{h:.1}" rx="{:.1}" fill="{colour}" fill-opacity="0.8"/>"##,
        y + s - h,
        rx.min(h / 2.0)
    );
    let edge = |x1: f64, y1: f64, x2: f64, y2: f64| {
        format!(
            r##"<line x1="{x1:.1}" y1="{y1:.1}" x2="{x2:.1}" y2="{y2:.1}" stroke="{INK}" stroke-width="2.5"/>"##
        )
    };
    match v {
        Verdict::IngressOnly => body.push_str(&edge(x, y, x, y + s)),
        Verdict::EgressOnly => body.push_str(&edge(x + s, y, x + s, y + s)),
        Verdict::MiddleOnly | Verdict::PartWindow | Verdict::NotObservable => {
            body.push_str(&edge(x, y, x + s, y));
            body.push_str(&edge(x, y + s, x + s, y + s));
        }
        Verdict::Whole | Verdict::WholeShortBaseline | Verdict::WholeWindow => {}
    }
    if kind.is_window() {
        body.push_str(&edge(x + s * 0.55, y, x + s, y + s * 0.45));
    }
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
    let h = top + total_rows as f64 * cell + 70.0;
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
    draw_moon_strip(&mut svg, moon_illum, label_w, cell);
    let mut y = top;
    for (sp, rows) in plan.sites.iter().zip(&rows_per_site) {
        let site = &sites[sp.site_index];
        svg.text(
            12.0,
            y + 11.0,
            &site.station_label(sp.telescope_index),
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
                &targets[ti].label(),
                &format!(r##"fill="{INK}" font-size="11""##),
            );
            let row = GridRow {
                ti,
                y: ry,
                label_w,
                cell,
            };
            draw_grid_row(&mut svg, &row, sp, targets, &nights, link);
        }
        y += rows.len() as f64 * cell + cell;
    }
    draw_verdict_legend(&mut svg, y + 16.0);
    svg.finish()
}

/// The Moon strip above the grid: one bar per night, its height the illuminated fraction.
fn draw_moon_strip(
    svg: &mut Svg,
    moon_illum: &[(chrono::NaiveDate, f64)],
    label_w: f64,
    cell: f64,
) {
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
}

/// One row of the season grid: a target at a site, its place on the page.
struct GridRow {
    ti: usize,
    y: f64,
    label_w: f64,
    cell: f64,
}

/// The glyphs of one grid row, one per event (several events in a night share the cell), each linked to its
/// night chart when `link` is given.
fn draw_grid_row(
    svg: &mut Svg,
    row: &GridRow,
    sp: &crate::engine::plan::SitePlan,
    targets: &[Target],
    nights: &[chrono::NaiveDate],
    link: Option<&dyn Fn(&Event) -> String>,
) {
    for (ci, d) in nights.iter().enumerate() {
        let evs: Vec<&Event> = sp
            .events
            .iter()
            .filter(|e| e.target_index == row.ti && e.night_of == *d)
            .collect();
        let m = evs.len();
        for (j, e) in evs.iter().enumerate() {
            let s = (row.cell - 3.0) / m as f64;
            let x = row.label_w + ci as f64 * row.cell + 1.5 + j as f64 * s;
            let tip = format!(
                "{} epoch {} on {}: {} {}",
                targets[row.ti].label(),
                e.epoch,
                d,
                e.verdict.label(),
                crate::outputs::percent_floor(e.coverage)
            );
            if let Some(link) = link {
                svg.raw(&format!(r##"<a href="{}">"##, esc(&link(e))));
            }
            glyph(
                svg,
                (e.verdict, targets[row.ti].kind),
                e.coverage,
                (x, row.y + 1.5 + (row.cell - 3.0 - s) / 2.0, s),
                &tip,
            );
            if link.is_some() {
                svg.raw("</a>");
            }
        }
    }
}

/// The legend of the verdict glyphs, at height `ly`.
fn draw_verdict_legend(svg: &mut Svg, ly: f64) {
    let mut lx = 12.0;
    for v in [
        Verdict::Whole,
        Verdict::WholeShortBaseline,
        Verdict::IngressOnly,
        Verdict::EgressOnly,
        Verdict::MiddleOnly,
    ] {
        let mut g = Svg { buf: String::new() };
        glyph(
            &mut g,
            (v, crate::orbit::EventKind::Transit),
            1.0,
            (lx, ly - 10.0, 11.0),
            v.label(),
        );
        svg.raw(&g.buf.replace("class=\"event ", "class=\"legend "));
        svg.text(
            lx + 16.0,
            ly,
            v.label(),
            &format!(r##"fill="{INK}" font-size="11""##),
        );
        lx += 16.0 + 7.0 * v.label().len() as f64 + 16.0;
    }
    // The fill: how much of the transit is usable.
    for (k, cov) in [0.25, 0.5, 1.0].into_iter().enumerate() {
        let mut g = Svg { buf: String::new() };
        glyph(
            &mut g,
            (Verdict::Whole, crate::orbit::EventKind::Transit),
            cov,
            (lx + 14.0 * k as f64, ly - 10.0, 11.0),
            "coverage",
        );
        svg.raw(&g.buf.replace("class=\"event ", "class=\"legend "));
    }
    svg.text(
        lx + 46.0,
        ly,
        "fill = usable part of the transit",
        &format!(r##"fill="{INK}" font-size="11""##),
    );
    // The outline: the kind of event.
    let mut lx = 12.0;
    let ly = ly + 18.0;
    for (kind, label) in [
        (crate::orbit::EventKind::Transit, "transit"),
        (crate::orbit::EventKind::Occultation, "occultation"),
        (crate::orbit::EventKind::RvMax, "RV extreme or phase window"),
    ] {
        let mut g = Svg { buf: String::new() };
        glyph(
            &mut g,
            (Verdict::Whole, kind),
            0.0,
            (lx, ly - 10.0, 11.0),
            label,
        );
        svg.raw(&g.buf.replace("class=\"event ", "class=\"legend "));
        svg.text(
            lx + 16.0,
            ly,
            label,
            &format!(r##"fill="{INK}" font-size="11""##),
        );
        lx += 16.0 + 7.0 * label.len() as f64 + 16.0;
    }
}

/// File name of an event's night chart inside the HTML bundle: `<site>-<target>-<night>.svg`, slugged.
pub fn night_chart_file(e: &Event, sites: &[Site], targets: &[Target]) -> String {
    let slug = crate::outputs::names::slug;
    format!(
        "{}-{}-{}.svg",
        slug(&sites[e.site_index].station_label(e.telescope_index)),
        slug(&targets[e.target_index].label()),
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
        let _ = write!(
            html,
            "<h2>{}</h2>\n<ul>\n",
            esc(&site.station_label(sp.telescope_index))
        );
        for e in &sp.events {
            let _ = writeln!(
                html,
                r##"<li><a href="{}">{} {}, {} ({})</a></li>"##,
                esc(&link(e)),
                e.night_of,
                esc(&targets[e.target_index].label()),
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
