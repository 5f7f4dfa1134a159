//! One definition per output column of an event: its name and how its value is taken from the event. The CSV
//! header, the CSV rows (written without the general float formatter, for catalogue-scale runs), the JSON keys
//! and values of `plan`, `tonight` and `schedule` all come from [`EVENT_COLUMNS`], so a column cannot be printed
//! two ways.

use super::{floor_to, round};
use crate::astro::civil::{rfc3339_utc, DIGIT_PAIRS, DIGIT_PAIR_WORDS};
use crate::engine::plan::{Event, ReasonSet};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;

/// One event with the inputs it refers to.
#[derive(Debug, Clone, Copy)]
pub struct EventRow<'a> {
    /// The event.
    pub event: &'a Event,
    /// Its site.
    pub site: &'a Site,
    /// Its target.
    pub target: &'a Target,
    /// The run's fields that depend only on the target or the station, already written (see [`RowText`]).
    pub text: Option<&'a RowText>,
}

impl<'a> EventRow<'a> {
    /// The row of `e`, its site and target looked up in the inputs.
    pub fn of(e: &'a Event, sites: &'a [Site], targets: &'a [Target]) -> EventRow<'a> {
        EventRow {
            event: e,
            site: &sites[e.site_index],
            target: &targets[e.target_index],
            text: None,
        }
    }

    /// The row of `e` whose per-target and per-station fields are copied from `text` (made for the same
    /// inputs) instead of being written again.
    pub fn with_text(
        e: &'a Event,
        (sites, targets): (&'a [Site], &'a [Target]),
        text: &'a RowText,
    ) -> EventRow<'a> {
        EventRow {
            text: Some(text),
            ..EventRow::of(e, sites, targets)
        }
    }

    /// Field `k` of this row's target's text ([`TARGET_NAME`] ...), when the row has [`RowText`].
    #[inline(always)]
    fn target_text(&self, k: usize) -> Option<Value<'a>> {
        let text = self.text?;
        let at = text.targets.get(self.event.target_index)?;
        text.field(at, k)
    }

    /// Whether the target's kind is a window (RV extreme, phase window), from [`RowText`] when the row has it.
    #[inline(always)]
    fn is_window(&self) -> bool {
        match self
            .text
            .and_then(|t| t.targets.get(self.event.target_index))
        {
            Some(at) => at.window,
            None => self.target.kind.is_window(),
        }
    }

    /// Field `k` of this row's station's text ([`STATION_SITE`] or [`STATION_TELESCOPE`]), when the row has
    /// [`RowText`].
    #[inline(always)]
    fn station_text(&self, k: usize) -> Option<Value<'a>> {
        let text = self.text?;
        let at = text
            .stations
            .get(self.event.site_index)?
            .get(self.event.telescope_index)?;
        text.field(at, k)
    }
}

/// The fields of a target in [`RowText`], in this order.
const TARGET_NAME: usize = 0;
const TARGET_KIND: usize = 1;
const TARGET_DEPTH: usize = 2;
const TARGET_PRIORITY: usize = 3;
/// The fields of a station in [`RowText`].
const STATION_SITE: usize = 0;
const STATION_TELESCOPE: usize = 1;

/// Where one target's (or station's) fields are in [`RowText`]'s text: field k is `csv[csv_at[k]..csv_at[k +
/// 1]]`, and the same in `json`. A target's fields are next to each other, so a row reads them from one or two
/// cache lines (separate allocations per field cost a cache miss each: rows take targets in no order).
#[derive(Debug, Clone, Copy)]
struct Spans {
    csv_at: [usize; 5],
    json_at: [usize; 5],
    /// The target's kind is a window (RV extreme, phase window), as `Target::kind` says: kept here so that a
    /// row with [`RowText`] does not read its target at all (a cache miss a row, rows taking targets in no
    /// order).
    window: bool,
}

/// The fields of a run's rows that depend only on the target (name, kind, depth, priority) or the station (site,
/// telescope), written once per run for the catalogue-scale writers instead of once per row (about 600
/// instructions a row: the shortest form of the two input numbers, the quoting scans of the texts). Made from
/// the same functions the columns use, so a row with it is written exactly as one without.
#[derive(Debug)]
pub struct RowText {
    /// Every field as CSV (the same in ECSV: text and numbers only), target after target.
    csv: Vec<u8>,
    /// Every field as a JSON value.
    json: Vec<u8>,
    targets: Vec<Spans>,
    /// Per site, per telescope.
    stations: Vec<Vec<Spans>>,
}

impl RowText {
    /// The written fields of every target and station of the inputs.
    pub fn new(sites: &[Site], targets: &[Target]) -> RowText {
        let mut text = RowText {
            csv: Vec::new(),
            json: Vec::new(),
            targets: Vec::with_capacity(targets.len()),
            stations: Vec::with_capacity(sites.len()),
        };
        for t in targets {
            let spans = text.push(&[
                target_name(t),
                target_kind(t),
                target_depth(t),
                target_priority(t),
            ]);
            text.targets.push(Spans {
                window: t.kind.is_window(),
                ..spans
            });
        }
        for s in sites {
            let per_telescope = (0..s.telescopes.len().max(1))
                .map(|k| text.push(&[site_name(s), telescope_name(s, k)]))
                .collect();
            text.stations.push(per_telescope);
        }
        text
    }

    /// Write `values` (at most four) one after another, and say where they are.
    fn push(&mut self, values: &[Value<'_>]) -> Spans {
        let mut spans = Spans {
            csv_at: [self.csv.len(); 5],
            json_at: [self.json.len(); 5],
            window: false,
        };
        for (k, v) in values.iter().enumerate().take(4) {
            push_csv_value(v, &mut self.csv);
            push_json_value(v, &mut self.json);
            spans.csv_at[k + 1] = self.csv.len();
            spans.json_at[k + 1] = self.json.len();
        }
        spans
    }

    /// Field `k` of `at` as a value.
    #[inline(always)]
    fn field(&self, at: &Spans, k: usize) -> Option<Value<'_>> {
        let range =
            |a: &[usize; 5]| a.get(k).copied().unwrap_or(0)..a.get(k + 1).copied().unwrap_or(0);
        Some(Value::Written {
            csv: self.csv.get(range(&at.csv_at))?,
            json: self.json.get(range(&at.json_at))?,
        })
    }
}

fn target_name(t: &Target) -> Value<'_> {
    Value::Text(&t.name)
}

fn target_kind(t: &Target) -> Value<'_> {
    match t.kind.fixed_label() {
        Some(s) => Value::Text(s),
        None => Value::Owned(t.kind.label()),
    }
}

fn target_depth(t: &Target) -> Value<'_> {
    Value::Input(t.depth_ppt)
}

fn target_priority(t: &Target) -> Value<'_> {
    Value::Input(Some(t.priority))
}

fn site_name(s: &Site) -> Value<'_> {
    Value::Text(&s.name)
}

fn telescope_name(s: &Site, k: usize) -> Value<'_> {
    Value::Text(s.telescopes.get(k).map_or("", |t| t.name.as_str()))
}

/// The value of one column, with how it is printed.
#[derive(Debug, Clone, PartialEq)]
pub enum Value<'a> {
    /// Text (quoted in CSV when needed).
    Text(&'a str),
    /// Owned text.
    Owned(String),
    /// An integer.
    Int(i64),
    /// `true`/`false`.
    Bool(bool),
    /// A number with exactly this many decimals in CSV, rounded to them in JSON.
    Fixed(f64, u32),
    /// A fraction someone acts on: rounded down to this many decimals (never shown higher than it is).
    FloorFixed(f64, u32),
    /// A number that may be missing (or not finite): empty in CSV, null in JSON.
    OptFixed(Option<f64>, u32),
    /// A UTC Julian Date as RFC 3339 text with milliseconds.
    Time(f64),
    /// A UTC Julian Date that may be missing.
    OptTime(Option<f64>),
    /// A calendar date, YYYY-MM-DD.
    Date(chrono::NaiveDate),
    /// A number from the inputs, printed as given (shortest form); may be missing.
    Input(Option<f64>),
    /// Reason labels: joined with `;` in CSV, an array in JSON.
    Reasons(ReasonSet),
    /// Missing: empty in CSV, null in JSON.
    Null,
    /// Written already (see [`RowText`]): as a CSV field and as a JSON value.
    Written {
        /// The CSV (and ECSV) field.
        csv: &'a [u8],
        /// The JSON value.
        json: &'a [u8],
    },
}

