//! Benchmarks of the planning engine (criterion). Run with `cargo bench --bench engine`.
//!
//! - `plan/1000x3x30`: the engine on 1000 synthetic targets, 3 sites, 30 nights.
//! - `subset/engine` vs `subset/brute_force`: the same job (20 targets, 1 site, 30 nights) through the engine
//!   and through the brute-force 1-minute sampler `dipwatch::testing::oracle::brute_force_site`; the ratio of the two
//!   medians is the speed-up the README reports.
//! - `rows/csv` and `rows/json`: the streamed writers' rows (with the run's per-target text) of every event of
//!   `plan/1000x3x30`, on one thread: the formatting half of the catalogue job without its planning half.

use chrono::NaiveDate;
use criterion::{criterion_group, criterion_main, Criterion};
use dipwatch::engine::plan::{plan, PlanOptions};
use dipwatch::inputs::sites::parse_sites;
use dipwatch::inputs::targets::{parse_targets, ColumnMap};
use dipwatch::testing::oracle::brute_force_site;
use std::hint::black_box;

const SITES: &str = include_str!("sites.bench.toml");

fn options(nights: i64) -> PlanOptions {
    let first = NaiveDate::from_ymd_opt(2027, 3, 1).expect("date");
    PlanOptions {
        first_night: first,
        last_night: first + chrono::Duration::days(nights - 1),
        sigma_k: 1.0,
        baseline_before_min: 30.0,
        baseline_after_min: 30.0,
        min_coverage: 0.0,
        min_in_transit_min: 0.0,
        min_snr: 0.0,
        include_unobservable: false,
        kinds: vec![dipwatch::orbit::EventKind::Transit],
        rv_window_hours: 1.0,
    }
}

fn engine(c: &mut Criterion) {
    let sites = parse_sites("bench", SITES).expect("sites");
    let targets = parse_targets(
        "synthetic",
        &dipwatch::testing::synthetic::catalogue_csv(1000, 2027),
        &ColumnMap::default(),
    )
    .expect("targets");
    let opts = options(30);
    let mut g = c.benchmark_group("plan");
    g.sample_size(10);
    g.bench_function("1000x3x30", |b| {
        b.iter(|| black_box(plan(&sites, &targets, &opts)))
    });
    g.finish();

    let events: Vec<_> = plan(&sites, &targets, &opts)
        .sites
        .into_iter()
        .flat_map(|sp| sp.events)
        .collect();
    let text = dipwatch::outputs::RowText::new(&sites, &targets);
    let mut g = c.benchmark_group("rows");
    g.sample_size(20);
    g.throughput(criterion::Throughput::Elements(events.len() as u64));
    let mut out = Vec::with_capacity(events.len() * 1536);
    g.bench_function("csv", |b| {
        b.iter(|| {
            out.clear();
            dipwatch::outputs::push_event_csv_rows(
                &events,
                (&sites, &targets),
                Some(&text),
                &mut out,
            );
            black_box(out.len())
        })
    });
    g.bench_function("json", |b| {
        b.iter(|| {
            out.clear();
            for e in &events {
                let row = dipwatch::outputs::EventRow::with_text(e, (&sites, &targets), &text);
                dipwatch::outputs::columns::push_event_json_row(&row, &mut out);
            }
            black_box(out.len())
        })
    });
    g.finish();

    let subset = &targets[..20];
    let one_site = &sites[..1];
    let mut g = c.benchmark_group("subset");
    g.sample_size(10);
    g.bench_function("engine", |b| {
        b.iter(|| black_box(plan(one_site, subset, &opts)))
    });
    g.bench_function("brute_force", |b| {
        b.iter(|| black_box(brute_force_site(&one_site[0], subset, &opts)))
    });
    g.finish();
}

criterion_group!(benches, engine);
criterion_main!(benches);
