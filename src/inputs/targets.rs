//! Targets file (CSV): one row per transiting planet or candidate. Columns are documented in the README.
//!
//! Header names are matched case-insensitively after trimming. A catalogue export whose columns are named
//! differently is read through a [`ColumnMap`] (our name -> their header) without editing the file.
//! The delimiter is detected from the header line (comma, semicolon or tab); a byte-order mark and CRLF line
//! ends are accepted; lines starting with `#` are comments.

use super::angles::{parse_dec_deg, parse_ra_deg};
use super::{open_csv, parse_finite, CsvInput, InputError, Problems};
use crate::astro::barycentric::TimeSystem;
use crate::ephemeris::Ephemeris;
use crate::inputs::units::{self, Unit};
use std::collections::HashMap;

/// A map keyed by our own column names, hashed with foldhash: a row is read through a few dozen lookups by
/// name, and the standard library's SipHash made them 40% of the time spent reading a large targets file. The
/// keys are the program's own strings, so a hash without protection against chosen keys is safe here.
type NameMap<V> = HashMap<&'static str, V, foldhash::fast::FixedState>;

/// The target names met so far (lower case) and the line of each, to report a repeated name.
type SeenNames = HashMap<String, usize, foldhash::fast::FixedState>;

/// A resolved target.
#[derive(Debug, Clone, PartialEq)]
pub struct Target {
    /// Name, unique within the file.
    pub name: String,
    /// Right ascension, ICRS/J2000, deg 0..360.
    pub ra_deg: f64,
    /// Declination, ICRS/J2000, deg.
    pub dec_deg: f64,
    /// Transit ephemeris.
    pub ephemeris: Ephemeris,
    /// Total transit duration T14 (first to fourth contact), hours.
    pub t14_hours: f64,
    /// Transit depth, parts per thousand, if given.
    pub depth_ppt: Option<f64>,
    /// Magnitude in the observer's band, if given.
    pub mag: Option<f64>,
    /// Band of `mag` (`mag_band` column, default V). The expected noise is computed only when it is the band
    /// of the site's photometric set-up.
    pub mag_band: Option<String>,
    /// Priority, larger is more important (default 1).
    pub priority: f64,
    /// Free-text notes.
    pub notes: String,
    /// Proper motion in right ascension, mu_alpha* = mu_alpha cos(dec), mas/yr (0 if not given).
    pub pm_ra_cosdec_mas_per_yr: f64,
    /// Proper motion in declination, mas/yr (0 if not given).
    pub pm_dec_mas_per_yr: f64,
    /// Epoch of the coordinates, Julian year (2000.0 if not given; 2016.0 for Gaia DR3 positions).
    pub coord_epoch_jyear: f64,
    /// Eccentric orbit (`ecc`, `omega_deg`, ...), if given; circular otherwise.
    pub orbit: Option<crate::orbit::Orbit>,
    /// Which event of the orbit this entry plans: the transit for a target as read; other kinds are views
    /// made by [`crate::orbit::kind_views`] with the ephemeris moved to that event.
    pub kind: crate::orbit::EventKind,
}

impl Target {
    /// Half the total duration T14, days: the time from ingress (or egress) to mid-transit.
    pub fn half_duration_days(&self) -> f64 {
        self.t14_hours / 48.0
    }

    /// The name as tables show it: with the kind's marker for anything but a transit (`Amberfall b [occ]`).
    pub fn label(&self) -> String {
        let m = self.kind.marker();
        if m.is_empty() {
            self.name.clone()
        } else {
            format!("{} {m}", self.name)
        }
    }

    /// The catalogue direction when the target has no proper motion (then [`Target::icrs_at`] is the same at
    /// every instant); `None` when it moves.
    pub fn icrs_fixed(&self) -> Option<crate::astro::frames::Vec3> {
        (self.pm_ra_cosdec_mas_per_yr == 0.0 && self.pm_dec_mas_per_yr == 0.0)
            .then(|| self.icrs_at(0.0))
    }

