//! Sites file (TOML): one `[[site]]` table per site. Keys are documented in the README.

use super::{InputError, Problems};
use crate::astro::atmosphere::{alt_deg_for_airmass, HorizonProfile};
use crate::astro::frames::Observer;
use crate::constants::{
    ASTRONOMICAL_TWILIGHT_ALT_DEG, CIVIL_TWILIGHT_ALT_DEG, NAUTICAL_TWILIGHT_ALT_DEG,
};
use serde::Deserialize;
use toml::Spanned;

/// A resolved observing site.
#[derive(Debug, Clone)]
pub struct Site {
    /// Display name, unique within the file.
    pub name: String,
    /// Geodetic position.
    pub observer: Observer,
    /// Latitude, deg north +.
    pub lat_deg: f64,
    /// Longitude, deg east + (-180..180).
    pub lon_deg: f64,
    /// Elevation above the WGS84 ellipsoid (or sea level; the difference is immaterial here), m.
    pub elevation_m: f64,
    /// IANA time zone.
    pub tz: chrono_tz::Tz,
    /// Lowest usable (true) altitude of the target, deg; from `min_alt_deg` or `max_airmass`, whichever is
    /// higher when both are given.
    pub min_alt_deg: f64,
    /// Highest altitude the mount can track through (alt-azimuth mounts near the zenith), deg, if limited.
    pub max_alt_deg: Option<f64>,
    /// Sun altitude below which the sky counts as dark, deg.
    pub darkness_alt_deg: f64,
    /// The darkness level as written (`civil`, `nautical`, `astronomical`, or a number).
    pub darkness_label: String,
    /// Horizon profile (empty: flat).
    pub horizon: HorizonProfile,
    /// Allowed hour-angle range, hours (east -, west +), if limited.
    pub hour_angle_limits_h: Option<(f64, f64)>,
    /// Minimum separation from the Moon's centre, deg, if set.
    pub min_moon_sep_deg: Option<f64>,
    /// Telescopes at the site (at least one).
    pub telescopes: Vec<Telescope>,
    /// The site's photometric set-up (telescope, camera, sky), when `aperture_m` is given: what the expected
    /// noise and SNR of each event are computed from.
    pub photometry: Option<Photometry>,
}

/// A site's telescope, camera and sky, for the noise model ([`crate::engine::noise`]).
#[derive(Debug, Clone, PartialEq)]
pub struct Photometry {
    /// Primary diameter, m.
    pub aperture_m: f64,
    /// Secondary over primary diameter (default 0.3).
    pub obstruction: f64,
    /// Whole-system throughput incl. detector QE (default 0.5).
    pub throughput: f64,
    /// Band name (default `V`); target magnitudes are taken in this band.
    pub band: String,
    /// Read noise, e rms (default 8).
    pub read_noise_e: f64,
    /// Dark current, e/s/pixel (default 0.02).
    pub dark_e_per_s: f64,
    /// Full well, e (default 100000).
    pub full_well_e: f64,
    /// Gain, e/ADU (optional): a 16-bit converter then saturates at 65535 ADU x gain, if below the full well.
    pub gain_e_per_adu: Option<f64>,
    /// Pixel scale, arcsec/pixel (default 0.6).
    pub pixel_scale_arcsec: f64,
    /// Fixed exposure, s (default: suggested per event).
    pub exposure_s: Option<f64>,
    /// Overhead per exposure, s (default 5).
    pub overhead_s: f64,
    /// Photometric aperture radius, arcsec (default 1.5 x seeing).
    pub aperture_radius_arcsec: Option<f64>,
    /// Seeing FWHM, arcsec (default 2).
    pub seeing_arcsec: f64,
    /// Scintillation coefficient C_Y (default 1.5).
    pub scintillation_cy: f64,
    /// Dark-sky brightness, mag/arcsec^2 (default per band).
    pub sky_mag: Option<f64>,
    /// Extinction, mag/airmass (default per band).
    pub extinction: Option<f64>,
    /// Red-noise factor beta (default 1).
    pub red_noise_beta: f64,
    /// Systematic floor, ppt per 10 min (default 0).
    pub noise_floor_ppt: f64,
}

/// One telescope at a site.
#[derive(Debug, Clone, PartialEq)]
pub struct Telescope {
    /// Name, unique within the site.
    pub name: String,
    /// Its own lowest usable altitude, deg, if it differs from the site's.
    pub min_alt_deg: Option<f64>,
    /// Its own highest trackable altitude, deg, if it differs from the site's.
    pub max_alt_deg: Option<f64>,
    /// Its photometric set-up: the site's keys as defaults, overridden by the telescope's own (None without an
    /// aperture in either; a hand-built site's `photometry` then applies).
    pub photometry: Option<Photometry>,
}

/// The photometric keys a telescope item may set for itself (the rest describe the site's sky).
pub const TELESCOPE_PHOTOMETRY_KEYS: [&str; 12] = [
    "aperture_m",
    "obstruction",
    "throughput",
    "band",
    "read_noise_e",
    "dark_e_per_s",
    "gain_e_per_adu",
    "full_well_e",
    "pixel_scale_arcsec",
    "exposure_s",
    "overhead_s",
    "aperture_radius_arcsec",
];

/// A telescope item's own photometric keys, before the site's defaults are merged in.
#[derive(Debug, Clone, Default)]
struct TelescopeOverrides {
    numbers: Vec<(String, f64)>,
    band: Option<String>,
}

impl Site {
    /// The site as seen by one of its telescopes: the same site with that telescope's altitude limits and
    /// photometric set-up, and that telescope as its only one.
    pub fn for_telescope(&self, t: &Telescope) -> Site {
        let mut s = self.clone();
        s.telescopes = vec![t.clone()];
        if let Some(a) = t.min_alt_deg {
            s.min_alt_deg = a;
        }
        if t.max_alt_deg.is_some() {
            s.max_alt_deg = t.max_alt_deg;
        }
        if t.photometry.is_some() {
            s.photometry = t.photometry.clone();
        }
        s
    }

