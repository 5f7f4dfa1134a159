//! Print a deterministic synthetic catalogue of invented targets (see `dipwatch::testing::synthetic`).
//!
//! Usage: `cargo run --release --example synthetic_catalogue -- N [SEED] > catalogue.csv`

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let n: usize = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(10_000);
    let seed: u64 = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(2027);
    print!("{}", dipwatch::testing::synthetic::catalogue_csv(n, seed));
}