    /// ICRS unit vector of the target at `jd` (any time scale: a day changes nothing), with its proper motion
    /// applied from the coordinate epoch ([`crate::astro::frames::apply_proper_motion`]).
    pub fn icrs_at(&self, jd: f64) -> crate::astro::frames::Vec3 {
        let (ra, dec) = if self.pm_ra_cosdec_mas_per_yr == 0.0 && self.pm_dec_mas_per_yr == 0.0 {
            (self.ra_deg, self.dec_deg)
        } else {
            let epoch_jd = crate::constants::J2000_JD + (self.coord_epoch_jyear - 2000.0) * 365.25;
            crate::astro::frames::apply_proper_motion(
                self.ra_deg,
                self.dec_deg,
                self.pm_ra_cosdec_mas_per_yr,
                self.pm_dec_mas_per_yr,
                epoch_jd,
                jd,
            )
        };
        crate::astro::frames::unit_from_radec(ra.to_radians(), dec.to_radians())
    }
}

/// The accepted range of a numeric column and how it is described in messages.
pub struct NumberRule {
    /// Smallest accepted value.
    pub lo: f64,
    /// Largest accepted value.
    pub hi: f64,
    /// What is expected, for messages (`found X, expected ...`).
    pub expected: &'static str,
}

/// One column dipwatch reads: its canonical name, whether it is required, what it holds, and for a number its
/// accepted range. Validation of every numeric column is driven by this table.
pub struct ColumnSpec {
    /// Canonical header name.
    pub name: &'static str,
    /// Whether the column must be present.
    pub required: bool,
    /// What the column holds (used in messages and the README).
    pub meaning: &'static str,
    /// The accepted range, for numeric columns.
    pub number: Option<NumberRule>,
}

/// Every column dipwatch reads from a targets file.
pub const COLUMNS: &[ColumnSpec] = &[
    ColumnSpec {
        name: "name",
        required: true,
        meaning: "target name, unique",
        number: None,
    },
    ColumnSpec {
        name: "ra",
        required: true,
        meaning: "right ascension, ICRS: hh:mm:ss.s or decimal degrees",
        number: None,
    },
    ColumnSpec {
        name: "dec",
        required: true,
        meaning: "declination, ICRS: +dd:mm:ss.s or decimal degrees",
        number: None,
    },
    ColumnSpec {
        name: "t0",
        required: true,
        meaning: "reference mid-transit time, full Julian Date in time_system",
        number: Some(NumberRule {
            lo: MIN_FULL_JD,
            hi: MAX_FULL_JD,
            expected: "a full Julian Date between 2400000 and 2600000 (reduced dates such as BJD-2457000 need the offset added)",
        }),
    },
    ColumnSpec {
        name: "t0_sigma_days",
        required: true,
        meaning: "1-sigma error of t0, days",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 1e3,
            expected: "a 1-sigma error in days, >= 0",
        }),
    },
    ColumnSpec {
        name: "period_days",
        required: true,
        meaning: "orbital period, days",
        number: Some(NumberRule {
            lo: 1e-6,
            hi: 1e6,
            expected: "a period in days, > 0",
        }),
    },
    ColumnSpec {
        name: "period_sigma_days",
        required: true,
        meaning: "1-sigma error of the period, days",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 1e3,
            expected: "a 1-sigma error in days, >= 0",
        }),
    },
    ColumnSpec {
        name: "t0_period_cov_days2",
        required: false,
        meaning: "covariance of t0 and period, days^2 (default 0)",
        number: Some(NumberRule {
            lo: -1e6,
            hi: 1e6,
            expected: "a covariance in days^2",
        }),
    },
    ColumnSpec {
        name: "t14_hours",
        required: true,
        meaning: "total transit duration, first to fourth contact, hours",
        number: Some(NumberRule {
            lo: 1e-6,
            hi: 1e6,
            expected: "a duration in hours, > 0",
        }),
    },
    ColumnSpec {
        name: "depth_ppt",
        required: false,
        meaning: "transit depth, parts per thousand",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 1000.0,
            expected: "a depth in parts per thousand within 0..1000",
        }),
    },
    ColumnSpec {
        name: "time_system",
        required: false,
        meaning: "BJD_TDB (default), HJD_UTC or JD_UTC",
        number: None,
    },
    ColumnSpec {
        name: "mag",
        required: false,
        meaning: "magnitude",
        number: Some(NumberRule {
            lo: -30.0,
            hi: 40.0,
            expected: "a magnitude within -30..40",
        }),
    },
    ColumnSpec {
        name: "mag_band",
        required: false,
        meaning: "band of mag: U, B, V, R, I, g, r, i or z (default V)",
        number: None,
    },
    ColumnSpec {
        name: "priority",
        required: false,
        meaning: "priority, larger is more important (default 1)",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 1e9,
            expected: "a priority, a number >= 0",
        }),
    },
    ColumnSpec {
        name: "notes",
        required: false,
        meaning: "free text",
        number: None,
    },
    ColumnSpec {
        name: "pm_ra_mas_per_yr",
        required: false,
        meaning: "proper motion in RA times cos(dec), mas/yr (default 0)",
        number: Some(NumberRule {
            lo: -2e4,
            hi: 2e4,
            expected: "a proper motion within +-20000 mas/yr",
        }),
    },
    ColumnSpec {
        name: "pm_dec_mas_per_yr",
        required: false,
        meaning: "proper motion in Dec, mas/yr (default 0)",
        number: Some(NumberRule {
            lo: -2e4,
            hi: 2e4,
            expected: "a proper motion within +-20000 mas/yr",
        }),
    },
    ColumnSpec {
        name: "ecc",
        required: false,
        meaning: "orbital eccentricity (default 0: circular)",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 0.95,
            expected: "an eccentricity within 0..0.95",
        }),
    },
    ColumnSpec {
        name: "omega_deg",
        required: false,
        meaning: "the star's argument of periastron, deg (radial-velocity convention; needed with ecc > 0)",
        number: Some(NumberRule {
            lo: -360.0,
            hi: 360.0,
            expected: "an angle within -360..360 deg",
        }),
    },
    ColumnSpec {
        name: "ecc_sigma",
        required: false,
        meaning: "1-sigma of ecc (default 0)",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 1.0,
            expected: "a 1-sigma error within 0..1",
        }),
    },
    ColumnSpec {
        name: "omega_sigma_deg",
        required: false,
        meaning: "1-sigma of omega_deg, deg (default 0)",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 180.0,
            expected: "a 1-sigma error within 0..180 deg",
        }),
    },
    ColumnSpec {
        name: "inc_deg",
        required: false,
        meaning: "orbital inclination, deg (default 90)",
        number: Some(NumberRule {
            lo: 0.0,
            hi: 180.0,
            expected: "an inclination within 0..180 deg",
        }),
    },
    ColumnSpec {
        name: "t14_occ_hours",
        required: false,
        meaning: "occultation duration, hours (default: from T14, ecc and omega)",
        number: Some(NumberRule {
            lo: 1e-6,
            hi: 1e6,
            expected: "a duration in hours, > 0",
        }),
    },
    ColumnSpec {
        name: "coord_epoch",
        required: false,
        meaning: "epoch of ra/dec, Julian year (default 2000.0)",
        number: Some(NumberRule {
            lo: 1900.0,
            hi: 2100.0,
            expected: "a Julian year within 1900..2100",
        }),
    },
];