/// What a column holds, for self-describing formats (ECSV): its datatype, unit and a short description.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Meta {
    /// ECSV datatype: `string`, `int64`, `float64` or `bool`.
    pub datatype: &'static str,
    /// Unit (astropy spelling), if the column has one.
    pub unit: Option<&'static str>,
    /// One line saying what the column holds.
    pub description: &'static str,
}

/// A column: its name (CSV header, JSON key), what it holds, and the function giving its value for a row.
pub struct Column<F> {
    /// Name, as documented in the README.
    pub name: &'static str,
    /// Datatype, unit and description.
    pub meta: Meta,
    /// The value for one row.
    pub value: F,
}

/// How an event column takes its value from an [`EventRow`] (of any lifetime).
pub type EventValue = for<'r, 'a> fn(&'r EventRow<'a>) -> Value<'r>;

/// Defines [`EVENT_COLUMNS`] from its entries, and from the same entries the row writers of the catalogue-scale
/// paths ([`push_event_csv_row`], [`push_event_json_row`]): each column's value written by straight-line code,
/// with no call through the table and no `Value` matched at run time (the match is resolved when each entry's
/// value is inlined). The table and the writers cannot disagree: they are one list; a test also checks them
/// against the table-driven writers ([`push_csv_fields`], [`push_json_object`]).
macro_rules! event_columns {
    ($(Column { name: $name:literal, meta: $meta:expr, value: |$r:ident| $body:expr $(,)? }),* $(,)?) => {
        /// Every column of an event, in output order (documented in the README, "Output fields").
        pub const EVENT_COLUMNS: &[Column<EventValue>] = &[
            $(Column { name: $name, meta: $meta, value: |$r| $body }),*
        ];

        /// Append one event as a CSV line (`ECSV`: booleans as `True`/`False`): the fields of
        /// [`EVENT_COLUMNS`], as [`push_csv_fields`] (or [`push_ecsv_fields`]) writes them, and a line end.
        pub fn push_event_csv_row<const ECSV: bool>(row: &EventRow<'_>, out: &mut Vec<u8>) {
            push_event_csv_row_with::<ECSV>(row, out, &mut [0; ROW_BUFFER_BYTES]);
        }

        /// [`push_event_csv_row`] with a buffer for the row (reused from row to row by the writers of many
        /// rows): the row is written there ([`RowCursor`]) and appended whole; a row that does not fit is
        /// written straight into `out`.
        pub fn push_event_csv_row_with<const ECSV: bool>(
            row: &EventRow<'_>,
            out: &mut Vec<u8>,
            buf: &mut [u8; ROW_BUFFER_BYTES],
        ) {
            let mut cursor = RowCursor::new(buf);
            event_csv_fields::<ECSV, _>(row, &mut cursor);
            match cursor.written() {
                Some(bytes) => out.extend_from_slice(bytes),
                None => event_csv_fields::<ECSV, _>(row, out),
            }
        }

        /// The CSV line of [`push_event_csv_row`], into any [`Sink`].
        #[inline(always)]
        fn event_csv_fields<const ECSV: bool, S: Sink>(row: &EventRow<'_>, out: &mut S) {
            $({
                let $r = row;
                push_csv_value_as::<ECSV, S>(&$body, out);
                out.put(b',');
            })*
            // The comma after the last field becomes the line end.
            out.set_last(b'\n');
        }

        /// Append one event as a compact JSON object, as [`push_json_object`] writes it with
        /// [`json_keys`] of [`EVENT_COLUMNS`].
        pub fn push_event_json_row(row: &EventRow<'_>, out: &mut Vec<u8>) {
            push_event_json_row_with(row, out, &mut [0; ROW_BUFFER_BYTES]);
        }

        /// [`push_event_json_row`] with a buffer for the row, as [`push_event_csv_row_with`].
        pub fn push_event_json_row_with(
            row: &EventRow<'_>,
            out: &mut Vec<u8>,
            buf: &mut [u8; ROW_BUFFER_BYTES],
        ) {
            let mut cursor = RowCursor::new(buf);
            event_json_fields(row, &mut cursor);
            match cursor.written() {
                Some(bytes) => out.extend_from_slice(bytes),
                None => event_json_fields(row, out),
            }
        }

        /// The JSON object of [`push_event_json_row`], into any [`Sink`].
        #[inline(always)]
        fn event_json_fields<S: Sink>(row: &EventRow<'_>, out: &mut S) {
            out.put(b'{');
            $({
                let $r = row;
                out.put_slice(concat!("\"", $name, "\":").as_bytes());
                push_json_value(&$body, out);
                out.put(b',');
            })*
            out.set_last(b'}');
        }
    };
}