    /// How a telescope of this site is named in screens and calendars: the site's name alone when it has one
    /// telescope, `Site / telescope` otherwise.
    pub fn station_label(&self, telescope_index: usize) -> String {
        match (self.telescopes.len(), self.telescopes.get(telescope_index)) {
            (2.., Some(t)) => format!("{} / {}", self.name, t.name),
            _ => self.name.clone(),
        }
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    site: Option<Vec<Spanned<RawSite>>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSite {
    name: Option<Spanned<String>>,
    latitude_deg: Option<Spanned<f64>>,
    longitude_deg: Option<Spanned<f64>>,
    elevation_m: Option<Spanned<f64>>,
    timezone: Option<Spanned<String>>,
    min_alt_deg: Option<Spanned<f64>>,
    max_alt_deg: Option<Spanned<f64>>,
    max_airmass: Option<Spanned<f64>>,
    darkness: Option<Spanned<toml::Value>>,
    min_moon_sep_deg: Option<Spanned<f64>>,
    hour_angle_limits_h: Option<Spanned<Vec<f64>>>,
    horizon: Option<Spanned<Vec<Spanned<Vec<f64>>>>>,
    telescopes: Option<Spanned<toml::Value>>,
    allow_far_zone: Option<Spanned<bool>>,
    aperture_m: Option<Spanned<f64>>,
    obstruction: Option<Spanned<f64>>,
    throughput: Option<Spanned<f64>>,
    band: Option<Spanned<String>>,
    read_noise_e: Option<Spanned<f64>>,
    dark_e_per_s: Option<Spanned<f64>>,
    full_well_e: Option<Spanned<f64>>,
    gain_e_per_adu: Option<Spanned<f64>>,
    pixel_scale_arcsec: Option<Spanned<f64>>,
    exposure_s: Option<Spanned<f64>>,
    overhead_s: Option<Spanned<f64>>,
    aperture_radius_arcsec: Option<Spanned<f64>>,
    seeing_arcsec: Option<Spanned<f64>>,
    scintillation_cy: Option<Spanned<f64>>,
    sky_mag: Option<Spanned<f64>>,
    extinction: Option<Spanned<f64>>,
    red_noise_beta: Option<Spanned<f64>>,
    noise_floor_ppt: Option<Spanned<f64>>,
}

/// Largest accepted gap between a site's mean solar time and its zone's standard time without
/// `allow_far_zone`, hours. Real stations reach about 2.5 h (western China on UTC+8, Galicia on CET).
pub const FAR_ZONE_HOURS: f64 = 3.0;

/// The date whose standard offset is compared with the longitude (zones rarely change their standard time).
fn zone_check_date() -> chrono::NaiveDate {
    chrono::NaiveDate::from_ymd_opt(2027, 1, 1).expect("valid date")
}

/// `+4:42` style text for hours east of UTC.
fn utc_offset_text(hours: f64) -> String {
    let minutes = (hours * 60.0).round() as i64;
    let sign = if minutes < 0 { '-' } else { '+' };
    format!("UTC{sign}{}:{:02}", minutes.abs() / 60, minutes.abs() % 60)
}

/// The problem with a longitude whose mean solar time is far from the zone's standard time, if any.
fn far_zone_problem(lon_deg: f64, tz: chrono_tz::Tz) -> Option<String> {
    let date = zone_check_date();
    let gap_h = crate::astro::civil::solar_minus_zone_hours(lon_deg, date, tz);
    if gap_h.abs() <= FAR_ZONE_HOURS {
        return None;
    }
    let std_h = crate::astro::civil::standard_offset_hours(date, tz);
    let side = if lon_deg >= 0.0 { "E" } else { "W" };
    let flipped = crate::astro::civil::solar_minus_zone_hours(-lon_deg, date, tz);
    let hint = if flipped.abs() <= FAR_ZONE_HOURS {
        format!(
            "likely cause: the longitude's sign (east is positive; {:.3} puts the site {:.1} h from its zone)",
            -lon_deg,
            flipped.abs()
        )
    } else {
        "likely cause: a wrong longitude or time zone (east is positive)".to_string()
    };
    Some(format!(
        "found {lon_deg} ({:.3} {side}, mean solar time {}), but timezone {} keeps standard time {}, {:.1} h apart; \
         expected within {FAR_ZONE_HOURS} h; {hint}; if the site really keeps this zone, add allow_far_zone = true",
        lon_deg.abs(),
        utc_offset_text(lon_deg / 15.0),
        tz.name(),
        utc_offset_text(std_h),
        gap_h.abs()
    ))
}

fn line_of(text: &str, offset: usize) -> usize {
    text[..offset.min(text.len())]
        .bytes()
        .filter(|&b| b == b'\n')
        .count()
        + 1
}

/// Parse and validate a sites file.
///
/// Given: `file` label for messages, `text` the file's content. Returns the sites in file order, or every
/// problem found.
pub fn parse_sites(file: &str, text: &str) -> Result<Vec<Site>, InputError> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    if text.trim().is_empty() {
        return Err(InputError::single(
            file,
            None,
            None,
            "the file is empty; expected one or more [[site]] tables (see sites.example.toml)"
                .into(),
        ));
    }
    let raw: RawFile = toml::from_str(text).map_err(|e| {
        let line = e.span().map(|s| line_of(text, s.start));
        InputError::single(
            file,
            line,
            None,
            format!("not valid sites TOML: {}", e.message()),
        )
    })?;
    let Some(raw_sites) = raw.site.filter(|s| !s.is_empty()) else {
        return Err(InputError::single(
            file,
            None,
            None,
            "found no [[site]] tables; expected one or more (see sites.example.toml)".into(),
        ));
    };
    let mut problems = Problems::default();
    let mut sites = Vec::new();
    let mut seen = std::collections::HashMap::new();
    for spanned in &raw_sites {
        let ctx = SiteCtx {
            text,
            site_line: line_of(text, spanned.span().start),
        };
        if let Some(site) = parse_site(&ctx, spanned.get_ref(), &mut seen, &mut problems) {
            sites.push(site);
        }
    }
    problems.into_result(file, sites)
}

/// Where a site table sits in its file, to name lines in messages.
struct SiteCtx<'t> {
    text: &'t str,
    site_line: usize,
}