/// Columns that may be mapped to two columns, `ours=PLUS|MINUS` (two-sided errors). Reading takes the larger
/// magnitude (a conservative choice: never the optimistic side); `refine --out` writes the refined sigma into
/// both, keeping the minus column's sign convention.
pub const TWO_SIDED: [&str; 2] = ["t0_sigma_days", "period_sigma_days"];

/// Our column name -> the header used in the user's file (`PLUS|MINUS` for a two-sided error); and our column
/// name -> the unit of the user's column, when the mapping names one (`ours=theirs:unit`).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ColumnMap(pub HashMap<String, String>, pub HashMap<String, Unit>);

impl ColumnMap {
    /// Parse `ours=theirs[:unit],...` (as given to `--columns`); see [`crate::inputs::units`] for the units.
    pub fn parse(spec: &str) -> Result<ColumnMap, String> {
        let mut map = HashMap::new();
        let mut units = HashMap::new();
        for part in spec.split(',').map(str::trim).filter(|p| !p.is_empty()) {
            let Some((ours, theirs)) = part.split_once('=') else {
                return Err(format!(
                    "found {part:?}, expected ours=theirs (for example period_days=orb_period)"
                ));
            };
            let ours = ours.trim().to_ascii_lowercase();
            if theirs.contains('|') && !TWO_SIDED.contains(&ours.as_str()) {
                return Err(format!(
                    "found {part:?}, but two columns joined by | (PLUS|MINUS) are accepted only for {}",
                    TWO_SIDED.join(" and ")
                ));
            }
            if !COLUMNS.iter().any(|c| c.name == ours) {
                let names: Vec<&str> = COLUMNS.iter().map(|c| c.name).collect();
                return Err(format!(
                    "found column name {ours:?}, expected one of {}",
                    names.join(", ")
                ));
            }
            let (theirs, unit) = split_unit(&ours, theirs.trim())?;
            if let Some(u) = unit {
                units.insert(ours.clone(), u);
            }
            map.insert(ours, theirs);
        }
        Ok(ColumnMap(map, units))
    }
}

