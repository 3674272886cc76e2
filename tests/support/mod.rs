//! Seeded simulation of right-censored data for the tests and the benchmark: event times by
//! inversion of a family's quantile function, independent uniform censoring.
#![allow(dead_code)]

use tunnelcast::families::Family;
use tunnelcast::input::Record;

/// SplitMix64 (Steele, Lea and Flood, 2014): a small, well-tested generator, enough for
/// simulation with a fixed seed; no dependency needed.
pub struct SplitMix64(u64);

impl SplitMix64 {
    /// Generator with a fixed seed.
    pub fn new(seed: u64) -> Self {
        SplitMix64(seed)
    }

    /// Next 64 random bits.
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform on the open interval (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
}

/// `n` records with event times drawn from `family` at natural `params` (by inversion) and
/// censoring times uniform on (0, `censor_max`); sorted as the input module sorts them.
pub fn simulate(
    family: &dyn Family,
    params: &[f64],
    n: usize,
    censor_max: f64,
    seed: u64,
) -> Vec<Record> {
    let mut rng = SplitMix64::new(seed);
    let mut records: Vec<Record> = (0..n)
        .map(|_| {
            let event_time = family.quantile(params, rng.uniform());
            let censor_time = censor_max * rng.uniform();
            if event_time <= censor_time {
                Record {
                    time: event_time,
                    event: true,
                }
            } else {
                Record {
                    time: censor_time,
                    event: false,
                }
            }
        })
        .collect();
    records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
    records
}