impl SiteCtx<'_> {
    /// The line of a span.
    fn at(&self, s: &std::ops::Range<usize>) -> Option<usize> {
        Some(line_of(self.text, s.start))
    }
}

/// The numeric keys of a site with their accepted ranges: validation is driven by this table.
const SITE_NUMBERS: [(&str, f64, f64, &str); 24] = [
    ("latitude_deg", -90.0, 90.0, "a latitude within -90..90 deg"),
    (
        "longitude_deg",
        -180.0,
        360.0,
        "a longitude within -180..180 deg (or 0..360 east)",
    ),
    (
        "elevation_m",
        -500.0,
        9000.0,
        "an elevation within -500..9000 m",
    ),
    (
        "min_alt_deg",
        -5.0,
        89.0,
        "a lowest altitude within -5..89 deg",
    ),
    (
        "max_alt_deg",
        30.0,
        90.0,
        "a highest trackable altitude within 30..90 deg",
    ),
    ("max_airmass", 1.0, 38.0, "a highest airmass within 1..38"),
    (
        "min_moon_sep_deg",
        0.0,
        180.0,
        "a separation within 0..180 deg",
    ),
    ("aperture_m", 0.01, 50.0, "an aperture within 0.01..50 m"),
    (
        "obstruction",
        0.0,
        0.95,
        "a secondary/primary diameter ratio within 0..0.95",
    ),
    ("throughput", 0.001, 1.0, "a throughput within 0.001..1"),
    ("read_noise_e", 0.0, 1000.0, "a read noise within 0..1000 e"),
    (
        "dark_e_per_s",
        0.0,
        1e4,
        "a dark current within 0..10000 e/s/pixel",
    ),
    ("full_well_e", 100.0, 1e8, "a full well within 100..1e8 e"),
    (
        "gain_e_per_adu",
        0.01,
        1000.0,
        "a gain within 0.01..1000 e/ADU",
    ),
    (
        "pixel_scale_arcsec",
        0.01,
        20.0,
        "a pixel scale within 0.01..20 arcsec",
    ),
    (
        "exposure_s",
        0.001,
        3600.0,
        "an exposure within 0.001..3600 s",
    ),
    ("overhead_s", 0.0, 600.0, "an overhead within 0..600 s"),
    (
        "aperture_radius_arcsec",
        0.1,
        100.0,
        "an aperture radius within 0.1..100 arcsec",
    ),
    (
        "seeing_arcsec",
        0.1,
        20.0,
        "a seeing FWHM within 0.1..20 arcsec",
    ),
    (
        "scintillation_cy",
        0.0,
        10.0,
        "a scintillation coefficient within 0..10",
    ),
    (
        "sky_mag",
        10.0,
        25.0,
        "a sky brightness within 10..25 mag/arcsec^2",
    ),
    (
        "extinction",
        0.0,
        3.0,
        "an extinction within 0..3 mag/airmass",
    ),
    (
        "red_noise_beta",
        1.0,
        10.0,
        "a red-noise factor within 1..10",
    ),
    (
        "noise_floor_ppt",
        0.0,
        100.0,
        "a noise floor within 0..100 ppt",
    ),
];

impl RawSite {
    /// The numeric key `name` of [`SITE_NUMBERS`], if given.
    fn number(&self, name: &str) -> Option<&Spanned<f64>> {
        match name {
            "latitude_deg" => self.latitude_deg.as_ref(),
            "longitude_deg" => self.longitude_deg.as_ref(),
            "elevation_m" => self.elevation_m.as_ref(),
            "min_alt_deg" => self.min_alt_deg.as_ref(),
            "max_alt_deg" => self.max_alt_deg.as_ref(),
            "max_airmass" => self.max_airmass.as_ref(),
            "min_moon_sep_deg" => self.min_moon_sep_deg.as_ref(),
            "aperture_m" => self.aperture_m.as_ref(),
            "obstruction" => self.obstruction.as_ref(),
            "throughput" => self.throughput.as_ref(),
            "read_noise_e" => self.read_noise_e.as_ref(),
            "dark_e_per_s" => self.dark_e_per_s.as_ref(),
            "full_well_e" => self.full_well_e.as_ref(),
            "gain_e_per_adu" => self.gain_e_per_adu.as_ref(),
            "pixel_scale_arcsec" => self.pixel_scale_arcsec.as_ref(),
            "exposure_s" => self.exposure_s.as_ref(),
            "overhead_s" => self.overhead_s.as_ref(),
            "aperture_radius_arcsec" => self.aperture_radius_arcsec.as_ref(),
            "seeing_arcsec" => self.seeing_arcsec.as_ref(),
            "scintillation_cy" => self.scintillation_cy.as_ref(),
            "sky_mag" => self.sky_mag.as_ref(),
            "extinction" => self.extinction.as_ref(),
            "red_noise_beta" => self.red_noise_beta.as_ref(),
            "noise_floor_ppt" => self.noise_floor_ppt.as_ref(),
            _ => None,
        }
    }
}

/// Report every missing required key and out-of-range number; true when all are fine.
fn check_keys(ctx: &SiteCtx<'_>, r: &RawSite, problems: &mut Problems) -> bool {
    let mut ok = true;
    for (present, field, what) in [
        (r.name.is_some(), "name", "the site's name"),
        (
            r.latitude_deg.is_some(),
            "latitude_deg",
            "latitude in degrees, north +, -90..90",
        ),
        (
            r.longitude_deg.is_some(),
            "longitude_deg",
            "longitude in degrees, east +, -180..180 (or 0..360 east)",
        ),
        (
            r.timezone.is_some(),
            "timezone",
            "an IANA time zone name such as \"Europe/Madrid\"",
        ),
    ] {
        if !present {
            problems.push(
                Some(ctx.site_line),
                field,
                format!("missing; expected {what}"),
            );
            ok = false;
        }
    }
    for (field, lo, hi, what) in SITE_NUMBERS {
        if let Some(v) = r.number(field) {
            let x = *v.get_ref();
            if !x.is_finite() || x < lo || x > hi {
                problems.push(
                    ctx.at(&v.span()),
                    field,
                    format!("found {x}, expected {what}"),
                );
                ok = false;
            }
        }
    }
    ok
}