/// Split `theirs[:unit]`: a suffix after the last `:` is a unit when our column takes units.
fn split_unit(ours: &str, theirs: &str) -> Result<(String, Option<Unit>), String> {
    match theirs.rsplit_once(':') {
        Some((name, unit)) if units::accepted(ours).is_some() && !name.trim().is_empty() => Ok((
            name.trim().to_string(),
            Some(units::parse_unit(ours, unit)?),
        )),
        _ => Ok((theirs.to_string(), None)),
    }
}

/// Earliest accepted T0: JD 2 400 000 (1858). Smaller values are taken to be reduced dates.
const MIN_FULL_JD: f64 = 2_400_000.0;
/// Latest accepted T0: JD 2 600 000 (2406).
const MAX_FULL_JD: f64 = 2_600_000.0;

/// Offsets of the reduced Julian Dates in common use (common practice, no source): reduced JD (JD - 2400000),
/// modified JD (JD - 2400000.5), JD - 2450000, the Kepler mission's BJD - 2454833 and TESS's BJD - 2457000.
const REDUCED_DATE_OFFSETS: [(f64, &str); 5] = [
    (2_400_000.0, "JD - 2400000 (reduced JD)"),
    (2_400_000.5, "JD - 2400000.5 (MJD)"),
    (2_450_000.0, "JD - 2450000"),
    (2_454_833.0, "BJD - 2454833 (Kepler)"),
    (2_457_000.0, "BJD - 2457000 (TESS)"),
];

/// The message for a time that is not a full Julian Date: what was found, what is expected, and, when it looks
/// like a reduced date, which offsets would make it a date between 1990 and 2040 (as calendar dates).
pub(crate) fn not_a_full_jd(v: f64) -> String {
    let mut msg = format!("found {v}, expected a full Julian Date between 2400000 and 2600000");
    let plausible = 2_447_892.5..2_466_154.5; // 1990-01-01 to 2040-01-01
    let options: Vec<String> = REDUCED_DATE_OFFSETS
        .iter()
        .filter(|(off, _)| plausible.contains(&(v + off)))
        .map(|(off, name)| {
            let date = crate::astro::civil::datetime_from_jd(v + off);
            format!(
                "as {name} it is JD {} ({})",
                v + off,
                date.format("%Y-%m-%d")
            )
        })
        .collect();
    if !options.is_empty() {
        msg.push_str(&format!(
            "; this looks like a reduced date: {}; add the offset your source uses (and keep its time system)",
            options.join(", ")
        ));
    }
    msg
}

/// Detect the delimiter from the first non-comment line: the most frequent of comma, semicolon and tab.
pub(crate) fn detect_delimiter(text: &str) -> u8 {
    let header = text
        .lines()
        .find(|l| !l.trim_start().starts_with('#') && !l.trim().is_empty())
        .unwrap_or("");
    let count = |c: char| header.matches(c).count();
    let (comma, semi, tab) = (count(','), count(';'), count('\t'));
    if tab > comma && tab >= semi {
        b'\t'
    } else if semi > comma {
        b';'
    } else {
        b','
    }
}

/// Where each of our columns is in the file: the column index, and for a two-sided error the minus column.
struct ColumnIndex {
    index: NameMap<usize>,
    minus: NameMap<usize>,
    units: NameMap<Unit>,
}