event_columns! {
    Column {
        name: "target",
        meta: Meta { datatype: "string", unit: None, description: "target name" },
        value: |r| r.target_text(TARGET_NAME).unwrap_or_else(|| target_name(r.target)),
    },
    Column {
        name: "site",
        meta: Meta { datatype: "string", unit: None, description: "site name" },
        value: |r| r.station_text(STATION_SITE).unwrap_or_else(|| site_name(r.site)),
    },
    Column {
        name: "telescope",
        meta: Meta { datatype: "string", unit: None, description: "telescope at the site (each gets its own row)" },
        value: |r| r
            .station_text(STATION_TELESCOPE)
            .unwrap_or_else(|| telescope_name(r.site, r.event.telescope_index)),
    },
    Column {
        name: "kind",
        meta: Meta { datatype: "string", unit: None, description: "transit, occultation, rv-max, rv-min or phase:A-B" },
        value: |r| r.target_text(TARGET_KIND).unwrap_or_else(|| target_kind(r.target)),
    },
    Column {
        name: "epoch",
        meta: Meta { datatype: "int64", unit: None, description: "epoch number n since the catalogue T0" },
        value: |r| Value::Int(r.event.epoch),
    },
    Column {
        name: "verdict",
        meta: Meta { datatype: "string", unit: None, description: "whole, whole-short-baseline, ingress-only, egress-only, middle-only or not-observable" },
        value: |r| Value::Text(r.event.verdict.label()),
    },
    Column {
        name: "observable",
        meta: Meta { datatype: "bool", unit: None, description: "meets the run's criteria" },
        value: |r| Value::Bool(r.event.observable),
    },
    Column {
        name: "coverage",
        meta: Meta { datatype: "float64", unit: None, description: "fraction of [ingress, egress] usable, rounded down" },
        value: |r| Value::FloorFixed(r.event.coverage, 3),
    },
    Column {
        name: "mid_utc",
        meta: Meta { datatype: "string", unit: None, description: "predicted centre of the event (mid-transit, mid-occultation, the RV extreme, the window's centre), UTC (RFC 3339)" },
        value: |r| Value::Time(r.event.mid_utc),
    },
    Column {
        name: "window_start_utc",
        meta: Meta { datatype: "string", unit: None, description: "start of the window (RV extreme, phase window), UTC; null for transits and occultations" },
        value: |r| Value::OptTime(r.is_window().then_some(r.event.ingress_utc)),
    },
    Column {
        name: "window_end_utc",
        meta: Meta { datatype: "string", unit: None, description: "end of the window, UTC" },
        value: |r| Value::OptTime(r.is_window().then_some(r.event.egress_utc)),
    },
    Column {
        name: "ingress_utc",
        meta: Meta { datatype: "string", unit: None, description: "predicted first contact, UTC" },
        value: |r| Value::OptTime((!r.is_window()).then_some(r.event.ingress_utc)),
    },
    Column {
        name: "egress_utc",
        meta: Meta { datatype: "string", unit: None, description: "predicted fourth contact, UTC" },
        value: |r| Value::OptTime((!r.is_window()).then_some(r.event.egress_utc)),
    },
    Column {
        name: "block_start_utc",
        meta: Meta { datatype: "string", unit: None, description: "start of the block as it can be observed, UTC" },
        value: |r| Value::Time(r.event.block_start_utc),
    },
    Column {
        name: "block_end_utc",
        meta: Meta { datatype: "string", unit: None, description: "end of the block as it can be observed, UTC" },
        value: |r| Value::Time(r.event.block_end_utc),
    },
    Column {
        name: "full_block_start_utc",
        meta: Meta { datatype: "string", unit: None, description: "start of the planned block, UTC" },
        value: |r| Value::Time(r.event.full_block_start_utc),
    },
    Column {
        name: "full_block_end_utc",
        meta: Meta { datatype: "string", unit: None, description: "end of the planned block, UTC" },
        value: |r| Value::Time(r.event.full_block_end_utc),
    },
    Column {
        name: "usable_start_utc",
        meta: Meta { datatype: "string", unit: None, description: "start of the usable run the verdict is based on, UTC" },
        value: |r| Value::OptTime(r.event.usable.map(|u| u.start)),
    },
    Column {
        name: "usable_end_utc",
        meta: Meta { datatype: "string", unit: None, description: "end of the usable run, UTC" },
        value: |r| Value::OptTime(r.event.usable.map(|u| u.end)),
    },
    Column {
        name: "sigma_min",
        meta: Meta { datatype: "float64", unit: Some("min"), description: "timing 1-sigma of this epoch" },
        value: |r| Value::Fixed(r.event.sigma_min, 2),
    },
    Column {
        name: "baseline_before_min",
        meta: Meta { datatype: "float64", unit: Some("min"), description: "usable baseline before ingress - K sigma" },
        value: |r| Value::Fixed(r.event.baseline_before_min, 1),
    },
    Column {
        name: "baseline_after_min",
        meta: Meta { datatype: "float64", unit: Some("min"), description: "usable baseline after egress + K sigma" },
        value: |r| Value::Fixed(r.event.baseline_after_min, 1),
    },
    Column {
        name: "night_of",
        meta: Meta { datatype: "string", unit: None, description: "local date on which the night begins" },
        value: |r| Value::Date(r.event.night_of),
    },
    Column {
        name: "night_start_utc",
        meta: Meta { datatype: "string", unit: None, description: "start of the night's dark interval, UTC" },
        value: |r| Value::OptTime(r.event.night_dark.map(|d| d.start)),
    },
    Column {
        name: "night_end_utc",
        meta: Meta { datatype: "string", unit: None, description: "end of the night's dark interval, UTC" },
        value: |r| Value::OptTime(r.event.night_dark.map(|d| d.end)),
    },
    Column {
        name: "alt_ingress_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "geometric altitude at ingress" },
        value: |r| Value::Fixed(r.event.alt_ingress_deg, 2),
    },
    Column {
        name: "alt_mid_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "geometric altitude at mid-transit" },
        value: |r| Value::Fixed(r.event.alt_mid_deg, 2),
    },
    Column {
        name: "alt_egress_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "geometric altitude at egress" },
        value: |r| Value::Fixed(r.event.alt_egress_deg, 2),
    },
    Column {
        name: "alt_block_start_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "altitude at the block start" },
        value: |r| Value::Fixed(r.event.alt_block_start_deg, 2),
    },
    Column {
        name: "alt_block_end_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "altitude at the block end" },
        value: |r| Value::Fixed(r.event.alt_block_end_deg, 2),
    },
    Column {
        name: "airmass_ingress",
        meta: Meta { datatype: "float64", unit: None, description: "Kasten-Young airmass at ingress" },
        value: |r| airmass(r.event.airmass_ingress),
    },
    Column {
        name: "airmass_mid",
        meta: Meta { datatype: "float64", unit: None, description: "Kasten-Young airmass at mid-transit" },
        value: |r| airmass(r.event.airmass_mid),
    },
    Column {
        name: "airmass_egress",
        meta: Meta { datatype: "float64", unit: None, description: "Kasten-Young airmass at egress" },
        value: |r| airmass(r.event.airmass_egress),
    },
    Column {
        name: "az_mid_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "azimuth at mid-transit, north 0, east 90" },
        value: |r| Value::Fixed(r.event.az_mid_deg, 2),
    },
    Column {
        name: "sun_alt_mid_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "Sun altitude at mid-transit" },
        value: |r| Value::Fixed(r.event.sun_alt_mid_deg, 2),
    },
    Column {
        name: "moon_alt_mid_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "topocentric Moon altitude at mid-transit" },
        value: |r| Value::Fixed(r.event.moon_alt_mid_deg, 2),
    },
    Column {
        name: "moon_sep_deg",
        meta: Meta { datatype: "float64", unit: Some("deg"), description: "Moon separation from the target" },
        value: |r| Value::Fixed(r.event.moon_sep_deg, 2),
    },
    Column {
        name: "moon_illum",
        meta: Meta { datatype: "float64", unit: None, description: "Moon illuminated fraction" },
        value: |r| Value::Fixed(r.event.moon_illum, 3),
    },
    Column {
        name: "meridian_utc",
        meta: Meta { datatype: "string", unit: None, description: "upper meridian crossing inside the block, UTC" },
        value: |r| Value::OptTime(r.event.meridian_utc),
    },
    Column {
        name: "exposure_s",
        meta: Meta { datatype: "float64", unit: Some("s"), description: "exposure time, fixed or suggested (null without a photometric set-up or magnitude)" },
        value: |r| Value::OptFixed(r.event.noise.map(|n| n.exposure_s), 1),
    },
    Column {
        name: "noise_per_exposure_ppt",
        meta: Meta { datatype: "float64", unit: None, description: "white noise of one exposure, parts per thousand" },
        value: |r| Value::OptFixed(r.event.noise.map(|n| n.noise_per_exposure_ppt), 3),
    },
    Column {
        name: "noise_10min_ppt",
        meta: Meta { datatype: "float64", unit: None, description: "noise binned to 10 minutes with beta and floor, parts per thousand" },
        value: |r| Value::OptFixed(r.event.noise.map(|n| n.noise_10min_ppt), 3),
    },
    Column {
        name: "snr",
        meta: Meta { datatype: "float64", unit: None, description: "expected transit signal-to-noise with this event's usable time, rounded down" },
        value: |r| match r.event.noise.and_then(|n| n.snr) {
            Some(x) => Value::FloorFixed(x, 1),
            None => Value::Null,
        },
    },
    Column {
        name: "peak_well_fraction",
        meta: Meta { datatype: "float64", unit: None, description: "peak pixel over full well at that exposure" },
        value: |r| Value::OptFixed(r.event.noise.map(|n| n.peak_well_fraction), 3),
    },
    Column {
        name: "depth_ppt",
        meta: Meta { datatype: "float64", unit: None, description: "transit depth, parts per thousand" },
        value: |r| r.target_text(TARGET_DEPTH).unwrap_or_else(|| target_depth(r.target)),
    },
    Column {
        name: "priority",
        meta: Meta { datatype: "float64", unit: None, description: "priority from the targets file" },
        value: |r| r.target_text(TARGET_PRIORITY).unwrap_or_else(|| target_priority(r.target)),
    },
    Column {
        name: "reasons",
        meta: Meta { datatype: "string", unit: None, description: "limits that cut the block, separated by ;" },
        value: |r| Value::Reasons(r.event.reasons),
    },
}

/// Airmass: three decimals, missing where infinite (target below -6 deg).
fn airmass(x: f64) -> Value<'static> {
    Value::OptFixed(x.is_finite().then_some(x), 3)
}