/// The site's name, unique in the file (case-insensitive).
fn check_name(
    ctx: &SiteCtx<'_>,
    n: &Spanned<String>,
    seen: &mut std::collections::HashMap<String, usize>,
    problems: &mut Problems,
) -> Option<String> {
    let trimmed = n.get_ref().trim().to_string();
    if trimmed.is_empty() {
        problems.push(
            ctx.at(&n.span()),
            "name",
            "found an empty name; expected text".into(),
        );
        return None;
    }
    if let Some(prev) = seen.insert(trimmed.to_lowercase(), ctx.site_line) {
        problems.push(
            ctx.at(&n.span()),
            "name",
            format!("found {trimmed:?} again (first at line {prev}); expected unique site names"),
        );
        return None;
    }
    Some(trimmed)
}

/// The IANA zone, or a problem with the nearest names (or the Etc name of a UTC offset).
fn parse_zone(
    ctx: &SiteCtx<'_>,
    t: &Spanned<String>,
    problems: &mut Problems,
) -> Option<chrono_tz::Tz> {
    if let Ok(tz) = t.get_ref().trim().parse::<chrono_tz::Tz>() {
        return Some(tz);
    }
    let msg = match offset_zone_hint(t.get_ref()) {
        Some(hint) => format!(
            "found {:?}, expected an IANA time zone name; {hint}",
            t.get_ref()
        ),
        None => format!(
            "found {:?}, expected an IANA time zone name; nearest valid names: {}",
            t.get_ref(),
            nearest_zone_names(t.get_ref(), 3).join(", ")
        ),
    };
    problems.push(ctx.at(&t.span()), "timezone", msg);
    None
}

/// The optional structured keys of a site.
struct SiteExtras {
    darkness_alt_deg: f64,
    darkness_label: String,
    hour_angle_limits_h: Option<(f64, f64)>,
    horizon: HorizonProfile,
    telescopes: Vec<Telescope>,
    overrides: Vec<TelescopeOverrides>,
}

/// Darkness level, hour-angle limits, horizon profile (each bad pair named by its own line) and telescopes.
fn parse_extras(ctx: &SiteCtx<'_>, r: &RawSite, problems: &mut Problems) -> Option<SiteExtras> {
    let mut ok = true;
    let (darkness_alt_deg, darkness_label) = match &r.darkness {
        None => (NAUTICAL_TWILIGHT_ALT_DEG, "nautical".to_string()),
        Some(v) => parse_darkness(v.get_ref()).unwrap_or_else(|msg| {
            problems.push(ctx.at(&v.span()), "darkness", msg);
            ok = false;
            (0.0, String::new())
        }),
    };
    let hour_angle_limits_h = match &r.hour_angle_limits_h {
        None => None,
        Some(v) => match v.get_ref().as_slice() {
            [a, b] if a.is_finite() && b.is_finite() && -12.0 <= *a && a < b && *b <= 12.0 => {
                Some((*a, *b))
            }
            other => {
                problems.push(
                    ctx.at(&v.span()),
                    "hour_angle_limits_h",
                    format!("found {other:?}, expected [east, west] hours with -12 <= east < west <= 12"),
                );
                ok = false;
                None
            }
        },
    };
    let mut pairs = Vec::new();
    for p in r
        .horizon
        .as_ref()
        .map(|v| v.get_ref().as_slice())
        .unwrap_or(&[])
    {
        match p.get_ref().as_slice() {
            [az, alt] if az.is_finite() && alt.is_finite() && (-90.0..=90.0).contains(alt) => {
                pairs.push((*az, *alt))
            }
            other => {
                problems.push(
                    ctx.at(&p.span()),
                    "horizon",
                    format!("found {other:?}, expected [azimuth_deg, altitude_deg] pairs with altitude within -90..90"),
                );
                ok = false;
            }
        }
    }
    let (telescopes, overrides) = match &r.telescopes {
        None => (
            vec![Telescope {
                name: "main".into(),
                min_alt_deg: None,
                max_alt_deg: None,
                photometry: None,
            }],
            vec![TelescopeOverrides::default()],
        ),
        Some(v) => parse_telescopes(v.get_ref()).unwrap_or_else(|msgs| {
            for msg in msgs {
                problems.push(ctx.at(&v.span()), "telescopes", msg);
            }
            ok = false;
            (Vec::new(), Vec::new())
        }),
    };
    ok.then(|| SiteExtras {
        darkness_alt_deg,
        darkness_label,
        hour_angle_limits_h,
        horizon: HorizonProfile::new(&pairs),
        telescopes,
        overrides,
    })
}

/// The lowest usable altitude (from `min_alt_deg` or `max_airmass`, the stricter; default 30 deg) and the
/// highest trackable one, checked against each other for the site and every telescope.
fn altitude_limits(
    ctx: &SiteCtx<'_>,
    r: &RawSite,
    telescopes: &[Telescope],
    problems: &mut Problems,
) -> Option<(f64, Option<f64>)> {
    let from_alt = r.min_alt_deg.as_ref().map(|v| *v.get_ref());
    let from_airmass = r
        .max_airmass
        .as_ref()
        .map(|v| alt_deg_for_airmass(*v.get_ref()));
    let min_alt_deg = match (from_alt, from_airmass) {
        (Some(a), Some(b)) => a.max(b),
        (Some(a), None) => a,
        (None, Some(b)) => b,
        (None, None) => 30.0,
    };
    let max_alt_deg = r.max_alt_deg.as_ref().map(|v| *v.get_ref());
    if let Some(v) = &r.max_alt_deg {
        if *v.get_ref() <= min_alt_deg {
            problems.push(
                ctx.at(&v.span()),
                "max_alt_deg",
                format!(
                    "found {}, expected more than the lowest usable altitude ({min_alt_deg:.1} deg)",
                    v.get_ref()
                ),
            );
            return None;
        }
    }
    let inverted = telescopes.iter().find(|t| {
        t.min_alt_deg.unwrap_or(min_alt_deg) >= t.max_alt_deg.or(max_alt_deg).unwrap_or(90.0)
    });
    if let (Some(t), Some(list)) = (inverted, &r.telescopes) {
        problems.push(
            ctx.at(&list.span()),
            "telescopes",
            format!(
                "telescope {:?}: found a highest altitude at or below its lowest, expected max_alt_deg above \
                 min_alt_deg",
                t.name
            ),
        );
        return None;
    }
    Some((min_alt_deg, max_alt_deg))
}