/// Find every column of [`COLUMNS`] in the header (through the mapping), reporting each missing required one.
fn resolve_columns(
    lowered: &[String],
    header_line: usize,
    map: &ColumnMap,
    problems: &mut Problems,
) -> ColumnIndex {
    let mut cols = ColumnIndex {
        index: NameMap::default(),
        minus: NameMap::default(),
        units: NameMap::default(),
    };
    for spec in COLUMNS {
        if let Some(u) = map.1.get(spec.name) {
            cols.units.insert(spec.name, *u);
        }
        let mapped = map
            .0
            .get(spec.name)
            .map(|s| s.trim().to_lowercase())
            .unwrap_or_else(|| spec.name.to_string());
        let (wanted, minus) = match mapped.split_once('|') {
            Some((a, b)) => (a.trim().to_string(), Some(b.trim().to_string())),
            None => (mapped, None),
        };
        if let Some(m) = minus {
            match lowered.iter().position(|h| *h == m) {
                Some(j) => {
                    cols.minus.insert(spec.name, j);
                }
                None => problems.push(
                    Some(header_line),
                    spec.name,
                    format!(
                        "column {m:?} (the minus side of a two-sided error) not found in the header (found: {})",
                        lowered.join(", ")
                    ),
                ),
            }
        }
        match lowered.iter().position(|h| *h == wanted) {
            Some(i) => {
                cols.index.insert(spec.name, i);
            }
            None if spec.required => problems.push(
                Some(header_line),
                spec.name,
                format!(
                    "column {wanted:?} not found in the header (found: {}); expected {} (map a differently named column with --columns {}=THEIRS)",
                    lowered.join(", "),
                    spec.meaning,
                    spec.name
                ),
            ),
            None => {}
        }
    }
    cols
}

/// A cell in dipwatch's own unit: numbers converted from the mapped unit (shortest exact text), sexagesimal
/// angles passed to the angle parser, and text that cannot be read left as it is for the parser's message.
fn in_our_unit(column: &str, unit: Option<Unit>, text: &str) -> String {
    let sexagesimal = text.contains(':') || text.trim().contains(' ');
    match unit {
        None => text.to_string(),
        Some(Unit::Hms) | Some(Unit::Dms) if sexagesimal => text.to_string(),
        Some(Unit::Hms) => format!("{text} (expected hh:mm:ss in an hms column)"),
        Some(Unit::Dms) => format!("{text} (expected dd:mm:ss in a dms column)"),
        Some(_) if sexagesimal => format!("{text} (sexagesimal in a decimal column)"),
        Some(u) => match text.parse::<f64>() {
            Ok(v) => format!("{}", units::to_canonical(column, u, v)),
            Err(_) => text.to_string(),
        },
    }
}

/// The text of each of our columns in one row, in dipwatch's own units; a two-sided error becomes the larger of
/// its two magnitudes (never the optimistic side).
struct RowCells<'r> {
    record: &'r csv::StringRecord,
    cols: &'r ColumnIndex,
    two_sided: NameMap<String>,
}

impl<'r> RowCells<'r> {
    fn new(record: &'r csv::StringRecord, cols: &'r ColumnIndex) -> RowCells<'r> {
        let raw = |i: usize| record.get(i).unwrap_or("").trim();
        let mut two_sided: NameMap<String> = NameMap::default();
        // Nothing to convert when no column names a unit or a minus side (the usual catalogue).
        let converted = if cols.units.is_empty() && cols.minus.is_empty() {
            &[]
        } else {
            COLUMNS
        };
        for spec in converted {
            let unit = cols.units.get(spec.name).copied();
            let minus = cols.minus.get(spec.name).copied();
            if unit.is_none() && minus.is_none() {
                continue;
            }
            let Some(&i) = cols.index.get(spec.name) else {
                continue;
            };
            let plus = in_our_unit(spec.name, unit, raw(i));
            let value = match minus.map(|j| in_our_unit(spec.name, unit, raw(j))) {
                // Two-sided errors: the larger of the two magnitudes (never the optimistic side).
                Some(m) => match (plus.parse::<f64>(), m.parse::<f64>()) {
                    (Ok(a), Ok(b)) => format!("{}", a.abs().max(b.abs())),
                    (Ok(_), Err(_)) => m,
                    _ => plus,
                },
                None => plus,
            };
            two_sided.insert(spec.name, value);
        }
        RowCells {
            record,
            cols,
            two_sided,
        }
    }

    fn get(&self, name: &str) -> &str {
        if let Some(v) = self.two_sided.get(name) {
            return v.as_str();
        }
        self.cols
            .index
            .get(name)
            .and_then(|&i| self.record.get(i))
            .map(str::trim)
            .unwrap_or("")
    }
}