/// The names of the event columns, in order.
pub fn event_field_names() -> impl Iterator<Item = &'static str> {
    EVENT_COLUMNS.iter().map(|c| c.name)
}

/// The CSV header line of `columns` (no line end).
pub fn push_header<F>(columns: &[Column<F>], out: &mut String) {
    for (i, c) in columns.iter().enumerate() {
        if i > 0 {
            out.push(',');
        }
        out.push_str(c.name);
    }
}

/// Append the CSV fields of one row, comma-separated (no line end); `value` evaluates a column's function on
/// the row.
pub fn push_csv_fields<'v, F>(
    columns: &[Column<F>],
    value: impl Fn(&F) -> Value<'v>,
    out: &mut Vec<u8>,
) {
    for (i, c) in columns.iter().enumerate() {
        if i > 0 {
            out.push(b',');
        }
        push_csv_value(&value(&c.value), out);
    }
}

/// Insert the JSON keys and values of one row into `map`, in column order.
pub fn insert_json<'v, F>(
    columns: &[Column<F>],
    value: impl Fn(&F) -> Value<'v>,
    map: &mut serde_json::Map<String, serde_json::Value>,
) {
    for c in columns {
        map.insert(c.name.to_string(), json_value(&value(&c.value)));
    }
}

/// The ECSV 1.0 header (astropy APE 6, "Enhanced Character Separated Values"): each column's name, datatype,
/// unit and description as YAML under `# `, comma-delimited, then the CSV header line; rows follow as CSV with
/// booleans written `True`/`False` and missing values empty. `astropy.table.Table.read(path)` gives typed columns.
pub fn push_ecsv_header<'m>(
    metas: impl IntoIterator<Item = (&'m str, &'m Meta)>,
    out: &mut String,
) {
    out.push_str("# %ECSV 1.0\n# ---\n# delimiter: ','\n# datatype:\n");
    let mut names = Vec::new();
    for (name, m) in metas {
        out.push_str("# - {name: ");
        out.push_str(name);
        if let Some(u) = m.unit {
            out.push_str(", unit: ");
            out.push_str(u);
        }
        out.push_str(", datatype: ");
        out.push_str(m.datatype);
        out.push_str(", description: '");
        out.push_str(&m.description.replace('\'', "''"));
        out.push_str("'}\n");
        names.push(name);
    }
    out.push_str("# schema: astropy-2.0\n");
    out.push_str(&names.join(","));
    out.push('\n');
}

/// The (name, meta) pairs of `columns`, for [`push_ecsv_header`].
pub fn metas<F>(columns: &[Column<F>]) -> impl Iterator<Item = (&'static str, &Meta)> {
    columns.iter().map(|c| (c.name, &c.meta))
}

/// Append the fields of one row as ECSV: as CSV, with booleans `True`/`False`.
pub fn push_ecsv_fields<'v, F>(
    columns: &[Column<F>],
    value: impl Fn(&F) -> Value<'v>,
    out: &mut Vec<u8>,
) {
    let ecsv_value = |f: &F| match value(f) {
        Value::Bool(b) => Value::Text(if b { "True" } else { "False" }),
        v => v,
    };
    push_csv_fields(columns, ecsv_value, out);
}

/// ECSV of events: the header and one line per event.
pub fn events_ecsv(events: &[Event], sites: &[Site], targets: &[Target]) -> String {
    let mut out = ecsv_event_header().into_bytes();
    push_event_ecsv_rows(events, (sites, targets), None, &mut out);
    into_text(out)
}

/// The text of bytes that the row writers of this module appended. They append only whole UTF-8 texts (input
/// strings and ASCII), so nothing is replaced; invalid bytes, were there any, would become U+FFFD.
pub fn into_text(bytes: Vec<u8>) -> String {
    String::from_utf8(bytes).unwrap_or_else(|e| String::from_utf8_lossy(e.as_bytes()).into_owned())
}

/// The ECSV header of events (see [`push_ecsv_header`]).
pub fn ecsv_event_header() -> String {
    let mut out = String::new();
    push_ecsv_header(metas(EVENT_COLUMNS), &mut out);
    out
}

/// Append one ECSV line per event (with `text`, made for the same inputs, the per-target and per-station fields
/// are copied from it).
pub fn push_event_ecsv_rows(
    events: &[Event],
    (sites, targets): (&[Site], &[Target]),
    text: Option<&RowText>,
    out: &mut Vec<u8>,
) {
    let mut buf = [0; ROW_BUFFER_BYTES];
    for e in events {
        let row = EventRow {
            text,
            ..EventRow::of(e, sites, targets)
        };
        push_event_csv_row_with::<true>(&row, out, &mut buf);
    }
}

/// Append one CSV line per event: the fields of [`EVENT_COLUMNS`] (with `text`, as
/// [`push_event_ecsv_rows`]).
pub fn push_event_csv_rows(
    events: &[Event],
    (sites, targets): (&[Site], &[Target]),
    text: Option<&RowText>,
    out: &mut Vec<u8>,
) {
    let mut buf = [0; ROW_BUFFER_BYTES];
    for e in events {
        let row = EventRow {
            text,
            ..EventRow::of(e, sites, targets)
        };
        push_event_csv_row_with::<false>(&row, out, &mut buf);
    }
}

/// The CSV header line of events, with its line end.
pub fn csv_header() -> String {
    let mut s = String::new();
    push_header(EVENT_COLUMNS, &mut s);
    s.push('\n');
    s
}

/// The JSON object of one event.
pub fn event_json(row: &EventRow<'_>) -> serde_json::Map<String, serde_json::Value> {
    let mut map = serde_json::Map::new();
    insert_json(EVENT_COLUMNS, |f| f(row), &mut map);
    map
}

/// One CSV value. Numbers use fixed decimals without the general float formatter; times and dates allocate
/// nothing.
// Called for every column of every row: inlined into the row loop (1.5% fewer instructions on the catalogue job).
#[inline(always)]
fn push_csv_value(v: &Value<'_>, out: &mut Vec<u8>) {
    push_csv_value_as::<false, _>(v, out);
}

/// [`push_csv_value`], or with `ECSV` the ECSV value (booleans `True`/`False`, as [`push_ecsv_fields`]), into
/// any [`Sink`].
#[inline(always)]
fn push_csv_value_as<const ECSV: bool, S: Sink>(v: &Value<'_>, out: &mut S) {
    match v {
        Value::Text(s) => push_csv_text(s, out),
        Value::Owned(s) => push_csv_text(s, out),
        Value::Int(i) => push_fixed(*i as f64, 0, out),
        Value::Bool(b) => out.put_slice(match (ECSV, *b) {
            (false, true) => "true".as_bytes(),
            (false, false) => "false".as_bytes(),
            (true, true) => "True".as_bytes(),
            (true, false) => "False".as_bytes(),
        }),
        Value::Fixed(x, d) => push_fixed(*x, *d, out),
        Value::FloorFixed(x, d) => push_fixed(floor_to(*x, *d as i32), *d, out),
        Value::OptFixed(x, d) => {
            if let Some(x) = x.filter(|x| x.is_finite()) {
                push_fixed(x, *d, out);
            }
        }
        Value::Time(jd) => push_time(*jd, out),
        Value::OptTime(jd) => {
            if let Some(jd) = jd {
                push_time(*jd, out);
            }
        }
        Value::Date(d) => {
            use chrono::Datelike;
            // 1970-01-01 is day 719,163 of the common era; 9999-12-31 is day 2,932,896 after it.
            let days = i64::from(d.num_days_from_ce()) - 719_163;
            if (0..=2_932_896).contains(&days) {
                out.put_slice(&crate::astro::civil::cached_date_text(days));
                return;
            }
            push_digits(d.year().max(0) as u64, 4, out);
            out.put(b'-');
            push_digits(u64::from(d.month()), 2, out);
            out.put(b'-');
            push_digits(u64::from(d.day()), 2, out);
        }
        Value::Input(x) => {
            if let Some(x) = x {
                push_shortest(*x, out);
            }
        }
        Value::Reasons(rs) => {
            for (k, r) in rs.iter().enumerate() {
                if k > 0 {
                    out.put(b';');
                }
                out.put_slice(r.label().as_bytes());
            }
        }
        Value::Null => {}
        Value::Written { csv, .. } => out.put_slice(csv),
    }
}