/// The photometric set-up of a site or of one telescope, when an aperture is named (every other key has a
/// documented default). `over` holds a telescope's own keys, which win over the site's; `item` names the
/// telescope item (1-based) for messages.
fn photometry_of(
    ctx: &SiteCtx<'_>,
    r: &RawSite,
    over: &TelescopeOverrides,
    item: Option<usize>,
    problems: &mut Problems,
) -> Option<Option<Photometry>> {
    let get = |name: &str| {
        over.numbers
            .iter()
            .find(|(k, _)| k == name)
            .map(|(_, v)| *v)
            .or_else(|| r.number(name).map(|v| *v.get_ref()))
    };
    let Some(aperture_m) = get("aperture_m") else {
        return Some(None);
    };
    let band = over
        .band
        .clone()
        .or_else(|| r.band.as_ref().map(|b| b.get_ref().trim().to_string()))
        .unwrap_or_else(|| "V".to_string());
    if crate::astro::bands::band(&band).is_none() {
        let expected = "expected U, B, V, R, I, g, r, i or z";
        match (item, &r.telescopes) {
            (Some(i), Some(t)) if over.band.is_some() => problems.push(
                ctx.at(&t.span()),
                "telescopes",
                format!("item {i}: band: found {band:?}, {expected}"),
            ),
            _ => {
                let span = r.band.as_ref().map(|b| b.span()).unwrap_or(0..0);
                problems.push(ctx.at(&span), "band", format!("found {band:?}, {expected}"));
            }
        }
        return None;
    }
    Some(Some(Photometry {
        aperture_m,
        obstruction: get("obstruction").unwrap_or(0.3),
        throughput: get("throughput").unwrap_or(0.5),
        band,
        read_noise_e: get("read_noise_e").unwrap_or(8.0),
        dark_e_per_s: get("dark_e_per_s").unwrap_or(0.02),
        full_well_e: get("full_well_e").unwrap_or(100_000.0),
        gain_e_per_adu: get("gain_e_per_adu"),
        pixel_scale_arcsec: get("pixel_scale_arcsec").unwrap_or(0.6),
        exposure_s: get("exposure_s"),
        overhead_s: get("overhead_s").unwrap_or(5.0),
        aperture_radius_arcsec: get("aperture_radius_arcsec"),
        seeing_arcsec: get("seeing_arcsec").unwrap_or(2.0),
        scintillation_cy: get("scintillation_cy").unwrap_or(1.5),
        sky_mag: get("sky_mag"),
        extinction: get("extinction"),
        red_noise_beta: get("red_noise_beta").unwrap_or(1.0),
        noise_floor_ppt: get("noise_floor_ppt").unwrap_or(0.0),
    }))
}

/// One site from its table, or None with every problem of the table reported.
fn parse_site(
    ctx: &SiteCtx<'_>,
    r: &RawSite,
    seen: &mut std::collections::HashMap<String, usize>,
    problems: &mut Problems,
) -> Option<Site> {
    let mut ok = check_keys(ctx, r, problems);
    let name = r
        .name
        .as_ref()
        .and_then(|n| check_name(ctx, n, seen, problems));
    ok &= name.is_some() || r.name.is_none();
    let tz = r
        .timezone
        .as_ref()
        .and_then(|t| parse_zone(ctx, t, problems));
    let extras = parse_extras(ctx, r, problems);
    let (Some(name), Some(lat), Some(lon), Some(tz), Some(extras), true) =
        (name, &r.latitude_deg, &r.longitude_deg, tz, extras, ok)
    else {
        return None;
    };
    let (lat, mut lon_deg) = (*lat.get_ref(), *lon.get_ref());
    if lon_deg > 180.0 {
        lon_deg -= 360.0;
    }
    let allow_far_zone = r.allow_far_zone.as_ref().is_some_and(|v| *v.get_ref());
    if !allow_far_zone {
        if let Some(msg) = far_zone_problem(lon_deg, tz) {
            problems.push(ctx.at(&lon.span()), "longitude_deg", msg);
            return None;
        }
    }
    let (min_alt_deg, max_alt_deg) = altitude_limits(ctx, r, &extras.telescopes, problems)?;
    let elevation_m = r.elevation_m.as_ref().map(|v| *v.get_ref()).unwrap_or(0.0);
    let photometry = photometry_of(ctx, r, &TelescopeOverrides::default(), None, problems)?;
    let mut telescopes = extras.telescopes;
    let mut ok = true;
    for (i, (t, over)) in telescopes.iter_mut().zip(&extras.overrides).enumerate() {
        match photometry_of(ctx, r, over, Some(i + 1), problems) {
            Some(p) => t.photometry = p,
            None => ok = false,
        }
    }
    if !ok {
        return None;
    }
    Some(Site {
        name,
        observer: Observer::from_deg(lat, lon_deg, elevation_m),
        lat_deg: lat,
        lon_deg,
        elevation_m,
        tz,
        min_alt_deg,
        max_alt_deg,
        darkness_alt_deg: extras.darkness_alt_deg,
        darkness_label: extras.darkness_label,
        horizon: extras.horizon,
        hour_angle_limits_h: extras.hour_angle_limits_h,
        min_moon_sep_deg: r.min_moon_sep_deg.as_ref().map(|v| *v.get_ref()),
        telescopes,
        photometry,
    })
}