/// Every numeric column of a row checked against its [`NumberRule`]: the values found (empty optional cells
/// are left out), or false when any was wrong (each problem reported).
fn row_numbers(
    cells: &RowCells<'_>,
    line: Option<usize>,
    problems: &mut Problems,
) -> (NameMap<f64>, bool) {
    let mut values = NameMap::default();
    let mut ok = true;
    for spec in COLUMNS {
        let Some(rule) = &spec.number else {
            continue;
        };
        let raw = cells.get(spec.name);
        if raw.is_empty() && !spec.required {
            continue;
        }
        match parse_finite(raw, rule.expected) {
            Ok(v) if v >= rule.lo && v <= rule.hi => {
                values.insert(spec.name, v);
            }
            Ok(v) => {
                let msg = match spec.name {
                    "t0" => not_a_full_jd(v),
                    "depth_ppt" => format!(
                        "found {v}, expected {}{}",
                        rule.expected,
                        units::depth_hint(v).unwrap_or_default()
                    ),
                    _ => format!("found {v}, expected {}", rule.expected),
                };
                problems.push(line, spec.name, msg);
                ok = false;
            }
            Err(msg) => {
                problems.push(line, spec.name, msg);
                ok = false;
            }
        }
    }
    (values, ok)
}

/// One target from one row, or None with every problem of the row reported.
fn parse_row(
    cells: &RowCells<'_>,
    line: Option<usize>,
    seen: &mut SeenNames,
    problems: &mut Problems,
) -> Option<Target> {
    let (nums, mut ok) = row_numbers(cells, line, problems);
    let name = cells.get("name").to_string();
    if name.is_empty() {
        problems.push(line, "name", "found an empty name; expected text".into());
        ok = false;
    } else if let Some(prev) = seen.insert(name.to_lowercase(), line.unwrap_or(0)) {
        problems.push(
            line,
            "name",
            format!("found {name:?} again (first at line {prev}); expected unique target names"),
        );
        ok = false;
    }
    let ra = parse_ra_deg(cells.get("ra"))
        .map_err(|m| problems.push(line, "ra", m))
        .ok();
    let dec = parse_dec_deg(cells.get("dec"))
        .map_err(|m| problems.push(line, "dec", m))
        .ok();
    let system = TimeSystem::parse(cells.get("time_system"));
    if system.is_none() {
        problems.push(
            line,
            "time_system",
            format!(
                "found {:?}, expected BJD_TDB, HJD_UTC or JD_UTC",
                cells.get("time_system")
            ),
        );
    }
    if let (Some(p), Some(d)) = (nums.get("period_days"), nums.get("t14_hours")) {
        if d / 24.0 >= *p {
            problems.push(
                line,
                "t14_hours",
                format!(
                    "found {d} h, expected a duration shorter than the period ({:.3} h); if the column is in \
                     minutes, map it with t14_hours=THEIRS:min",
                    p * 24.0
                ),
            );
            ok = false;
        }
    }
    let mag_band = cells.get("mag_band");
    if !mag_band.is_empty() && crate::astro::bands::band(mag_band).is_none() {
        problems.push(
            line,
            "mag_band",
            format!("found {mag_band:?}, expected U, B, V, R, I, g, r, i or z"),
        );
        ok = false;
    }
    if nums.get("ecc").is_some_and(|e| *e > 0.0) && !nums.contains_key("omega_deg") {
        problems.push(
            line,
            "omega_deg",
            "missing; expected the star's argument of periastron in degrees with an eccentricity above 0".into(),
        );
        ok = false;
    }
    let num = |k: &str| nums.get(k).copied();
    let required = [
        "t0",
        "t0_sigma_days",
        "period_days",
        "period_sigma_days",
        "t14_hours",
    ];
    if !ok || required.iter().any(|k| num(k).is_none()) {
        return None;
    }
    Some(Target {
        name,
        ra_deg: ra?,
        dec_deg: dec?,
        ephemeris: Ephemeris {
            t0: num("t0")?,
            t0_sigma_days: num("t0_sigma_days")?,
            period_days: num("period_days")?,
            period_sigma_days: num("period_sigma_days")?,
            cov_t0_period_days2: num("t0_period_cov_days2").unwrap_or(0.0),
            system: system?,
        },
        t14_hours: num("t14_hours")?,
        depth_ppt: num("depth_ppt"),
        mag: num("mag"),
        mag_band: Some(cells.get("mag_band"))
            .filter(|b| !b.is_empty())
            .map(str::to_string),
        priority: num("priority").unwrap_or(1.0),
        notes: cells.get("notes").to_string(),
        pm_ra_cosdec_mas_per_yr: num("pm_ra_mas_per_yr").unwrap_or(0.0),
        pm_dec_mas_per_yr: num("pm_dec_mas_per_yr").unwrap_or(0.0),
        coord_epoch_jyear: num("coord_epoch").unwrap_or(2000.0),
        orbit: orbit_of(&num),
        kind: crate::orbit::EventKind::Transit,
    })
}