/// A UTC Julian Date as RFC 3339 text with milliseconds, as [`rfc3339_utc`] gives it, into any [`Sink`]: the
/// three words of [`crate::astro::civil::rfc3339_utc_words`], or the general formatter before 1970.
// Inlined into the row writers (a dozen timestamps a row): 1.2% fewer instructions on the 1000-target job.
#[inline(always)]
fn push_time<S: Sink>(jd_utc: f64, out: &mut S) {
    match crate::astro::civil::rfc3339_utc_words(jd_utc) {
        Some([a, b, c]) => {
            out.put_word(a);
            out.put_word(b);
            out.put_word(c);
        }
        None => out.put_slice(rfc3339_utc(jd_utc).as_bytes()),
    }
}

/// Where the value writers append bytes: a growing `Vec<u8>`, or a row's fixed buffer ([`RowCursor`]).
pub trait Sink {
    /// Append one byte.
    fn put(&mut self, b: u8);
    /// Append `s`.
    fn put_slice(&mut self, s: &[u8]);
    /// Append the first `n` bytes (at most the word's size) of `text`, little-endian.
    fn put_prefix<W: TextWord>(&mut self, text: W, n: usize);
    /// Append the 8 bytes of `word`, little-endian.
    #[inline(always)]
    fn put_word(&mut self, word: u64) {
        self.put_prefix(word, 8);
    }
    /// Replace the last byte appended (the comma after a row's last field) by `b`.
    fn set_last(&mut self, b: u8);
}

impl Sink for Vec<u8> {
    #[inline(always)]
    fn put(&mut self, b: u8) {
        self.push(b);
    }

    #[inline(always)]
    fn put_slice(&mut self, s: &[u8]) {
        self.extend_from_slice(s);
    }

    #[inline(always)]
    fn put_prefix<W: TextWord>(&mut self, text: W, n: usize) {
        // The whole word, of constant length (inlined, no `memcpy` call), then the bytes past the text cut off.
        let bytes = text.to_le();
        let end = self.len() + n.min(bytes.as_ref().len());
        self.extend_from_slice(bytes.as_ref());
        self.truncate(end);
    }

    #[inline(always)]
    fn set_last(&mut self, b: u8) {
        if let Some(last) = self.last_mut() {
            *last = b;
        }
    }
}

/// The bytes of one row written into a fixed buffer, the position kept in a register: a `Vec<u8>` reads and
/// writes its length and capacity in memory around every append (the compiler cannot tell the bytes written
/// from the vector's own fields), about 7 instructions each, and a row has some 150 appends. A row longer than
/// the buffer (very long names) is marked and written again into the `Vec` ([`push_event_csv_row`]).
pub struct RowCursor<'b> {
    buf: &'b mut [u8; ROW_BUFFER_BYTES],
    at: usize,
    overflow: bool,
}

/// The fixed buffer of [`RowCursor`]: the catalogue's CSV rows are about 450 bytes (530 with the noise columns),
/// its JSON objects about 1,200.
pub const ROW_BUFFER_BYTES: usize = 2048;

impl<'b> RowCursor<'b> {
    /// Write into `buf` from its start.
    pub fn new(buf: &'b mut [u8; ROW_BUFFER_BYTES]) -> RowCursor<'b> {
        RowCursor {
            buf,
            at: 0,
            overflow: false,
        }
    }

    /// The bytes written, or `None` when they did not fit.
    pub fn written(&self) -> Option<&[u8]> {
        if self.overflow {
            None
        } else {
            self.buf.get(..self.at)
        }
    }
}

impl Sink for RowCursor<'_> {
    #[inline(always)]
    fn put(&mut self, b: u8) {
        match self.buf.get_mut(self.at) {
            Some(x) => {
                *x = b;
                self.at += 1;
            }
            None => self.overflow = true,
        }
    }

    #[inline(always)]
    fn put_slice(&mut self, s: &[u8]) {
        match self.buf.get_mut(self.at..self.at + s.len()) {
            Some(d) => {
                d.copy_from_slice(s);
                self.at += s.len();
            }
            None => self.overflow = true,
        }
    }

    #[inline(always)]
    fn put_prefix<W: TextWord>(&mut self, text: W, n: usize) {
        let bytes = text.to_le();
        let bytes = bytes.as_ref();
        match self.buf.get_mut(self.at..self.at + bytes.len()) {
            Some(d) => {
                d.copy_from_slice(bytes);
                self.at += n.min(bytes.len());
            }
            None => self.overflow = true,
        }
    }

    #[inline(always)]
    fn set_last(&mut self, b: u8) {
        if let Some(last) = self.at.checked_sub(1).and_then(|i| self.buf.get_mut(i)) {
            *last = b;
        }
    }
}

/// The key text of each column in a compact JSON object: `"name":`, with the comma before every key but the
/// first. Made once for many rows of [`push_json_object`].
pub fn json_keys<F>(columns: &[Column<F>]) -> Vec<Vec<u8>> {
    columns
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let mut k = if i > 0 { b",".to_vec() } else { Vec::new() };
            push_json_text(c.name, &mut k);
            k.push(b':');
            k
        })
        .collect()
}

/// Append one row as a compact JSON object `{"name":value,...}` without building a value tree: the same
/// values as [`insert_json`] gives (numbers printed with their fixed decimals parse to the same doubles).
/// `keys` is [`json_keys`] of `columns`.
pub fn push_json_object<'v, F>(
    columns: &[Column<F>],
    keys: &[Vec<u8>],
    value: impl Fn(&F) -> Value<'v>,
    out: &mut Vec<u8>,
) {
    out.push(b'{');
    for (c, k) in columns.iter().zip(keys) {
        out.extend_from_slice(k);
        push_json_value(&value(&c.value), out);
    }
    out.push(b'}');
}

/// A JSON string literal (RFC 8259 section 7 escapes).
fn push_json_text<S: Sink>(s: &str, out: &mut S) {
    out.put(b'"');
    // Most text (every column name) needs no escape: copied whole.
    if s.bytes().all(|b| b >= 0x20 && b != b'"' && b != b'\\') {
        out.put_slice(s.as_bytes());
        out.put(b'"');
        return;
    }
    for ch in s.chars() {
        match ch {
            '"' => out.put_slice("\\\"".as_bytes()),
            '\\' => out.put_slice("\\\\".as_bytes()),
            '\n' => out.put_slice("\\n".as_bytes()),
            '\r' => out.put_slice("\\r".as_bytes()),
            '\t' => out.put_slice("\\t".as_bytes()),
            c if (c as u32) < 0x20 => out.put_slice(format!("\\u{:04x}", c as u32).as_bytes()),
            c => {
                let mut utf8 = [0; 4];
                out.put_slice(c.encode_utf8(&mut utf8).as_bytes());
            }
        }
    }
    out.put(b'"');
}