/// The telescopes of a site and their own photometric keys: a count, or a list of tables. Every bad item is
/// reported.
fn parse_telescopes(
    v: &toml::Value,
) -> Result<(Vec<Telescope>, Vec<TelescopeOverrides>), Vec<String>> {
    let expected =
        "a count (1-20) or a list of {name = \"...\", min_alt_deg = ..., max_alt_deg = ..., \
                    and photometric keys such as aperture_m} tables";
    match v {
        toml::Value::Integer(n) if (1..=20).contains(n) => Ok((1..=*n)
            .map(|i| {
                (
                    Telescope {
                        name: format!("T{i}"),
                        min_alt_deg: None,
                        max_alt_deg: None,
                        photometry: None,
                    },
                    TelescopeOverrides::default(),
                )
            })
            .unzip()),
        toml::Value::Array(items) if !items.is_empty() => {
            let (mut out, mut overs): (Vec<Telescope>, Vec<TelescopeOverrides>) =
                (Vec::new(), Vec::new());
            let mut problems = Vec::new();
            for (i, item) in items.iter().enumerate() {
                match parse_telescope(item, i, &out, expected) {
                    Ok((t, o)) => {
                        out.push(t);
                        overs.push(o);
                    }
                    Err(m) => problems.extend(m),
                }
            }
            if problems.is_empty() {
                Ok((out, overs))
            } else {
                Err(problems)
            }
        }
        other => Err(vec![format!("found {other}, expected {expected}")]),
    }
}

/// The photometric keys of telescope item `i` (0-based), each number within the range the site key has.
fn telescope_overrides(
    table: &toml::value::Table,
    i: usize,
) -> Result<TelescopeOverrides, Vec<String>> {
    let mut over = TelescopeOverrides::default();
    let mut problems = Vec::new();
    for (k, v) in table {
        if k == "band" {
            match v {
                toml::Value::String(b) => over.band = Some(b.trim().to_string()),
                other => problems.push(format!(
                    "item {}: band: found {other}, expected text",
                    i + 1
                )),
            }
            continue;
        }
        let Some((_, lo, hi, what)) = SITE_NUMBERS
            .iter()
            .find(|(n, ..)| n == k && TELESCOPE_PHOTOMETRY_KEYS.contains(n))
        else {
            continue;
        };
        let x = match v {
            toml::Value::Float(x) => *x,
            toml::Value::Integer(x) => *x as f64,
            _ => f64::NAN,
        };
        if x.is_finite() && (*lo..=*hi).contains(&x) {
            over.numbers.push((k.clone(), x));
        } else {
            problems.push(format!("item {}: {k}: found {v}, expected {what}", i + 1));
        }
    }
    if problems.is_empty() {
        Ok(over)
    } else {
        Err(problems)
    }
}

/// Telescope item `i` (0-based) of a list, unique among those `before` it, and its own photometric keys.
fn parse_telescope(
    item: &toml::Value,
    i: usize,
    before: &[Telescope],
    expected: &str,
) -> Result<(Telescope, TelescopeOverrides), Vec<String>> {
    let one = |m: String| vec![m];
    let table = item
        .as_table()
        .ok_or_else(|| one(format!("item {}: found {item}, expected {expected}", i + 1)))?;
    if let Some(k) = table.keys().find(|k| {
        !["name", "min_alt_deg", "max_alt_deg"].contains(&k.as_str())
            && !TELESCOPE_PHOTOMETRY_KEYS.contains(&k.as_str())
    }) {
        return Err(one(format!(
            "item {}: unknown key {k:?}; expected name, min_alt_deg, max_alt_deg or one of {}",
            i + 1,
            TELESCOPE_PHOTOMETRY_KEYS.join(", ")
        )));
    }
    let name = match table.get("name") {
        None => format!("T{}", i + 1),
        Some(toml::Value::String(s)) if !s.trim().is_empty() => s.trim().to_string(),
        Some(other) => {
            return Err(one(format!(
                "item {}: name: found {other}, expected text",
                i + 1
            )))
        }
    };
    let min_alt_deg = telescope_limit(table, "min_alt_deg", -5.0, 89.0, i).map_err(one)?;
    let max_alt_deg = telescope_limit(table, "max_alt_deg", 30.0, 90.0, i).map_err(one)?;
    if before.iter().any(|t| t.name.eq_ignore_ascii_case(&name)) {
        return Err(one(format!(
            "item {}: found the name {name:?} twice; expected unique telescope names",
            i + 1
        )));
    }
    let over = telescope_overrides(table, i)?;
    Ok((
        Telescope {
            name,
            min_alt_deg,
            max_alt_deg,
            photometry: None,
        },
        over,
    ))
}

/// An optional altitude limit `key` of telescope item `i` (0-based), within lo..hi deg.
fn telescope_limit(
    table: &toml::value::Table,
    key: &str,
    lo: f64,
    hi: f64,
    i: usize,
) -> Result<Option<f64>, String> {
    let x = match table.get(key) {
        None => return Ok(None),
        Some(toml::Value::Float(x)) => *x,
        Some(toml::Value::Integer(x)) => *x as f64,
        Some(other) => {
            return Err(format!(
                "item {}: {key}: found {other}, expected a number within {lo}..{hi}",
                i + 1
            ))
        }
    };
    if (lo..=hi).contains(&x) {
        Ok(Some(x))
    } else {
        Err(format!(
            "item {}: {key}: found {x}, expected a number within {lo}..{hi}",
            i + 1
        ))
    }
}