/// The orbit of a row, when any of its columns is given.
fn orbit_of(num: &dyn Fn(&str) -> Option<f64>) -> Option<crate::orbit::Orbit> {
    let keys = [
        "ecc",
        "omega_deg",
        "ecc_sigma",
        "omega_sigma_deg",
        "inc_deg",
        "t14_occ_hours",
    ];
    if keys.iter().all(|k| num(k).is_none()) {
        return None;
    }
    let c = crate::orbit::Orbit::CIRCULAR;
    Some(crate::orbit::Orbit {
        ecc: num("ecc").unwrap_or(0.0),
        omega_deg: num("omega_deg").unwrap_or(c.omega_deg),
        ecc_sigma: num("ecc_sigma").unwrap_or(0.0),
        omega_sigma_deg: num("omega_sigma_deg").unwrap_or(0.0),
        inc_deg: num("inc_deg").unwrap_or(c.inc_deg),
        t14_occ_hours: num("t14_occ_hours"),
    })
}

/// Parse and validate a targets file.
///
/// Given: `file` label for messages, `text` the file's content, `map` column renames. Returns targets in
/// file order, or every problem found (up to the cap).
pub fn parse_targets(file: &str, text: &str, map: &ColumnMap) -> Result<Vec<Target>, InputError> {
    let CsvInput {
        mut reader,
        headers: lowered,
        header_line,
    } = open_csv(
        file,
        text,
        "a header line and one row per target (see targets.example.csv)",
    )?;
    let mut problems = Problems::default();
    let cols = resolve_columns(&lowered, header_line, map, &mut problems);
    if !problems.list_is_empty() {
        return problems.into_result(file, Vec::new());
    }
    let mut targets = Vec::new();
    // Room for about as many names as the file has lines (a catalogue of 10,000 rows rehashed 14 times).
    let mut seen = SeenNames::with_capacity_and_hasher(
        text.bytes().filter(|&b| b == b'\n').count(),
        foldhash::fast::FixedState::default(),
    );
    // Decimal right ascensions read as degrees with no unit named: if every one is below 24 they are likely hours.
    let mut decimal_ra: Vec<f64> = Vec::new();
    // One record read into again and again (the records iterator makes a new one for every row).
    let mut record = csv::StringRecord::new();
    loop {
        match reader.read_record(&mut record) {
            Ok(true) => {}
            Ok(false) => break,
            Err(e) => {
                let line = e.position().map(|p| p.line() as usize);
                problems.push(line, "", format!("unreadable CSV row: {e}"));
                continue;
            }
        }
        let line = record.position().map(|p| p.line() as usize);
        if record.iter().all(|f| f.trim().is_empty()) {
            continue;
        }
        let cells = RowCells::new(&record, &cols);
        let ra_text = cells.get("ra");
        let unitless_decimal = !cols.units.contains_key("ra") && !ra_text.contains([':', ' ']);
        if let Some(t) = parse_row(&cells, line, &mut seen, &mut problems) {
            if unitless_decimal {
                decimal_ra.push(t.ra_deg);
            }
            targets.push(t);
        }
    }
    if decimal_ra.len() >= 3
        && decimal_ra.len() == targets.len()
        && decimal_ra.iter().all(|&r| r < 24.0)
    {
        problems.push(
            Some(header_line),
            "ra",
            format!(
                "found only values below 24 (largest {:.4}) in a column read as decimal degrees; likely unit: hours. \
                 Map it with ra=THEIRS:hours, or ra=THEIRS:deg if these really are degrees",
                decimal_ra.iter().fold(0.0_f64, |a, &b| a.max(b))
            ),
        );
    }
    if targets.is_empty() && problems.list_is_empty() {
        problems.push(
            None,
            "",
            "found a header but no target rows; expected one row per target".into(),
        );
    }
    problems.into_result(file, targets)
}

