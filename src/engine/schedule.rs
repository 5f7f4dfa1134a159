//! Choosing what to observe when transits collide: per-telescope nightly schedules.
//!
//! Per telescope and night the choice is exact: weighted interval scheduling by dynamic programming over
//! blocks sorted by end time (Kleinberg & Tardos, Algorithm Design, 2006, section 6.1), O(n log n), with a
//! changeover gap required between consecutive blocks. Across telescopes and sites each transit (target,
//! epoch) is observed at most once: when several telescopes choose the same transit, the highest-scoring one
//! keeps it and the others are solved again without it, until no transit is chosen twice. Complementary
//! partial events (ingress at one site, egress at another) are the exception: the best such pair among all the
//! telescopes that chose the transit (any number per site) is kept and reported with its combined coverage when
//! it covers more than any single choice; every other telescope is solved again without that transit. The cross-site step is a heuristic (the joint problem is a weighted
//! multi-machine assignment); each telescope-night on its own is optimal.

use crate::astro::crossings::Interval;
use crate::engine::plan::{plan, Event, Plan, PlanOptions, Verdict};
use crate::inputs::sites::Site;
use crate::inputs::targets::Target;
use std::collections::{BTreeMap, HashMap, HashSet};

/// Weights of the score. Documented in the README; all are user settable.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct ScoreWeights {
    /// Weight of the in-transit coverage (0-1).
    pub coverage: f64,
    /// Weight of the verdict value (whole 1, whole-short-baseline 0.8, ingress/egress-only 0.5, middle-only 0.2).
    pub verdict: f64,
    /// Weight of 1/airmass at mid-transit (0-1).
    pub airmass: f64,
    /// Weight of the Moon separation, min(sep, 90 deg)/90 deg (0-1).
    pub moon: f64,
    /// Weight of the timing sigma, min(sigma, 30 min)/30 min (0-1): uncertain ephemerides gain most.
    pub sigma: f64,
    /// Weight of the expected transit SNR, min(SNR, 20)/20 (0-1; 0 where the noise is not known): a depth
    /// measured at SNR 20 is a solid detection (common practice, no source).
    pub snr: f64,
}

impl Default for ScoreWeights {
    fn default() -> Self {
        ScoreWeights {
            coverage: 1.0,
            verdict: 1.0,
            airmass: 0.5,
            moon: 0.25,
            sigma: 0.25,
            snr: 0.5,
        }
    }
}

/// The value of a verdict in the score.
pub fn verdict_value(v: Verdict) -> f64 {
    match v {
        Verdict::Whole | Verdict::WholeWindow => 1.0,
        Verdict::WholeShortBaseline => 0.8,
        Verdict::IngressOnly | Verdict::EgressOnly | Verdict::PartWindow => 0.5,
        Verdict::MiddleOnly => 0.2,
        Verdict::NotObservable => 0.0,
    }
}

/// Score of an event: priority x (w_cov coverage + w_verdict v + w_airmass / X_mid + w_moon min(sep, 90)/90 +
/// w_sigma min(sigma, 30 min)/30 min + w_snr min(SNR, 20)/20).
pub fn score(e: &Event, priority: f64, w: &ScoreWeights) -> f64 {
    let inv_airmass = if e.airmass_mid.is_finite() && e.airmass_mid >= 1.0 {
        1.0 / e.airmass_mid
    } else {
        0.0
    };
    priority
        * (w.coverage * e.coverage
            + w.verdict * verdict_value(e.verdict)
            + w.airmass * inv_airmass
            + w.moon * e.moon_sep_deg.clamp(0.0, 90.0) / 90.0
            + w.sigma * (e.sigma_min / 30.0).clamp(0.0, 1.0)
            + w.snr
                * e.noise
                    .and_then(|n| n.snr)
                    .map_or(0.0, |x| (x / 20.0).clamp(0.0, 1.0)))
}

/// An interval with a value, for the exact solver.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Job {
    /// Start, any unit.
    pub start: f64,
    /// End, same unit.
    pub end: f64,
    /// Value (> 0 to be worth taking).
    pub value: f64,
}

/// Exact weighted interval scheduling: the indices of a maximum-value set of jobs such that each chosen job
/// starts at least `gap` after the previous one ends. Ties are broken towards fewer, earlier jobs, so the
/// result is deterministic.
pub fn best_subset(jobs: &[Job], gap: f64) -> Vec<usize> {
    let mut order: Vec<usize> = (0..jobs.len()).filter(|&i| jobs[i].value > 0.0).collect();
    order.sort_by(|&a, &b| {
        jobs[a]
            .end
            .total_cmp(&jobs[b].end)
            .then(jobs[a].start.total_cmp(&jobs[b].start))
            .then(a.cmp(&b))
    });
    let n = order.len();
    let ends: Vec<f64> = order.iter().map(|&i| jobs[i].end).collect();
    // p[j]: number of jobs (in end order) compatible with job j, i.e. ending at least `gap` before it starts.
    let p: Vec<usize> = order
        .iter()
        .map(|&i| ends.partition_point(|&e| e + gap <= jobs[i].start))
        .collect();
    let mut best = vec![0.0; n + 1];
    for j in 0..n {
        let take = jobs[order[j]].value + best[p[j]];
        best[j + 1] = if take > best[j] + 1e-12 {
            take
        } else {
            best[j]
        };
    }
    let mut chosen = Vec::new();
    let mut j = n;
    while j > 0 {
        let take = jobs[order[j - 1]].value + best[p[j - 1]];
        if take > best[j - 1] + 1e-12 {
            chosen.push(order[j - 1]);
            j = p[j - 1];
        } else {
            j -= 1;
        }
    }
    chosen.reverse();
    chosen
}