/// One JSON value, as [`json_value`] gives it, written as text. Called for every column of every row: inlined
/// into the row loop (1.3% fewer instructions on the catalogue job).
#[inline(always)]
fn push_json_value<S: Sink>(v: &Value<'_>, out: &mut S) {
    match v {
        Value::Text(s) => push_json_text(s, out),
        Value::Owned(s) => push_json_text(s, out),
        Value::Int(i) => push_fixed(*i as f64, 0, out),
        Value::Bool(b) => out.put_slice(if *b { "true" } else { "false" }.as_bytes()),
        Value::Fixed(x, d) if x.is_finite() => push_fixed(*x, *d, out),
        Value::FloorFixed(x, d) if x.is_finite() => push_fixed(floor_to(*x, *d as i32), *d, out),
        Value::OptFixed(Some(x), d) if x.is_finite() => push_fixed(*x, *d, out),
        Value::Time(jd) | Value::OptTime(Some(jd)) => {
            out.put(b'"');
            push_time(*jd, out);
            out.put(b'"');
        }
        Value::Date(_) => {
            out.put(b'"');
            push_csv_value_as::<false, S>(v, out);
            out.put(b'"');
        }
        // As serde_json prints a double (2.0, not 2), so that both forms parse to the same value.
        Value::Input(Some(x)) if x.is_finite() => {
            let mut number = Vec::new();
            push_json_number(*x, &mut number);
            out.put_slice(&number);
        }
        Value::Reasons(rs) => {
            out.put(b'[');
            for (k, r) in rs.iter().enumerate() {
                if k > 0 {
                    out.put(b',');
                }
                push_json_text(r.label(), out);
            }
            out.put(b']');
        }
        Value::Written { json, .. } => out.put_slice(json),
        _ => out.put_slice("null".as_bytes()),
    }
}

/// A double as serde_json prints it (shortest round-trip digits, `2.0` for two): the shortest text of
/// [`push_shortest`] with `.0` added to whole numbers, where serde_json would not use an exponent; serde_json
/// itself for the rest.
fn push_json_number(x: f64, out: &mut Vec<u8>) {
    if x == 0.0 || (1e-4..1e6).contains(&x.abs()) {
        let from = out.len();
        push_shortest(x, out);
        if !out[from..].contains(&b'.') {
            out.extend_from_slice(".0".as_bytes());
        }
        return;
    }
    match serde_json::Number::from_f64(x) {
        Some(n) => out.extend_from_slice(n.to_string().as_bytes()),
        None => out.extend_from_slice("null".as_bytes()),
    }
}

/// One JSON value: numbers rounded to their decimals, times as RFC 3339 text, missing values null.
fn json_value(v: &Value<'_>) -> serde_json::Value {
    use serde_json::Value as J;
    match v {
        Value::Text(s) => J::from(*s),
        Value::Owned(s) => J::from(s.as_str()),
        Value::Int(i) => J::from(*i),
        Value::Bool(b) => J::from(*b),
        Value::Fixed(x, d) => J::from(round(*x, *d as i32)),
        Value::FloorFixed(x, d) => J::from(floor_to(*x, *d as i32)),
        Value::OptFixed(x, d) => x
            .filter(|x| x.is_finite())
            .map_or(J::Null, |x| J::from(round(x, *d as i32))),
        Value::Time(jd) => J::from(rfc3339_utc(*jd)),
        Value::OptTime(jd) => jd.map_or(J::Null, |jd| J::from(rfc3339_utc(jd))),
        Value::Date(d) => J::from(d.format("%Y-%m-%d").to_string()),
        Value::Input(x) => x.map_or(J::Null, J::from),
        Value::Reasons(rs) => J::from(rs.iter().map(|r| r.label()).collect::<Vec<_>>()),
        Value::Null => J::Null,
        Value::Written { json, .. } => serde_json::from_slice(json).unwrap_or(J::Null),
    }
}

/// A CSV field, quoted when it holds a comma, quote or line break (RFC 4180 section 2).
pub fn push_csv_text<S: Sink>(s: &str, out: &mut S) {
    if s.bytes().any(|b| matches!(b, b',' | b'"' | b'\n' | b'\r')) {
        out.put(b'"');
        out.put_slice(s.replace('"', "\"\"").as_bytes());
        out.put(b'"');
    } else {
        out.put_slice(s.as_bytes());
    }
}

/// 10 to the power of 0-9: the scales of [`push_fixed`]'s decimals.
const DECIMAL_SCALES: [f64; 10] = [1.0, 10.0, 100.0, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9];

/// Append `x` with exactly `decimals` decimals (0-9) without the general float formatter: scale, round half
/// away from zero, print the digits. Equal to `format!("{x:.decimals$}")` except that a negative value which
/// rounds to zero prints as `0.00`, not `-0.00`.
// Inlined into the row writers, where the number of decimals is a constant: 2.5% fewer instructions on the
// 1000-target job.
#[inline(always)]
pub fn push_fixed<S: Sink>(x: f64, decimals: u32, out: &mut S) {
    let d = decimals as usize;
    let y = x * DECIMAL_SCALES.get(d).copied().unwrap_or(f64::INFINITY);
    // Below 1e13 the text (sign, 14 digits at most, the point) fits 16 bytes and is built in a register;
    // everything else takes the wide path.
    if !x.is_finite() || x.abs() >= 1e12 || y.is_nan() || y.abs() >= 1e13 {
        let mut wide = Vec::new();
        push_fixed_wide(x, decimals, &mut wide);
        out.put_slice(&wide);
        return;
    }
    // Half away from zero by truncation (no libm call): |y| < 1e13. Through i64: one conversion instruction,
    // where a conversion to u64 takes a branchy sequence.
    let v = (y.abs() + 0.5) as i64 as u64;
    let negative = y < 0.0 && v > 0;
    // The text built back to front in one word, the first byte lowest (little-endian): each step shifts what
    // is built up and puts the new, earlier characters in the low bytes. Appended whole: a text put together
    // byte by byte in memory and then copied stalls the copy on store forwarding (perf put a fifth of the rows'
    // time on such copies). Up to 5 digits and 5 decimals (the sign, 6 digits, the point: 8 bytes, every value
    // of the catalogue's rows) in a 64-bit word, the rest in a 128-bit one.
    if v < 100_000 && d <= 5 {
        let text = fixed_text::<u64>(v, d, negative);
        out.put_prefix(text.bytes, text.len);
    } else {
        let text = fixed_text::<u128>(v, d, negative);
        out.put_prefix(text.bytes, text.len);
    }
}

/// The text of [`push_fixed`] for the scaled, rounded magnitude `v` with `d` decimals, in one word.
#[inline(always)]
fn fixed_text<W: TextWord>(v: u64, d: usize, negative: bool) -> Built<W> {
    let mut text = Built {
        bytes: W::default(),
        len: 0,
    };
    let mut rest = v;
    for _ in 0..d / 2 {
        text.pair(&mut rest);
    }
    if d % 2 == 1 {
        text.byte(b'0' + (rest % 10) as u8);
        rest /= 10;
    }
    if d > 0 {
        text.byte(b'.');
    }
    // The whole part: at least one digit.
    while rest >= 100 {
        text.pair(&mut rest);
    }
    if rest >= 10 {
        text.pair(&mut rest);
    } else {
        text.byte(b'0' + rest as u8);
    }
    if negative {
        text.byte(b'-');
    }
    text
}

/// A word that holds text for [`Built`]: `u64` (8 bytes) or `u128` (16).
pub trait TextWord:
    Copy
    + Default
    + From<u8>
    + From<u16>
    + std::ops::Shl<u32, Output = Self>
    + std::ops::BitOr<Output = Self>
{
    /// The array of the word's bytes.
    type Bytes: AsRef<[u8]>;
    /// The word's bytes, little-endian (`to_le_bytes`).
    fn to_le(self) -> Self::Bytes;
}

impl TextWord for u64 {
    type Bytes = [u8; 8];
    #[inline(always)]
    fn to_le(self) -> [u8; 8] {
        self.to_le_bytes()
    }
}

impl TextWord for u128 {
    type Bytes = [u8; 16];
    #[inline(always)]
    fn to_le(self) -> [u8; 16] {
        self.to_le_bytes()
    }
}

/// Text in one little-endian word, built back to front (see [`push_fixed`]).
struct Built<W> {
    bytes: W,
    len: usize,
}