#[cfg(test)]
mod tests {
    use super::*;

    const HEADER: &str =
        "Name,RA,Dec,T0,T0_sigma_days,Period_days,Period_sigma_days,T14_hours,Depth_ppt\n";

    #[test]
    fn parses_rows_case_insensitively() {
        let text = format!("{HEADER}Alpha,10:00:00,-20:30:00,2460000.5,0.001,3.5,0.00001,2.5,8\n");
        let t = &parse_targets("t.csv", &text, &ColumnMap::default()).unwrap()[0];
        assert_eq!(t.ra_deg, 150.0);
        assert_eq!(t.dec_deg, -20.5);
        assert_eq!(t.ephemeris.system, TimeSystem::BjdTdb);
        assert_eq!(t.priority, 1.0);
    }

    #[test]
    fn proper_motion_moves_the_target_from_its_coordinate_epoch() {
        let text = format!(
            "{},pm_ra_mas_per_yr,pm_dec_mas_per_yr,coord_epoch\nFast,150,20,2460000.5,0.001,3.5,0.00001,2.5,8,0,10000,2016.0\n",
            HEADER.trim_end()
        );
        let t = &parse_targets("t.csv", &text, &ColumnMap::default()).unwrap()[0];
        assert_eq!(
            (t.pm_dec_mas_per_yr, t.coord_epoch_jyear),
            (10_000.0, 2016.0)
        );
        // 11 Julian years after 2016.0 the declination has grown by 110" (motion along a straight line in space
        // gives atan(mu t) rather than mu t: 1e-5" less here).
        let jd_2027 = crate::constants::J2000_JD + 27.0 * 365.25;
        let (_, dec) = crate::astro::frames::radec_from_vec(&t.icrs_at(jd_2027));
        assert!(
            ((dec.to_degrees() - 20.0) * 3600.0 - 110.0).abs() < 1e-4,
            "{}",
            (dec.to_degrees() - 20.0) * 3600.0
        );
    }

    #[test]
    fn semicolons_bom_and_crlf() {
        let text = format!(
            "\u{feff}{}Alpha;150;-20.5;2460000.5;0.001;3.5;0.00001;2.5;8\r\n",
            HEADER.replace(',', ";").replace('\n', "\r\n")
        );
        assert_eq!(
            parse_targets("t.csv", &text, &ColumnMap::default())
                .unwrap()
                .len(),
            1
        );
    }

    #[test]
    fn column_map_renames() {
        let text =
            "object,ra,dec,tmid,tmid_err,per,per_err,dur\nB,1,2,2460000.5,0.001,3.5,0.00001,2\n";
        let map = ColumnMap::parse("name=object,t0=tmid,t0_sigma_days=tmid_err,period_days=per,period_sigma_days=per_err,t14_hours=dur").unwrap();
        assert_eq!(parse_targets("t.csv", text, &map).unwrap()[0].name, "B");
        assert!(ColumnMap::parse("periodd=x").is_err());
    }

    #[test]
    fn every_bad_row_is_reported_with_line_and_field() {
        let text = format!(
            "{HEADER}A,25:00:00,0,2460000.5,0.001,3.5,0.00001,2.5,8\nB,10,0,2460000.5,-1,3.5,0.00001,2.5,8\nA,10,0,60000.5,0.001,3.5,0.00001,99,8\n"
        );
        let err = parse_targets("t.csv", &text, &ColumnMap::default()).unwrap_err();
        let msg = err.to_string();
        assert!(msg.contains("t.csv:2: ra: found \"25:00:00\""), "{msg}");
        assert!(msg.contains("t.csv:3: t0_sigma_days: found -1"), "{msg}");
        assert!(msg.contains("t.csv:4: t0: found 60000.5"), "{msg}");
        assert!(msg.contains("t.csv:4: t14_hours"), "{msg}");
        assert!(msg.contains("t.csv:4: name: found \"A\" again"), "{msg}");
    }
}
