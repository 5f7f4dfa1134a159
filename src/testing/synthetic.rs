//! A deterministic synthetic catalogue of invented transiting planets, for benchmarks and scale tests.
//!
//! Periods are log-uniform in 0.5-30 d, declinations uniform in sin(dec) (uniform on the sky), durations from a
//! circular orbit around a Sun-like star with a random impact parameter, depths 0.5-25 ppt, T0 in early 2025
//! with 0.2-3 min errors and period errors log-uniform in 1e-6 to 1e-4 d. Names are invented (`SYN-000001 b`).

/// SplitMix64 (Steele, Lea & Flood 2014): small, fast, and the same on every platform.
struct SplitMix(u64);

impl SplitMix {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    fn range(&mut self, lo: f64, hi: f64) -> f64 {
        lo + (hi - lo) * self.uniform()
    }
}

/// The catalogue as targets-file CSV text: `n` targets from `seed`.
pub fn catalogue_csv(n: usize, seed: u64) -> String {
    use std::fmt::Write;
    let mut rng = SplitMix(seed);
    let mut out = String::new();
    let _ = writeln!(
        out,
        "# synthetic catalogue: {n} invented targets, seed {seed} (dipwatch::testing::synthetic)"
    );
    out.push_str(
        "name,ra,dec,t0,t0_sigma_days,period_days,period_sigma_days,t14_hours,depth_ppt,priority\n",
    );
    for i in 0..n {
        let ra = rng.range(0.0, 360.0);
        let dec = rng.range(-1.0, 1.0).asin().to_degrees();
        let period = (rng.range(0.5_f64.ln(), 30.0_f64.ln())).exp();
        // Duration of a transit for a Sun-like star: T ~ 13 h (P / 365 d)^(1/3) sqrt(1 - b^2).
        let b: f64 = rng.uniform() * 0.9;
        let t14 = (13.0 * (period / 365.25).powf(1.0 / 3.0) * (1.0 - b * b).sqrt()).max(0.5);
        let t0 = 2_460_676.5 + rng.range(0.0, period);
        let t0_sigma = rng.range(0.2, 3.0) / 1440.0;
        let p_sigma = (rng.range(1e-6_f64.ln(), 1e-4_f64.ln())).exp();
        let depth = rng.range(0.5, 25.0);
        let priority = 1 + (rng.next_u64() % 3);
        let _ = writeln!(
            out,
            "SYN-{:06} b,{ra:.5},{dec:.5},{t0:.6},{t0_sigma:.7},{period:.7},{p_sigma:.3e},{t14:.3},{depth:.2},{priority}",
            i + 1
        );
    }
    out
}