/// A telescope's candidate events (from a plan made with that telescope's limits).
#[derive(Debug, Clone)]
pub struct TelescopeEvents {
    /// Site index.
    pub site_index: usize,
    /// Telescope index in the site's list.
    pub telescope_index: usize,
    /// Telescope name.
    pub telescope: String,
    /// Observable events.
    pub events: Vec<Event>,
}

/// One chosen block.
#[derive(Debug, Clone, PartialEq)]
pub struct Chosen {
    /// Index into the telescope list.
    pub telescope_index: usize,
    /// The event.
    pub event: Event,
    /// Its score.
    pub score: f64,
    /// For a complementary pair: the other telescope and the combined coverage of both usable runs.
    pub pair: Option<(usize, f64)>,
}

fn key(e: &Event) -> (usize, i64) {
    (e.target_index, e.epoch)
}

/// Combined coverage of two events of the same transit: the union of their usable runs inside [ingress, egress].
pub fn combined_coverage(a: &Event, b: &Event) -> f64 {
    let transit = Interval {
        start: a.ingress_utc.min(b.ingress_utc),
        end: a.egress_utc.max(b.egress_utc),
    };
    let mut runs: Vec<Interval> = [a.usable, b.usable]
        .into_iter()
        .flatten()
        .filter_map(|u| u.intersect(&transit))
        .collect();
    runs.sort_by(|x, y| x.start.total_cmp(&y.start));
    let mut total = 0.0;
    let mut cur: Option<Interval> = None;
    for r in runs {
        match cur {
            Some(c) if r.start <= c.end => {
                cur = Some(Interval {
                    start: c.start,
                    end: c.end.max(r.end),
                })
            }
            Some(c) => {
                total += c.len_days();
                cur = Some(r);
            }
            None => cur = Some(r),
        }
    }
    total += cur.map(|c| c.len_days()).unwrap_or(0.0);
    (total / transit.len_days()).clamp(0.0, 1.0)
}

/// The candidates of every telescope: the plan's events of each site and telescope (each planned with that
/// telescope's limits and photometry).
pub fn telescope_candidates(
    sites: &[Site],
    targets: &[Target],
    opts: &PlanOptions,
) -> Vec<TelescopeEvents> {
    plan(sites, targets, opts)
        .sites
        .into_iter()
        .map(|sp| TelescopeEvents {
            site_index: sp.site_index,
            telescope_index: sp.telescope_index,
            telescope: sites[sp.site_index].telescopes[sp.telescope_index]
                .name
                .clone(),
            events: sp.events,
        })
        .collect()
}

/// `plan` with each site's events replaced by the scheduled ones (each transit once per site, in start
/// order): what a calendar of the schedule shows.
pub fn keep_scheduled(plan: &mut Plan, chosen: &[Chosen]) {
    for sp in &mut plan.sites {
        sp.events = chosen
            .iter()
            .filter(|c| {
                c.event.site_index == sp.site_index && c.event.telescope_index == sp.telescope_index
            })
            .map(|c| c.event)
            .collect();
        sp.events
            .sort_by(|a, b| a.block_start_utc.total_cmp(&b.block_start_utc));
        sp.events
            .dedup_by(|a, b| a.target_index == b.target_index && a.epoch == b.epoch);
    }
}

