//! The brute-force references the engine is checked and timed against: every minute sampled with the
//! full-precision pipeline, no frozen track, no root finding, no early rejection. For tests and benchmarks only
//! (about 100 times slower than the engine).

use crate::astro::barycentric::EarthTable;
use crate::astro::frames::{separation_rad, wrap_pi, EarthOrientation};
use crate::astro::sky::sun_moon_at;
use crate::astro::time::{jd_tdb_from_utc, JdUtc};
use crate::engine::plan::{nights_at, Night, PlanOptions};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;

/// Brute-force oracle: the usable time inside `[start, end]` for a target at a site, sampled every minute
/// with the full-precision pipeline (no frozen track, no root finding). For tests only; about 100x slower.
pub fn usable_minutes_oracle(
    site: &Site,
    target: &Target,
    night: &Night,
    start: f64,
    end: f64,
    earth: &EarthTable,
) -> Vec<bool> {
    let icrs = target.icrs_at(0.5 * (start + end));
    let n = ((end - start) * 1440.0).round() as usize;
    (0..=n)
        .map(|i| {
            let t = start + i as f64 / 1440.0;
            let dark = night
                .dark
                .map(|d| t >= d.start && t <= d.end)
                .unwrap_or(false);
            let (alt, az) =
                crate::astro::sky::target_alt_az_deg(&icrs, JdUtc(t), &site.observer, earth);
            let mut ok = dark
                && alt >= site.min_alt_deg
                && alt <= site.max_alt_deg.unwrap_or(90.0)
                && alt >= site.horizon.min_alt_deg(az);
            let eo = EarthOrientation::at(JdUtc(t));
            let vel = earth.earth_bary_vel_au_per_day(jd_tdb_from_utc(JdUtc(t)).0);
            let (ra, dec) = eo.apparent_radec(&icrs, Some(&vel));
            if let Some((e, w)) = site.hour_angle_limits_h {
                let ha_h = wrap_pi(eo.last_rad(site.observer.lon_rad) - ra).to_degrees() / 15.0;
                ok &= ha_h >= e && ha_h <= w;
            }
            if let Some(min_sep) = site.min_moon_sep_deg {
                let sm = sun_moon_at(JdUtc(t), &site.observer);
                ok &= separation_rad(ra, dec, sm.moon_topo.ra_rad, sm.moon_topo.dec_rad)
                    .to_degrees()
                    >= min_sep;
            }
            ok
        })
        .collect()
}

/// The brute-force planner used as the speed reference: every transit of every target at `site` over the
/// nights of `opts`, its whole block sampled every minute with the full-precision pipeline
/// ([`usable_minutes_oracle`]). Returns (target index, epoch, usable in-transit minutes). No tables, no root
/// finding, no early rejection: about as simple as a planner can be.
pub fn brute_force_site(
    site: &Site,
    targets: &[Target],
    opts: &PlanOptions,
) -> Vec<(usize, i64, usize)> {
    let nights = nights_at(site, opts.first_night, opts.last_night);
    let (Some(first), Some(last)) = (nights.first(), nights.last()) else {
        return Vec::new();
    };
    let earth = EarthTable::new(first.window.start - 1.0, last.window.end + 1.0);
    let mut out = Vec::new();
    for (ti, t) in targets.iter().enumerate() {
        let icrs = t.icrs_at(first.window.start);
        let eph = &t.ephemeris;
        for n in eph.epochs_between(first.window.start - 0.02, last.window.end + 0.02) {
            let mid = earth
                .utc_from_system(eph.system, eph.mid_time(n), &icrs, Some(&site.observer))
                .0;
            let Some(night) = nights
                .iter()
                .find(|nt| mid >= nt.window.start && mid < nt.window.end)
            else {
                continue;
            };
            let half = t.half_duration_days();
            let margin = opts.sigma_k * eph.sigma_days(n);
            let start = mid - half - margin - opts.baseline_before_min / 1440.0;
            let end = mid + half + margin + opts.baseline_after_min / 1440.0;
            let ok = usable_minutes_oracle(site, t, night, start, end, &earth);
            let in_transit = ok
                .iter()
                .enumerate()
                .filter(|(i, &u)| u && (start + *i as f64 / 1440.0 - mid).abs() <= half)
                .count();
            if in_transit > 0 {
                out.push((ti, n, in_transit));
            }
        }
    }
    out
}