impl<W: TextWord> Built<W> {
    /// Put `b` before the text.
    #[inline(always)]
    fn byte(&mut self, b: u8) {
        self.bytes = self.bytes << 8 | W::from(b);
        self.len += 1;
    }

    /// Put the last two digits of `rest` before the text, and drop them from `rest`.
    #[inline(always)]
    fn pair(&mut self, rest: &mut u64) {
        self.bytes = self.bytes << 16 | W::from(DIGIT_PAIR_WORDS[(*rest % 100) as usize]);
        self.len += 2;
        *rest /= 100;
    }
}

/// [`push_fixed`] for texts longer than 16 bytes (|x| scaled by its decimals from 1e13 to 1e17) and values the
/// digits cannot print (infinite, NaN, 1e12 and more), which take the general formatter.
#[cold]
fn push_fixed_wide(x: f64, decimals: u32, out: &mut Vec<u8>) {
    let decimals = decimals as usize;
    let y = x * DECIMAL_SCALES
        .get(decimals)
        .copied()
        .unwrap_or(f64::INFINITY);
    if !x.is_finite() || x.abs() >= 1e12 || y.is_nan() || y.abs() >= 1e17 {
        use std::io::Write;
        let _ = write!(out, "{x:.decimals$}");
        return;
    }
    // Half away from zero by truncation (no libm call): |y| < 1e17, and above 2^52 y is already whole. Through
    // i64 (|y| < 2^63): one conversion instruction, where a conversion to u64 takes a branchy sequence.
    let v = (y.abs() + 0.5) as i64 as u64;
    // Sign, the point and up to 17 digits, built back to front from the digits of the scaled value two at a time
    // (a table of the hundred pairs; division by 100 compiles to a multiplication) into the first 24 bytes, and
    // copied once.
    let mut buf = [b'0'; 48];
    let mut i = 24;
    let mut rest = v;
    let put_pair = |buf: &mut [u8; 48], i: &mut usize, rest: &mut u64| {
        let p = (*rest % 100) as usize * 2;
        *rest /= 100;
        *i -= 2;
        buf[*i..*i + 2].copy_from_slice(&DIGIT_PAIRS[p..p + 2]);
    };
    for _ in 0..decimals / 2 {
        put_pair(&mut buf, &mut i, &mut rest);
    }
    if decimals % 2 == 1 {
        i -= 1;
        buf[i] = b'0' + (rest % 10) as u8;
        rest /= 10;
    }
    if decimals > 0 {
        i -= 1;
        buf[i] = b'.';
    }
    // The whole part: at least one digit.
    while rest >= 100 {
        put_pair(&mut buf, &mut i, &mut rest);
    }
    if rest >= 10 {
        put_pair(&mut buf, &mut i, &mut rest);
    } else {
        i -= 1;
        buf[i] = b'0' + rest as u8;
    }
    if y < 0.0 && v > 0 {
        i -= 1;
        buf[i] = b'-';
    }
    // The text is buf[i..24]: 24 bytes from i are copied (a copy of constant length, inlined, where the text's
    // own length would call `memcpy`: 2% of the catalogue job's time), and the bytes past the text cut off.
    let end = out.len() + (24 - i);
    out.extend_from_slice(&buf[i..i + 24]);
    out.truncate(end);
}

/// Append the decimal digits of `v`, zero-padded to at least `width` (at most 20), in one copy.
fn push_digits<S: Sink>(mut v: u64, width: usize, out: &mut S) {
    let mut digits = [b'0'; 20];
    let mut i = digits.len();
    while v > 0 || digits.len() - i < width {
        i -= 1;
        digits[i] = b'0' + (v % 10) as u8;
        v /= 10;
    }
    out.put_slice(&digits[i..]);
}