/// Schedule every telescope and night.
///
/// Given: candidates per telescope; targets (for priorities); weights; changeover gap in minutes;
/// `allow_repeats` to let several telescopes take the same transit. Returns the chosen blocks sorted by
/// telescope, then start.
pub fn schedule(
    telescopes: &[TelescopeEvents],
    targets: &[Target],
    w: &ScoreWeights,
    changeover_min: f64,
    allow_repeats: bool,
) -> Vec<Chosen> {
    let gap = changeover_min / 1440.0;
    let mut excluded: HashSet<(usize, (usize, i64))> = HashSet::new();
    loop {
        let mut chosen: Vec<Chosen> = Vec::new();
        for (ti, tel) in telescopes.iter().enumerate() {
            let mut nights: BTreeMap<chrono::NaiveDate, Vec<&Event>> = BTreeMap::new();
            for e in tel
                .events
                .iter()
                .filter(|e| e.observable && !excluded.contains(&(ti, key(e))))
            {
                nights.entry(e.night_of).or_default().push(e);
            }
            for evs in nights.values() {
                let jobs: Vec<Job> = evs
                    .iter()
                    .map(|e| Job {
                        start: e.block_start_utc,
                        end: e.block_end_utc,
                        value: score(e, targets[e.target_index].priority, w),
                    })
                    .collect();
                for i in best_subset(&jobs, gap) {
                    chosen.push(Chosen {
                        telescope_index: ti,
                        event: *evs[i],
                        score: jobs[i].value,
                        pair: None,
                    });
                }
            }
        }
        if allow_repeats {
            return finish(chosen);
        }
        let mut by_key: HashMap<(usize, i64), Vec<usize>> = HashMap::new();
        for (i, c) in chosen.iter().enumerate() {
            by_key.entry(key(&c.event)).or_default().push(i);
        }
        let mut new_exclusions = false;
        let mut keys: Vec<_> = by_key.keys().copied().collect();
        keys.sort();
        for k in keys {
            let idx = &by_key[&k];
            if idx.len() < 2 {
                continue;
            }
            let keep = keepers(&chosen, idx, telescopes);
            if let Keep::Pair(ia, ib, c) = keep {
                let (ta, tb) = (chosen[ia].telescope_index, chosen[ib].telescope_index);
                chosen[ia].pair = Some((tb, c));
                chosen[ib].pair = Some((ta, c));
            }
            for &i in idx {
                if !keep.holds(i) {
                    excluded.insert((chosen[i].telescope_index, k));
                    new_exclusions = true;
                }
            }
        }
        if !new_exclusions {
            return finish(chosen);
        }
    }
}

/// Which of several telescopes that chose the same transit keep it.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Keep {
    /// One telescope (index into the chosen list).
    One(usize),
    /// A complementary ingress/egress pair at two sites, with their combined coverage.
    Pair(usize, usize, f64),
}

impl Keep {
    fn holds(self, i: usize) -> bool {
        match self {
            Keep::One(a) => a == i,
            Keep::Pair(a, b, _) => a == i || b == i,
        }
    }
}

/// Settle one transit chosen by the telescopes `idx` (any number, at any number of sites): the best
/// complementary pair (an ingress-only and an egress-only at different sites) when together they cover more of
/// the transit than any single choice; otherwise the best single choice (ties: lower telescope index).
fn keepers(chosen: &[Chosen], idx: &[usize], telescopes: &[TelescopeEvents]) -> Keep {
    let best = *idx
        .iter()
        .max_by(|&&x, &&y| {
            chosen[x]
                .score
                .total_cmp(&chosen[y].score)
                .then(chosen[y].telescope_index.cmp(&chosen[x].telescope_index))
        })
        .expect("non-empty");
    let best_single_cov = idx
        .iter()
        .map(|&i| chosen[i].event.coverage)
        .fold(0.0, f64::max);
    let site = |i: usize| telescopes[chosen[i].telescope_index].site_index;
    let mut pair: Option<(usize, usize, f64)> = None;
    for &a in idx
        .iter()
        .filter(|&&i| chosen[i].event.verdict == Verdict::IngressOnly)
    {
        for &b in idx
            .iter()
            .filter(|&&i| chosen[i].event.verdict == Verdict::EgressOnly)
        {
            if site(a) == site(b) {
                continue;
            }
            let c = combined_coverage(&chosen[a].event, &chosen[b].event);
            let better = match pair {
                None => true,
                Some((pa, pb, pc)) => {
                    let sum = chosen[a].score + chosen[b].score;
                    let psum = chosen[pa].score + chosen[pb].score;
                    c > pc + 1e-9 || ((c - pc).abs() <= 1e-9 && sum > psum + 1e-12)
                }
            };
            if better {
                pair = Some((a, b, c));
            }
        }
    }
    match pair {
        Some((a, b, c)) if c > best_single_cov + 1e-9 => Keep::Pair(a, b, c),
        _ => Keep::One(best),
    }
}

fn finish(mut chosen: Vec<Chosen>) -> Vec<Chosen> {
    chosen.sort_by(|a, b| {
        a.telescope_index
            .cmp(&b.telescope_index)
            .then(a.event.block_start_utc.total_cmp(&b.event.block_start_utc))
    });
    chosen
}

#[cfg(test)]
mod tests {
    use super::*;

    fn job(s: f64, e: f64, v: f64) -> Job {
        Job {
            start: s,
            end: e,
            value: v,
        }
    }

    #[test]
    fn overlapping_pair_takes_the_more_valuable() {
        let jobs = [job(0.0, 3.0, 1.0), job(2.0, 5.0, 2.0)];
        assert_eq!(best_subset(&jobs, 0.0), vec![1]);
    }

    #[test]
    fn chain_where_greedy_by_value_is_wrong() {
        // Greedy by value takes the middle (5) and blocks both neighbours (4 + 4 = 8 > 5).
        let jobs = [job(0.0, 2.0, 4.0), job(1.5, 3.5, 5.0), job(3.0, 5.0, 4.0)];
        assert_eq!(best_subset(&jobs, 0.0), vec![0, 2]);
        // A changeover gap of 1.5 makes the neighbours clash, and the middle wins.
        assert_eq!(best_subset(&jobs, 1.5), vec![1]);
    }
}