fn parse_darkness(v: &toml::Value) -> Result<(f64, String), String> {
    let expected =
        "\"civil\", \"nautical\", \"astronomical\" or a Sun altitude in degrees within -30..0";
    match v {
        toml::Value::String(s) => match s.trim().to_ascii_lowercase().as_str() {
            "civil" => Ok((CIVIL_TWILIGHT_ALT_DEG, "civil".into())),
            "nautical" => Ok((NAUTICAL_TWILIGHT_ALT_DEG, "nautical".into())),
            "astronomical" => Ok((ASTRONOMICAL_TWILIGHT_ALT_DEG, "astronomical".into())),
            _ => Err(format!("found {s:?}, expected {expected}")),
        },
        toml::Value::Float(x) if x.is_finite() && (-30.0..=0.0).contains(x) => {
            Ok((*x, format!("{x} deg")))
        }
        toml::Value::Integer(i) if (-30..=0).contains(i) => Ok((*i as f64, format!("{i} deg"))),
        other => Err(format!("found {other}, expected {expected}")),
    }
}

/// For a zone written as a UTC offset (`UTC-10`, `GMT+5`, `UTC+05:30`, `+8`), what to write instead: the IANA
/// `Etc/GMT` zone for whole hours, whose sign is flipped by POSIX convention (`Etc/GMT+10` is 10 h behind UTC),
/// or a place name when the offset is not whole hours (no `Etc` zone exists for it). Note that a fixed offset
/// never follows daylight-saving time; a place's zone does.
pub fn offset_zone_hint(text: &str) -> Option<String> {
    let t = text.trim().to_ascii_uppercase();
    let rest = t
        .strip_prefix("UTC")
        .or_else(|| t.strip_prefix("GMT"))
        .unwrap_or(&t)
        .trim();
    let (sign, digits) = match rest.chars().next()? {
        '+' => (1, &rest[1..]),
        '-' => (-1, &rest[1..]),
        _ => return None,
    };
    let (h, m) = match digits.split_once(':') {
        Some((h, m)) => (h.parse::<i32>().ok()?, m.parse::<i32>().ok()?),
        None if digits.len() == 4 => (digits[..2].parse().ok()?, digits[2..].parse().ok()?),
        None => (digits.parse::<i32>().ok()?, 0),
    };
    if !(0..=14).contains(&h) || !(0..60).contains(&m) {
        return None;
    }
    let side = if sign > 0 { "ahead of" } else { "behind" };
    if m != 0 {
        return Some(format!(
            "a UTC offset of {}{h}:{m:02} has no IANA Etc zone; use the zone of a place that keeps it (for example \
             Asia/Kolkata for +5:30), which also follows its daylight-saving rules",
            if sign > 0 { '+' } else { '-' }
        ));
    }
    if h == 0 {
        return Some("for UTC itself write Etc/UTC".to_string());
    }
    let etc = format!("Etc/GMT{}{h}", if sign > 0 { '-' } else { '+' });
    Some(format!(
        "for a fixed offset of {h} h {side} UTC write {etc} (IANA's Etc zones flip the sign: {etc} is {h} h {side} \
         UTC); a fixed offset ignores daylight-saving time, so the zone of a place is better"
    ))
}

/// The `n` IANA zone names closest to `text` by edit distance (case-insensitive).
pub fn nearest_zone_names(text: &str, n: usize) -> Vec<String> {
    let needle = text.trim().to_lowercase();
    let mut scored: Vec<(usize, &str)> = chrono_tz::TZ_VARIANTS
        .iter()
        .map(|tz| {
            let name = tz.name();
            (edit_distance(&needle, &name.to_lowercase()), name)
        })
        .collect();
    scored.sort();
    scored
        .into_iter()
        .take(n)
        .map(|(_, s)| s.to_string())
        .collect()
}

/// Levenshtein distance (classic dynamic programme).
fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.chars().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != *cb))
                .min(prev[j + 1] + 1)
                .min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