/// Append an input number as Rust's shortest round-trip text (`f64`'s `Display`, as `x.to_string()` gives)
/// without the general formatter when `x` has at most 9 decimals: the fewest decimals `k` whose rounded
/// value divides back to exactly `x` (IEEE division is correctly rounded, so that text parses back to `x`
/// and no shorter fixed text does). Other values go through the formatter.
fn push_shortest<S: Sink>(x: f64, out: &mut S) {
    if x.is_finite() && x.abs() < 1e6 {
        let mut scale = 1.0_f64;
        for k in 0..=9u32 {
            // `round` by truncation (a library call in portable builds): |x scale| < 1e15 here. Where it differs
            // from `round` (just below a half), the quotient cannot equal `x` either, so the decimals chosen are
            // the same.
            let y = x * scale;
            let rounded = ((y.abs() + 0.5) as i64 as f64).copysign(y);
            if rounded / scale == x {
                // `push_fixed` drops the sign of a zero; `Display` keeps it.
                if x == 0.0 && x.is_sign_negative() {
                    out.put(b'-');
                }
                push_fixed(x, k, out);
                return;
            }
            scale *= 10.0;
        }
    }
    out.put_slice(x.to_string().as_bytes());
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The straight-line row writers made from the column list write what the table-driven writers write, for
    /// planned events of the example files (observable or not, so with missing values) and for hand-made ones
    /// (noise, reasons, an infinite airmass, a window kind, text that CSV must quote).
    #[test]
    fn generated_row_writers_match_the_table() {
        use crate::engine::plan::{plan, PlanOptions, Reason};
        use crate::inputs::targets::ColumnMap;
        let sites = crate::inputs::sites::parse_sites(
            "sites.example.toml",
            include_str!("../../sites.example.toml"),
        )
        .unwrap();
        let mut targets = crate::inputs::targets::parse_targets(
            "targets.example.csv",
            include_str!("../../targets.example.csv"),
            &ColumnMap::default(),
        )
        .unwrap();
        let opts = PlanOptions {
            first_night: "2027-03-01".parse().unwrap(),
            last_night: "2027-03-06".parse().unwrap(),
            sigma_k: 1.0,
            baseline_before_min: 30.0,
            baseline_after_min: 30.0,
            min_coverage: 0.0,
            min_in_transit_min: crate::engine::plan::DEFAULT_MIN_IN_TRANSIT_MIN,
            min_snr: 0.0,
            include_unobservable: true,
            kinds: vec![crate::orbit::EventKind::Transit],
            rv_window_hours: 1.0,
        };
        let mut events: Vec<Event> = plan(&sites, &targets, &opts)
            .sites
            .into_iter()
            .flat_map(|sp| sp.events)
            .collect();
        assert!(events.len() > 20, "{} events", events.len());
        let mut odd = crate::engine::plan::tests_support::sample_event();
        odd.airmass_ingress = f64::INFINITY;
        odd.meridian_utc = Some(2_461_000.61);
        odd.reasons = [Reason::Daylight, Reason::MoonTooClose]
            .into_iter()
            .collect();
        odd.noise = Some(crate::engine::noise::EventNoise {
            exposure_s: 45.0,
            noise_per_exposure_ppt: 1.234_5,
            noise_10min_ppt: 0.456,
            snr: Some(12.99),
            peak_well_fraction: 0.5,
        });
        targets[0].name = "a \"quoted\", name".to_string();
        targets[0].depth_ppt = None;
        events.push(odd);
        let mut window = odd;
        window.target_index = 1;
        window.observable = false;
        window.noise = None;
        targets[1].kind = crate::orbit::EventKind::RvMax;
        events.push(window);
        // A row longer than the row buffer (a name of 3,000 bytes, quoted in CSV) is written straight into the
        // output instead.
        let mut long = odd;
        long.target_index = 2;
        targets[2].name = "a long, long name ".repeat(170);
        events.push(long);
        let keys = json_keys(EVENT_COLUMNS);
        // The per-run text of the catalogue-scale path must not change a byte either.
        let text = RowText::new(&sites, &targets);
        for e in &events {
            let row = EventRow::of(e, &sites, &targets);
            let rows = [row, EventRow::with_text(e, (&sites, &targets), &text)];
            for fast_row in rows {
                for ecsv in [false, true] {
                    let (mut fast, mut table) = (Vec::new(), Vec::new());
                    if ecsv {
                        push_event_csv_row::<true>(&fast_row, &mut fast);
                        push_ecsv_fields(EVENT_COLUMNS, |f| f(&row), &mut table);
                    } else {
                        push_event_csv_row::<false>(&fast_row, &mut fast);
                        push_csv_fields(EVENT_COLUMNS, |f| f(&row), &mut table);
                    }
                    table.push(b'\n');
                    assert_eq!(into_text(fast), into_text(table));
                }
                let (mut fast, mut table) = (Vec::new(), Vec::new());
                push_event_json_row(&fast_row, &mut fast);
                push_json_object(EVENT_COLUMNS, &keys, |f| f(&row), &mut table);
                assert_eq!(into_text(fast), into_text(table));
                // The value tree (`plan --format json` without streaming) too.
                assert_eq!(event_json(&fast_row), event_json(&row));
            }
        }
    }

    #[test]
    fn json_text_escapes_like_serde() {
        for t in [
            "plain",
            "quote \" and \\ back",
            "line\nbreak\ttab",
            "ctrl \u{1} \u{1f}",
            "Kestrel Moor \u{e9}",
        ] {
            let mut s = Vec::new();
            push_json_text(t, &mut s);
            let s = into_text(s);
            let back: String = serde_json::from_str(&s).unwrap();
            assert_eq!(back, t);
        }
    }

    #[test]
    fn dates_match_chrono() {
        let day = |y, m, d| chrono::NaiveDate::from_ymd_opt(y, m, d).unwrap();
        let spans = [
            (day(1, 1, 1), day(9999, 12, 31), 97),
            (day(1968, 1, 1), day(1972, 12, 31), 1),
            (day(9998, 1, 1), day(9999, 12, 31), 1),
        ];
        for (mut d, last, step) in spans {
            while d <= last {
                let mut s = Vec::new();
                push_csv_value(&Value::Date(d), &mut s);
                assert_eq!(into_text(s), d.format("%Y-%m-%d").to_string());
                d += chrono::Duration::days(step);
            }
        }
    }

    #[test]
    fn shortest_matches_display() {
        let mut rng = 0x2545_f491_4f6c_dd1d_u64;
        let mut next = || {
            rng ^= rng << 13;
            rng ^= rng >> 7;
            rng ^= rng << 17;
            rng
        };
        let mut cases = vec![
            0.0, -0.0, 1.0, 2.0, 0.1, 0.2, 0.3, 1.5, 12.25, 0.000_123, 999_999.5, 1e-9, 3e-10,
        ];
        for _ in 0..20_000 {
            let r = next();
            // Depths and priorities as typed (few decimals), and arbitrary doubles.
            let decimals = (r % 7) as i32;
            let typed = ((r >> 8) % 1_000_000) as f64 / 10f64.powi(decimals);
            cases.push(typed);
            cases.push(-typed);
            cases.push(f64::from_bits(next() >> 2));
            cases.push((next() % 10_000_000) as f64 * 1e-7 * 1.000_000_1);
        }
        for x in cases {
            let mut s = Vec::new();
            push_shortest(x, &mut s);
            let s = into_text(s);
            assert_eq!(s, x.to_string(), "{x:e}");
        }
    }

    proptest::proptest! {
        /// Input numbers print in JSON exactly as serde_json prints them, over the magnitudes inputs take.
        #[test]
        fn json_numbers_are_serde_jsons(
            m in -1_000_000_000i64..1_000_000_000,
            k in 0i32..12,
            raw in proptest::num::f64::NORMAL,
        ) {
            for x in [m as f64 / 10f64.powi(k), raw, (m as f64).sqrt(), -0.0, 0.0] {
                if let Some(n) = serde_json::Number::from_f64(x) {
                    let mut s = Vec::new();
                    push_json_number(x, &mut s);
            let s = into_text(s);
                    proptest::prop_assert_eq!(s, n.to_string(), "{}", x);
                }
            }
        }

        /// Column names and texts come out as serde_json writes them.
        #[test]
        fn json_text_is_serde_jsons(t in "\\PC{0,12}|[ -~]{0,20}") {
            let mut s = Vec::new();
            push_json_text(&t, &mut s);
            let s = into_text(s);
            proptest::prop_assert_eq!(s, serde_json::to_string(&t).unwrap_or_default());
        }

        /// Away from ties, the fixed text is the formatter's, for every decimal count it serves.
        #[test]
        fn fixed_text_is_the_formatters_away_from_ties(x in -2.0e6f64..2.0e6, d in 0u32..=9) {
            let y = (x * 10f64.powi(d as i32)).abs();
            proptest::prop_assume!((y.fract() - 0.5).abs() > 1e-6 && y < 1e15);
            let mut s = Vec::new();
            push_fixed(x, d, &mut s);
            let s = into_text(s);
            let mut want = format!("{x:.prec$}", prec = d as usize);
            if want.starts_with('-') && want[1..].bytes().all(|b| b == b'0' || b == b'.') {
                want.remove(0);
            }
            proptest::prop_assert_eq!(s, want);
        }
    }

    /// A timestamp is chrono's RFC 3339 text into either sink, from its three words after 1970 and from the
    /// general formatter before.
    #[test]
    fn timestamps_are_chronos_text_in_both_sinks() {
        for jd in [
            2_415_020.0,
            2_440_587.499_999,
            2_440_587.5,
            2_461_400.123_456_7,
            2_470_000.999_999_9,
        ] {
            let mut vec = Vec::new();
            push_time(jd, &mut vec);
            let mut buf = [0; ROW_BUFFER_BYTES];
            let mut cursor = RowCursor::new(&mut buf);
            push_time(jd, &mut cursor);
            assert_eq!(into_text(vec), rfc3339_utc(jd), "jd {jd}");
            assert_eq!(
                cursor.written(),
                Some(rfc3339_utc(jd).as_bytes()),
                "jd {jd}"
            );
        }
    }

    /// The text built in one register is the wide path's (the digits written in memory, used beyond 16
    /// bytes) byte for byte, ties and negative zeros included, on both sides of the switch between them.
    #[test]
    fn register_text_is_the_wide_paths() {
        let mut checked = 0;
        for d in 0..=9u32 {
            for k in 0..4000i64 {
                // Eighths (ties at up to three decimals), thirds, values near the 1e13 switch, tiny negatives.
                let scale = 10f64.powi(d as i32);
                for x in [
                    k as f64 / 8.0 - 250.0,
                    (k - 2000) as f64 / 3.0 * 1.000_001,
                    (1e13 / scale) * (0.999 + k as f64 * 5e-7),
                    -(1e13 / scale) * (0.9995 + k as f64 * 2.5e-7),
                    -(k as f64) * 1e-12,
                ] {
                    let (mut fast, mut wide) = (Vec::new(), Vec::new());
                    push_fixed(x, d, &mut fast);
                    push_fixed_wide(x, d, &mut wide);
                    assert_eq!(into_text(fast), into_text(wide), "{x:e} with {d} decimals");
                    checked += 1;
                }
            }
        }
        assert_eq!(checked, 10 * 4000 * 5);
    }

    #[test]
    fn fixed_decimals_match_the_formatter() {
        for &x in &[
            0.0,
            1.0,
            0.851,
            12.345_6,
            -3.2049,
            1440.0,
            99.995,
            0.0005,
            -0.5,
            2_460_000.123_456,
        ] {
            for d in 0..4u32 {
                let mut s = Vec::new();
                push_fixed(x, d, &mut s);
                let s = into_text(s);
                let want = format!("{x:.prec$}", prec = d as usize);
                // Ties may round differently (half away from zero vs the formatter's exact decimal); allow that.
                let close = (s.parse::<f64>().unwrap() - want.parse::<f64>().unwrap()).abs()
                    <= 10f64.powi(-(d as i32)) + 1e-12;
                assert!(s == want || close, "{x} {d}: {s} vs {want}");
            }
        }
    }
}