[[site]]
name = "Test Hill"
latitude_deg = 40.5
longitude_deg = 350.0
elevation_m = 1200
timezone = "Europe/Madrid"
max_airmass = 2.0
darkness = "astronomical"
horizon = [[0, 10], [180, 20]]
"#;

    #[test]
    fn parses_a_site() {
        let s = &parse_sites("s.toml", GOOD).unwrap()[0];
        assert_eq!(s.lon_deg, -10.0);
        assert_eq!(s.darkness_alt_deg, -18.0);
        assert!((s.min_alt_deg - 29.9).abs() < 0.2, "{}", s.min_alt_deg);
        assert!((s.horizon.min_alt_deg(90.0) - 15.0).abs() < 1e-9);
    }

    #[test]
    fn collects_every_problem_with_lines() {
        let bad = GOOD
            .replace("40.5", "95.0")
            .replace("Europe/Madrid", "Europe/Madird")
            .replace("\"astronomical\"", "\"darkish\"");
        let err = parse_sites("s.toml", &bad).unwrap_err();
        let msg = err.to_string();
        assert_eq!(err.problems.len(), 3, "{msg}");
        assert!(
            msg.contains("s.toml:4: latitude_deg: found 95, expected a latitude within -90..90"),
            "{msg}"
        );
        assert!(msg.contains("Europe/Madrid"), "suggestion missing: {msg}");
        assert!(msg.contains("s.toml:9: darkness"), "{msg}");
    }

    #[test]
    fn offsets_written_as_zones_get_the_etc_name_with_its_sign_explained() {
        let h = offset_zone_hint("UTC-10").unwrap();
        assert!(
            h.contains("write Etc/GMT+10") && h.contains("flip the sign") && h.contains("behind"),
            "{h}"
        );
        assert!(offset_zone_hint("GMT+3").unwrap().contains("Etc/GMT-3"));
        assert!(offset_zone_hint("UTC+05:30")
            .unwrap()
            .contains("no IANA Etc zone"));
        assert!(offset_zone_hint("+0800").unwrap().contains("Etc/GMT-8"));
        assert_eq!(offset_zone_hint("Europe/Madird"), None);
        // Etc/GMT+10 really is 10 h behind UTC (IANA tz database, etcetera file).
        let tz: chrono_tz::Tz = "Etc/GMT+10".parse().unwrap();
        let d = chrono::NaiveDate::from_ymd_opt(2027, 1, 1).unwrap();
        assert_eq!(crate::astro::civil::standard_offset_hours(d, tz), -10.0);
        let text = GOOD.replace("Europe/Madrid", "UTC-10");
        let msg = parse_sites("s.toml", &text).unwrap_err().to_string();
        assert!(
            msg.contains("s.toml:7: timezone: found \"UTC-10\"") && msg.contains("Etc/GMT+10"),
            "{msg}"
        );
    }

    #[test]
    fn every_bad_telescope_is_reported() {
        let text = format!(
            "{GOOD}telescopes = [{{ name = \"a\", min_alt_deg = 95 }}, {{ name = \"b\", colour = 1 }}, {{ name = \"c\" }}, {{ name = \"C\" }}]\n"
        );
        let err = parse_sites("s.toml", &text).unwrap_err();
        let msg = err.to_string();
        assert_eq!(err.problems.len(), 3, "{msg}");
        assert!(
            msg.contains("item 1: min_alt_deg: found 95")
                && msg.contains("item 2: unknown key \"colour\""),
            "{msg}"
        );
        assert!(msg.contains("item 4: found the name \"C\" twice"), "{msg}");
    }

    #[test]
    fn telescopes_take_the_sites_photometry_and_their_own() {
        let text = format!(
            "{GOOD}aperture_m = 0.5\nband = \"R\"\nread_noise_e = 9\nseeing_arcsec = 1.7\n\
             telescopes = [{{ name = \"big\", aperture_m = 1.0, gain_e_per_adu = 2 }}, {{ name = \"site\" }}, \
             {{ name = \"blue\", band = \"B\", read_noise_e = 4 }}]\n"
        );
        let s = parse_sites("s.toml", &text).unwrap().remove(0);
        let ph = |i: usize| s.for_telescope(&s.telescopes[i]).photometry.unwrap();
        assert_eq!(
            (ph(0).aperture_m, ph(0).band.as_str(), ph(0).read_noise_e),
            (1.0, "R", 9.0)
        );
        assert_eq!(ph(0).gain_e_per_adu, Some(2.0));
        assert_eq!(
            ph(1),
            s.photometry.clone().unwrap(),
            "no keys of its own: the site's set-up"
        );
        assert_eq!(
            (ph(2).aperture_m, ph(2).band.as_str(), ph(2).read_noise_e),
            (0.5, "B", 4.0)
        );
        // The sky belongs to the site: every telescope sees the site's seeing.
        assert!((0..3).all(|i| ph(i).seeing_arcsec == 1.7));
        assert_eq!(s.station_label(2), "Test Hill / blue");
        // An aperture on one telescope alone gives only that telescope a set-up.
        let text = format!(
            "{GOOD}telescopes = [{{ name = \"a\", aperture_m = 0.3 }}, {{ name = \"b\" }}]\n"
        );
        let s = parse_sites("s.toml", &text).unwrap().remove(0);
        assert!(s.for_telescope(&s.telescopes[0]).photometry.is_some());
        assert!(s.for_telescope(&s.telescopes[1]).photometry.is_none());
        assert_eq!(s.station_label(0), "Test Hill / a");
    }

    #[test]
    fn bad_telescope_photometry_is_reported_per_item() {
        let text = format!(
            "{GOOD}aperture_m = 0.5\ntelescopes = [{{ name = \"a\", band = \"K\" }}, {{ name = \"b\", aperture_m = 90 }}, \
             {{ name = \"c\", seeing_arcsec = 1 }}]\n"
        );
        let msg = parse_sites("s.toml", &text).unwrap_err().to_string();
        assert!(
            msg.contains("item 2: aperture_m: found 90, expected an aperture within 0.01..50 m"),
            "{msg}"
        );
        assert!(
            msg.contains("item 3: unknown key \"seeing_arcsec\""),
            "{msg}"
        );
        let text =
            format!("{GOOD}aperture_m = 0.5\ntelescopes = [{{ name = \"a\", band = \"K\" }}]\n");
        let msg = parse_sites("s.toml", &text).unwrap_err().to_string();
        assert!(
            msg.contains(
                "telescopes: item 1: band: found \"K\", expected U, B, V, R, I, g, r, i or z"
            ),
            "{msg}"
        );
    }

    #[test]
    fn a_bad_horizon_pair_is_named_by_its_own_line() {
        let text = GOOD.replace(
            "horizon = [[0, 10], [180, 20]]",
            "horizon = [\n  [0, 10],\n  [90, 95],\n  [180, 20],\n  [270],\n]",
        );
        let msg = parse_sites("s.toml", &text).unwrap_err().to_string();
        assert!(
            msg.contains("s.toml:12: horizon: found [90.0, 95.0]"),
            "{msg}"
        );
        assert!(msg.contains("s.toml:14: horizon: found [270.0]"), "{msg}");
    }

    #[test]
    fn zenith_limits_of_site_and_telescopes() {
        let text = format!(
            "{GOOD}max_alt_deg = 86\ntelescopes = [{{ name = \"alt-az\", max_alt_deg = 84 }}, {{ name = \"eq\" }}]\n"
        );
        let s = &parse_sites("s.toml", &text).unwrap()[0];
        assert_eq!(s.max_alt_deg, Some(86.0));
        assert_eq!(s.for_telescope(&s.telescopes[0]).max_alt_deg, Some(84.0));
        assert_eq!(s.for_telescope(&s.telescopes[1]).max_alt_deg, Some(86.0));
        // A highest altitude at or below the lowest is refused with its line.
        let low = GOOD.replace("max_airmass = 2.0", "min_alt_deg = 50");
        let err = parse_sites("s.toml", &format!("{low}max_alt_deg = 45\n")).unwrap_err();
        assert!(
            err.to_string().contains(
                "s.toml:11: max_alt_deg: found 45, expected more than the lowest usable altitude (50.0 deg)"
            ),
            "{err}"
        );
        let err = parse_sites(
            "s.toml",
            &format!("{GOOD}telescopes = [{{ name = \"a\", max_alt_deg = 95 }}]\n"),
        )
        .unwrap_err();
        assert!(
            err.to_string()
                .contains("max_alt_deg: found 95, expected a number within 30..90"),
            "{err}"
        );
    }
}
