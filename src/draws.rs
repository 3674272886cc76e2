//! Uncertainty draws of a tunnel table, for probabilistic sensitivity analysis.
//!
//! Parameters are drawn from the multivariate normal approximation of the estimates, on the
//! scale they were estimated on (logs of positive parameters), with the fit's covariance;
//! each draw is transformed back to natural parameters and turned into a tunnel table by the
//! same curve builder as the point estimate, so adjustments apply to every draw alike. The
//! optional nonparametric bootstrap resamples subjects and refits instead.
//!
//! Reproducibility: one generator ([`GENERATOR`]) seeded from `--seed`; every random number
//! is drawn sequentially before any parallel work, so a given seed and tool version give the
//! same draws, and the same bytes, whatever the number of threads.

use crate::curve::Curve;
use crate::discretise::{tunnel_table, TunnelTable};
use crate::error::{Error, Result};
use crate::families::Family;
use crate::fit::{fit_family, FamilyFit, FitData};
use crate::input::Record;
use crate::numeric::{cholesky, normal_quantile};
use crate::units::Duration;
use rand_chacha::rand_core::{Rng, SeedableRng};
use rand_chacha::ChaCha20Rng;
use rayon::prelude::*;

/// The random number generator, as written into output files.
pub const GENERATOR: &str = "ChaCha20 (rand_chacha 0.10, seed_from_u64); standard normal \
z = inverse normal CDF of (u + 0.5)/2^53, u = top 53 bits of one 64-bit output";

/// Draws handled between two checks for an interruption and two progress updates.
pub const CHUNK: usize = 64;

/// A stream of standard normal variates from the seeded generator (see [`GENERATOR`]).
///
/// Inversion of the normal CDF is used rather than a rejection method so the stream is
/// defined by this file alone: one 64-bit output per variate, always.
pub struct NormalStream {
    rng: ChaCha20Rng,
}

impl NormalStream {
    /// A stream started from `seed`.
    pub fn new(seed: u64) -> Self {
        NormalStream {
            rng: ChaCha20Rng::seed_from_u64(seed),
        }
    }

    /// The next standard normal variate.
    pub fn next_normal(&mut self) -> f64 {
        // (u + 0.5)/2^53 lies strictly inside (0, 1), so the quantile is always finite (|z| < 8.3).
        let u = (self.rng.next_u64() >> 11) as f64;
        normal_quantile((u + 0.5) * (1.0 / 9_007_199_254_740_992.0))
    }

    /// The next 64-bit output, for seeding sub-streams.
    pub fn next_u64(&mut self) -> u64 {
        self.rng.next_u64()
    }
}

/// A uniform index in `0..n` (n ≥ 1) from `rng`, by rejection so that every index is equally likely.
fn uniform_index(rng: &mut ChaCha20Rng, n: u64) -> u64 {
    // Largest multiple of n that fits in 2^64; values at or above it are redrawn.
    let limit = u64::MAX - (u64::MAX % n + 1) % n;
    loop {
        let u = rng.next_u64();
        if u <= limit {
            return u % n;
        }
    }
}

/// The multivariate normal approximation of one fit on the estimation scale.
#[derive(Clone)]
pub struct Sampler {
    /// Family of the fit.
    pub family: &'static dyn Family,
    /// Estimates (estimation scale), the mean of the draws.
    pub mean: Vec<f64>,
    /// Lower Cholesky factor L of the covariance (Σ = L·Lᵀ).
    pub factor: Vec<Vec<f64>>,
}

impl std::fmt::Debug for Sampler {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Sampler")
            .field("family", &self.family.name())
            .field("mean", &self.mean)
            .field("factor", &self.factor)
            .finish()
    }
}

impl Sampler {
    /// The sampler of a fit; the error names the family and says why draws are impossible
    /// (no covariance, a covariance of the wrong size or names, or one not positive definite).
    pub fn from_fit(
        family: &'static dyn Family,
        fit: &FamilyFit,
    ) -> std::result::Result<Sampler, String> {
        let name = family.name();
        let Some(cov) = &fit.covariance else {
            if let Some(note) = &fit.note {
                return Err(format!(
                    "family {name} has no covariance in the fit file, so its parameters cannot be drawn: {note}"
                ));
            }
            return Err(format!(
                "family {name} has no covariance in the fit file (its information matrix was \
                 not positive definite), so its parameters cannot be drawn; choose another \
                 family or use --bootstrap"
            ));
        };
        let k = family.estimation_names().len();
        let names_match = cov.names.len() == k
            && cov
                .names
                .iter()
                .zip(family.estimation_names())
                .all(|(a, b)| a == b);
        if !names_match {
            return Err(format!(
                "family {name}: the covariance is over ({}), expected ({})",
                cov.names.join(", "),
                family.estimation_names().join(", ")
            ));
        }
        if cov.scale != "estimation" {
            return Err(format!(
                "family {name}: the covariance is on the \"{}\" scale, expected \"estimation\"",
                cov.scale
            ));
        }
        if fit.estimates.len() != k {
            return Err(format!(
                "family {name}: expected {k} estimates and a {k}×{k} covariance"
            ));
        }
        Sampler::from_covariance(
            family,
            &format!("family {name}"),
            &fit.estimates,
            &cov.matrix,
        )
    }

    /// The sampler of estimates `mean` with covariance `matrix` (estimation scale), e.g. all
    /// the parameters of a joint model across arms; `what` names the model in errors.
    pub fn from_covariance(
        family: &'static dyn Family,
        what: &str,
        mean: &[f64],
        matrix: &[Vec<f64>],
    ) -> std::result::Result<Sampler, String> {
        let k = mean.len();
        let square = matrix.len() == k && matrix.iter().all(|r| r.len() == k);
        if !square {
            return Err(format!(
                "{what}: expected {k} estimates and a {k}×{k} covariance"
            ));
        }
        if mean.iter().any(|x| !x.is_finite()) {
            return Err(format!("{what}: the estimates are not all finite"));
        }
        let symmetric = (0..k).all(|i| {
            (0..i).all(|j| {
                let (a, b) = (matrix[i][j], matrix[j][i]);
                (a - b).abs() <= 1e-10 * a.abs().max(b.abs()).max(f64::MIN_POSITIVE)
            })
        });
        let factor = symmetric.then(|| cholesky(matrix)).flatten();
        let Some(factor) = factor else {
            return Err(format!(
                "{what}: the covariance is not symmetric positive definite, so \
                 parameters cannot be drawn from it"
            ));
        };
        Ok(Sampler {
            family,
            mean: mean.to_vec(),
            factor,
        })
    }

    /// `n` draws on the estimation scale, θ = mean + L·z with z standard normal, drawn in order.
    pub fn draw(&self, n: usize, seed: u64) -> Vec<Vec<f64>> {
        let k = self.mean.len();
        let mut stream = NormalStream::new(seed);
        let mut z = vec![0.0; k];
        (0..n)
            .map(|_| {
                for zi in z.iter_mut() {
                    *zi = stream.next_normal();
                }
                (0..k)
                    .map(|i| self.mean[i] + (0..=i).map(|j| self.factor[i][j] * z[j]).sum::<f64>())
                    .collect()
            })
            .collect()
    }

    /// `n` draws of the natural parameters (the estimation-scale draws transformed back).
    pub fn draw_natural(&self, n: usize, seed: u64) -> Vec<Vec<f64>> {
        self.draw(n, seed)
            .iter()
            .map(|theta| self.family.to_natural(theta))
            .collect()
    }
}

/// Builds the curve of one set of natural parameters, with whatever adjustments the command
/// applies; the point estimate and every draw go through the same builder.
pub type CurveBuilder<'a> =
    dyn Fn(&[f64]) -> std::result::Result<Box<dyn Curve>, String> + Sync + 'a;

/// Hooks a long run calls between chunks: `stop` asks whether to give up (an interruption),
/// `advance` reports finished items (a progress bar).
pub struct Control<'a> {
    /// Returns the error to stop with, if the run should stop now.
    pub stop: &'a (dyn Fn() -> Option<Error> + Sync),
    /// Called with the number of items just finished.
    pub advance: &'a (dyn Fn(u64) + Sync),
}

impl Control<'_> {
    /// No interruption, no progress.
    pub fn none() -> Control<'static> {
        Control {
            stop: &|| None,
            advance: &|_| {},
        }
    }
}

/// Computes the tunnel table of every parameter set, [`CHUNK`] draws at a time (each chunk in
/// parallel), and hands each chunk's tables in draw order to `sink` with the 0-based index of
/// its first draw. Checks `control.stop` between chunks.
pub fn tables_in_chunks(
    params: &[Vec<f64>],
    build: &CurveBuilder<'_>,
    cycle: Duration,
    count: usize,
    control: &Control<'_>,
    mut sink: impl FnMut(usize, Vec<TunnelTable>) -> Result<()>,
) -> Result<()> {
    for (c, chunk) in params.chunks(CHUNK).enumerate() {
        if let Some(e) = (control.stop)() {
            return Err(e);
        }
        let first = c * CHUNK;
        let tables = chunk
            .par_iter()
            .enumerate()
            .map(|(i, p)| draw_table(build, p, first + i, (cycle, count)))
            .collect::<Result<Vec<_>>>()?;
        sink(first, tables)?;
        (control.advance)(chunk.len() as u64);
    }
    Ok(())
}

/// The tunnel table of draw `index` (0-based), whose natural parameters are `p`; an error
/// building its curve names the draw.
fn draw_table(
    build: &CurveBuilder<'_>,
    p: &[f64],
    index: usize,
    (cycle, count): (Duration, usize),
) -> Result<TunnelTable> {
    let curve = build(p).map_err(|e| Error::Computation(format!("draw {}: {e}", index + 1)))?;
    Ok(tunnel_table(curve.as_ref(), cycle, count))
}

/// Computes the tables of groups of `groups.0` consecutive draws in worker threads (as many as
/// rayon's pool has), each taking the next group as soon as it is free and turning its tables
/// at once into a value with `per_group(0-based index of the group's first draw, tables)`
/// (e.g. their bytes in a file), so computing and formatting share one pass over the data.
/// `sink` gets every group's value, in draw order, on the calling thread while the workers go
/// on (for a file, the calling thread writes while they format). At most
/// `groups.1` groups are computed but not yet sunk, so memory stays bounded. `sink` gets the
/// 0-based index of the group's first draw. Checks `control.stop` between groups.
pub fn groups_streamed<T: Send>(
    params: &[Vec<f64>],
    groups: (usize, usize),
    build: &CurveBuilder<'_>,
    (cycle, count): (Duration, usize),
    control: &Control<'_>,
    per_group: impl Fn(usize, Vec<TunnelTable>) -> Result<T> + Sync,
    mut sink: impl FnMut(usize, T) -> Result<()>,
) -> Result<()> {
    use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
    use std::sync::{mpsc, Mutex};
    let group = groups.0.max(1);
    let total = params.len().div_ceil(group);
    let workers = rayon::current_num_threads().clamp(1, total.max(1));
    let compute = |g: usize| -> Result<T> {
        let start = g * group;
        let tables = params[start..(start + group).min(params.len())]
            .iter()
            .enumerate()
            .map(|(i, p)| draw_table(build, p, start + i, (cycle, count)))
            .collect::<Result<Vec<_>>>()?;
        per_group(start, tables)
    };
    // A worker needs a permit to start a group; the calling thread gives one back each time
    // it has sunk a group, which bounds the groups in flight.
    let (permit_back, permits) = mpsc::channel::<()>();
    for _ in 0..groups.1.max(workers) {
        let _ = permit_back.send(());
    }
    let permits = Mutex::new(permits);
    let next = AtomicUsize::new(0);
    let stopped = AtomicBool::new(false);
    let (done, results) = mpsc::channel::<(usize, Result<T>)>();
    std::thread::scope(|scope| {
        for _ in 0..workers {
            let done = done.clone();
            let (permits, next, stopped, compute) = (&permits, &next, &stopped, &compute);
            scope.spawn(move || loop {
                let permit = permits.lock().map(|p| p.recv().is_ok()).unwrap_or(false);
                if !permit || stopped.load(Ordering::Relaxed) {
                    break;
                }
                let g = next.fetch_add(1, Ordering::Relaxed);
                if g >= total || done.send((g, compute(g))).is_err() {
                    break;
                }
            });
        }
        drop(done);
        let mut waiting = std::collections::BTreeMap::new();
        let mut sunk = 0;
        let outcome = (|| -> Result<()> {
            while sunk < total {
                if let Some(e) = (control.stop)() {
                    return Err(e);
                }
                let (g, value) = results
                    .recv()
                    .map_err(|_| Error::Computation("a worker thread stopped".into()))?;
                waiting.insert(g, value?);
                while let Some(value) = waiting.remove(&sunk) {
                    let start = sunk * group;
                    sink(start, value)?;
                    (control.advance)(((start + group).min(params.len()) - start) as u64);
                    sunk += 1;
                    let _ = permit_back.send(());
                }
            }
            Ok(())
        })();
        // Workers waiting for a permit wake up to a closed channel and stop.
        stopped.store(true, Ordering::Relaxed);
        drop(permit_back);
        outcome
    })
}

/// Percentile `p` (0–1) by linear interpolation between order statistics, h = (n - 1)·p
/// (Hyndman and Fan, 1996, definition 7), found by selection rather than a full sort (the
/// values are reordered). NaN for no values.
pub fn percentile(values: &mut [f64], p: f64) -> f64 {
    match values.len() {
        0 => f64::NAN,
        1 => values[0],
        n => {
            let h = (n - 1) as f64 * p.clamp(0.0, 1.0);
            let lo = (h.floor() as usize).min(n - 1);
            let (_, low, above) = values.select_nth_unstable_by(lo, f64::total_cmp);
            let low = *low;
            let high = above.iter().copied().min_by(f64::total_cmp).unwrap_or(low);
            low + (h - lo as f64) * (high - low)
        }
    }
}

/// `p_exit` of a run of consecutive draws, tunnel by tunnel: `values[k * draws + d]` is
/// tunnel `k` (0-based) in the run's draw `d`, NaN where a table is shorter. Built by the
/// thread that computed the tables, so the summary later reads each tunnel in a few long
/// runs instead of one value per draw scattered over memory.
#[derive(Debug, Clone, PartialEq)]
pub struct PExitBlock {
    draws: usize,
    values: Vec<f64>,
}

/// The [`PExitBlock`] of `tables` (consecutive draws), `count` tunnels each.
pub fn p_exit_block(tables: &[TunnelTable], count: usize) -> PExitBlock {
    let draws = tables.len();
    let mut values = vec![f64::NAN; draws * count];
    for (d, table) in tables.iter().enumerate() {
        for (k, row) in table.rows.iter().take(count).enumerate() {
            values[k * draws + d] = row.p_exit;
        }
    }
    PExitBlock { draws, values }
}

/// One tunnel's summary over the draws.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SummaryRow {
    /// 1-based tunnel number.
    pub tunnel: usize,
    /// Start of the tunnel's cycle (table's time unit).
    pub t_start: f64,
    /// End of the tunnel's cycle (table's time unit).
    pub t_end: f64,
    /// `p_exit` of the point estimate.
    pub point: f64,
    /// Mean `p_exit` over the draws.
    pub mean: f64,
    /// 2.5% percentile of `p_exit` over the draws.
    pub lower: f64,
    /// 97.5% percentile of `p_exit` over the draws.
    pub upper: f64,
}

/// Collects `p_exit` of every draw for the summary; memory is draws × tunnels numbers, kept
/// in the blocks of consecutive draws they were added in (tunnel by tunnel within a block).
#[derive(Debug, Clone)]
pub struct SummaryBuilder {
    point: TunnelTable,
    values: Vec<f64>,
    /// Where each block starts in `values`, and its number of draws.
    blocks: Vec<(usize, usize)>,
}

impl SummaryBuilder {
    /// A summary around the point estimate's table, with room for `draws` draws.
    pub fn new(point: TunnelTable, draws: usize) -> Self {
        let values = Vec::with_capacity(draws.saturating_mul(point.rows.len()));
        SummaryBuilder {
            point,
            values,
            blocks: Vec::new(),
        }
    }

    /// Adds one draw's table (same cycle and count as the point estimate).
    pub fn add(&mut self, table: &TunnelTable) {
        self.add_block(&p_exit_block(
            std::slice::from_ref(table),
            self.point.rows.len(),
        ));
    }

    /// Adds the `p_exit` of a run of consecutive draws ([`p_exit_block`], with as many
    /// tunnels as the point estimate): [`SummaryBuilder::add`] done ahead in parallel.
    pub fn add_block(&mut self, block: &PExitBlock) {
        self.blocks.push((self.values.len(), block.draws));
        self.values.extend_from_slice(&block.values);
    }

    /// Number of draws added.
    fn draws(&self) -> usize {
        self.blocks.iter().map(|&(_, n)| n).sum()
    }

    /// `p_exit` of tunnel `k` (0-based) in every draw, in the order added.
    fn tunnel(&self, k: usize) -> Vec<f64> {
        let mut out = Vec::with_capacity(self.draws());
        for &(start, n) in &self.blocks {
            out.extend_from_slice(&self.values[start + k * n..start + (k + 1) * n]);
        }
        out
    }

    /// `p_exit` per tunnel (outer) and draw (inner, in the order added).
    pub fn values(&self) -> Vec<Vec<f64>> {
        (0..self.point.rows.len()).map(|k| self.tunnel(k)).collect()
    }

    /// Mean and 2.5%/97.5% percentiles per tunnel.
    pub fn finish(self) -> Vec<SummaryRow> {
        self.point
            .rows
            .par_iter()
            .enumerate()
            .map(|(k, row)| {
                let mut values = self.tunnel(k);
                let mean = values.iter().sum::<f64>() / values.len() as f64;
                SummaryRow {
                    tunnel: row.tunnel,
                    t_start: row.t_start,
                    t_end: row.t_end,
                    point: row.p_exit,
                    mean,
                    lower: percentile(&mut values, 0.025),
                    upper: percentile(&mut values, 0.975),
                }
            })
            .collect()
    }
}

/// Outcome of a nonparametric bootstrap: one natural parameter set per successful refit.
#[derive(Debug, Clone, PartialEq)]
pub struct Bootstrap {
    /// Natural parameters of each replicate whose refit converged, in replicate order.
    pub params: Vec<Vec<f64>>,
    /// 1-based numbers of the replicates whose refit failed, with the reason.
    pub failed: Vec<(usize, String)>,
}

/// Nonparametric bootstrap: `replicates` samples of the subjects drawn with replacement, each
/// refitted with [`fit_family`]. Each replicate's own generator is seeded from the master
/// stream in order before any refit, so results do not depend on the number of threads.
pub fn bootstrap(
    family: &'static dyn Family,
    records: &[Record],
    replicates: usize,
    seed: u64,
    control: &Control<'_>,
) -> Result<Bootstrap> {
    let mut master = NormalStream::new(seed);
    let seeds: Vec<u64> = (0..replicates).map(|_| master.next_u64()).collect();
    let n = records.len() as u64;
    let mut params = Vec::new();
    let mut failed = Vec::new();
    for (c, chunk) in seeds.chunks(CHUNK).enumerate() {
        if let Some(e) = (control.stop)() {
            return Err(e);
        }
        let fits: Vec<std::result::Result<Vec<f64>, String>> = chunk
            .par_iter()
            .map(|&s| {
                let mut rng = ChaCha20Rng::seed_from_u64(s);
                let mut sample: Vec<Record> = (0..n)
                    .map(|_| records[uniform_index(&mut rng, n) as usize])
                    .collect();
                sample.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
                if !sample.iter().any(|r| r.event) {
                    return Err("the resample has no events".to_string());
                }
                let fit = fit_family(family, &FitData::from_records(&sample), None);
                match (fit.converged, fit.param_vector(family)) {
                    (true, Some(p)) => Ok(p),
                    _ => Err(fit
                        .message
                        .unwrap_or_else(|| "the refit did not converge".into())),
                }
            })
            .collect();
        for (i, fit) in fits.into_iter().enumerate() {
            match fit {
                Ok(p) => params.push(p),
                Err(reason) => failed.push((c * CHUNK + i + 1, reason)),
            }
        }
        (control.advance)(chunk.len() as u64);
    }
    Ok(Bootstrap { params, failed })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::curve::ParametricCurve;
    use crate::families::{self, Weibull};
    use crate::fit::Covariance;
    use crate::units::TimeUnit;

    /// Builds a Weibull curve (no adjustments) from natural parameters in `unit`.
    fn weibull_builder(
        unit: TimeUnit,
    ) -> impl Fn(&[f64]) -> std::result::Result<Box<dyn Curve>, String> + Sync {
        move |p| Ok(Box::new(ParametricCurve::new(&Weibull, p.to_vec(), unit)?))
    }

    /// One `unit`, as a cycle.
    fn one(unit: TimeUnit) -> Duration {
        Duration { value: 1.0, unit }
    }

    fn weibull_fit(estimates: Vec<f64>, matrix: Vec<Vec<f64>>) -> FamilyFit {
        FamilyFit {
            family: "weibull".into(),
            arm: None,
            params: Default::default(),
            loglik: None,
            aic: None,
            bic: None,
            converged: true,
            covariance: Some(Covariance {
                scale: "estimation".into(),
                names: vec!["ln_shape".into(), "ln_scale".into()],
                matrix,
            }),
            estimates,
            intervals: Default::default(),
            delta_aic: None,
            median: None,
            gradient_max: None,
            message: None,
            note: None,
            settings: None,
            landmarks: Vec::new(),
            rmst_followup: None,
            mean_years: None,
            targets: Vec::new(),
            below_population_from_years: None,
        }
    }

    #[test]
    fn normal_stream_has_standard_normal_moments() {
        // Moments of N(0, 1): mean 0, variance 1, P(Z < -1.96) = 0.025 (standard normal table,
        // common practice); tolerances are 4 Monte-Carlo standard errors for 200,000 variates.
        let n = 200_000;
        let mut stream = NormalStream::new(7);
        let z: Vec<f64> = (0..n).map(|_| stream.next_normal()).collect();
        let mean = z.iter().sum::<f64>() / n as f64;
        let var = z.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        let below = z.iter().filter(|&&x| x < -1.959_963_984_540_054).count() as f64 / n as f64;
        let se_mean = (1.0 / n as f64).sqrt();
        let se_var = (2.0 / n as f64).sqrt();
        let se_tail = (0.025f64 * 0.975 / n as f64).sqrt();
        assert!(mean.abs() < 4.0 * se_mean, "mean {mean}");
        assert!((var - 1.0).abs() < 4.0 * se_var, "variance {var}");
        assert!((below - 0.025).abs() < 4.0 * se_tail, "tail {below}");
    }

    #[test]
    fn same_seed_same_draws_other_seed_other_draws() {
        let fit = weibull_fit(vec![0.3, 3.1], vec![vec![0.04, 0.01], vec![0.01, 0.09]]);
        let sampler = Sampler::from_fit(&Weibull, &fit).unwrap();
        assert_eq!(sampler.draw(50, 11), sampler.draw(50, 11));
        assert_ne!(sampler.draw(50, 11), sampler.draw(50, 12));
    }

    #[test]
    fn draw_mean_and_covariance_match_the_fit_within_monte_carlo_error() {
        // Central limit theorem: the sample mean of n draws has standard error sqrt(Σᵢᵢ/n); the
        // sample covariance sᵢⱼ has variance (Σᵢⱼ² + ΣᵢᵢΣⱼⱼ)/n for a normal sample (Anderson,
        // 2003, An Introduction to Multivariate Statistical Analysis, section 3.4 — from memory).
        // Tolerance: 4 standard errors.
        let mean = vec![0.25, 3.4];
        let sigma = vec![vec![0.02, -0.012], vec![-0.012, 0.05]];
        let fit = weibull_fit(mean.clone(), sigma.clone());
        let n = 100_000;
        let draws = Sampler::from_fit(&Weibull, &fit).unwrap().draw(n, 2024);
        let nf = n as f64;
        let m: Vec<f64> = (0..2)
            .map(|i| draws.iter().map(|d| d[i]).sum::<f64>() / nf)
            .collect();
        for i in 0..2 {
            let se = (sigma[i][i] / nf).sqrt();
            assert!((m[i] - mean[i]).abs() < 4.0 * se, "mean {i}: {}", m[i]);
            for j in 0..2 {
                let s = draws
                    .iter()
                    .map(|d| (d[i] - m[i]) * (d[j] - m[j]))
                    .sum::<f64>()
                    / (nf - 1.0);
                let se = ((sigma[i][j].powi(2) + sigma[i][i] * sigma[j][j]) / nf).sqrt();
                assert!((s - sigma[i][j]).abs() < 4.0 * se, "cov {i}{j}: {s}");
            }
        }
    }

    #[test]
    fn refuses_missing_or_indefinite_covariance_naming_the_family() {
        let mut fit = weibull_fit(vec![0.3, 3.1], vec![vec![1.0, 2.0], vec![2.0, 1.0]]);
        let err = Sampler::from_fit(&Weibull, &fit).unwrap_err();
        assert!(
            err.contains("weibull") && err.contains("positive definite"),
            "{err}"
        );
        fit.covariance = None;
        let err = Sampler::from_fit(&Weibull, &fit).unwrap_err();
        assert!(
            err.contains("weibull") && err.contains("no covariance"),
            "{err}"
        );
        let fit = weibull_fit(vec![0.3], vec![vec![1.0]]);
        assert!(Sampler::from_fit(&Weibull, &fit).is_err());
    }

    #[test]
    fn percentiles_follow_linear_interpolation_between_order_statistics() {
        // Hyndman and Fan (1996), definition 7: h = (n-1)p, worked by hand for 1..=5 and 1..=10,
        // given in scrambled order (the selection must not depend on it).
        let mut five = [4.0, 1.0, 5.0, 3.0, 2.0];
        assert_eq!(percentile(&mut five, 0.5), 3.0);
        assert!((percentile(&mut five, 0.025) - 1.1).abs() < 1e-15);
        assert!((percentile(&mut five, 0.975) - 4.9).abs() < 1e-15);
        assert_eq!(percentile(&mut five, 1.0), 5.0);
        assert_eq!(percentile(&mut five, 0.0), 1.0);
        let mut ten: Vec<f64> = (1..=10).map(|i| f64::from((i * 7) % 10 + 1)).collect();
        assert!((percentile(&mut ten, 0.025) - 1.225).abs() < 1e-15);
        assert!((percentile(&mut ten, 0.975) - 9.775).abs() < 1e-15);
        assert!(percentile(&mut [], 0.5).is_nan());
        assert_eq!(percentile(&mut [2.5], 0.3), 2.5);
    }

    #[test]
    fn chunked_tables_match_tables_built_one_by_one_in_order() {
        let fit = weibull_fit(vec![0.3, 3.1], vec![vec![0.04, 0.01], vec![0.01, 0.09]]);
        let params = Sampler::from_fit(&Weibull, &fit)
            .unwrap()
            .draw_natural(150, 5);
        let (build, cycle) = (weibull_builder(TimeUnit::Weeks), one(TimeUnit::Months));
        let mut seen = Vec::new();
        tables_in_chunks(&params, &build, cycle, 12, &Control::none(), |first, t| {
            assert_eq!(first, seen.len());
            seen.extend(t);
            Ok(())
        })
        .unwrap();
        assert_eq!(seen.len(), 150);
        for (p, table) in params.iter().zip(&seen) {
            let direct = tunnel_table(build(p).unwrap().as_ref(), cycle, 12);
            assert_eq!(&direct, table);
        }

        // Streamed in groups of 7 draws (150 is not a multiple), at most 2 in flight: the
        // groups reach the sink in draw order however the workers finish, with the same
        // tables.
        let mut next = 0;
        let mut streamed = SummaryBuilder::new(seen[0].clone(), 150);
        groups_streamed(
            &params,
            (7, 2),
            &build,
            (cycle, 12),
            &Control::none(),
            |start, tables| Ok((start, p_exit_block(&tables, 12), tables)),
            |first, (start, block, tables)| {
                assert_eq!((first, start), (next, next));
                assert_eq!(tables, seen[start..start + tables.len()]);
                next += tables.len();
                streamed.add_block(&block);
                Ok(())
            },
        )
        .unwrap();
        assert_eq!(next, 150);
        // The summary built from the groups' blocks equals the one built table by table.
        let mut by_table = SummaryBuilder::new(seen[0].clone(), 0);
        seen.iter().for_each(|t| by_table.add(t));
        assert_eq!(streamed.values(), by_table.values());
        assert_eq!(streamed.values()[11][149], seen[149].rows[11].p_exit);
        assert_eq!(streamed.finish(), by_table.finish());
    }

    #[test]
    fn a_failed_group_or_sink_stops_the_stream_with_its_error() {
        // Groups of 5 daily Weibull draws of 4 tunnels, at most 3 in flight.
        fn stream(
            params: &[Vec<f64>],
            per_group: impl Fn(usize, Vec<TunnelTable>) -> Result<usize> + Sync,
            sink: impl FnMut(usize, usize) -> Result<()>,
        ) -> Result<()> {
            let build = weibull_builder(TimeUnit::Days);
            let cycle = (one(TimeUnit::Days), 4);
            groups_streamed(
                params,
                (5, 3),
                &build,
                cycle,
                &Control::none(),
                per_group,
                sink,
            )
        }
        let params = vec![vec![1.0, 10.0]; 200];
        let mut sunk = Vec::new();
        let result = stream(
            &params,
            |start, _| match start {
                100 => Err(Error::Computation("group at draw 101 failed".into())),
                _ => Ok(start),
            },
            |first, _| {
                sunk.push(first);
                Ok(())
            },
        );
        assert!(result.unwrap_err().to_string().contains("draw 101 failed"));
        // Everything before the failed group was sunk in order, nothing after it.
        assert!(sunk.iter().enumerate().all(|(i, &first)| first == 5 * i));
        assert!(sunk.len() <= 20);
        let result = stream(
            &params,
            |start, _| Ok(start),
            |first, _| match first {
                50 => Err(Error::Computation("cannot write".into())),
                _ => Ok(()),
            },
        );
        assert!(result.unwrap_err().to_string().contains("cannot write"));
        // A draw whose curve cannot be built names the draw.
        let mut bad = params.clone();
        bad[42] = vec![-1.0, 10.0];
        let result = stream(&bad, |start, _| Ok(start), |_, _| Ok(()));
        assert!(result.unwrap_err().to_string().contains("draw 43"));
    }

    #[test]
    fn interruption_stops_between_chunks() {
        let params = vec![vec![1.0, 10.0]; 3 * CHUNK];
        let (build, cycle) = (weibull_builder(TimeUnit::Days), one(TimeUnit::Days));
        let done = std::sync::atomic::AtomicU64::new(0);
        let advance = |k: u64| {
            done.fetch_add(k, std::sync::atomic::Ordering::SeqCst);
        };
        let stop = || {
            (done.load(std::sync::atomic::Ordering::SeqCst) >= CHUNK as u64)
                .then(|| Error::Computation("stopped".into()))
        };
        let control = Control {
            stop: &stop,
            advance: &advance,
        };
        let result = tables_in_chunks(&params, &build, cycle, 3, &control, |_, _| Ok(()));
        assert!(result.is_err());
        assert_eq!(done.into_inner(), CHUNK as u64);
    }

    #[test]
    fn bootstrap_of_exponential_matches_its_known_sampling_spread() {
        // Exponential MLE rate = d / Σt; its bootstrap standard error on the log scale is close to
        // 1/sqrt(d) (asymptotic variance of the log rate, from memory; common practice).
        // Invented data: 400 subjects with exponential times (rate 0.1) censored at 12.
        let mut stream = NormalStream::new(99);
        let mut records: Vec<Record> = (0..400)
            .map(|_| {
                let u = crate::numeric::normal_sf(stream.next_normal());
                let t = -u.ln() / 0.1;
                if t < 12.0 {
                    Record {
                        time: t,
                        event: true,
                    }
                } else {
                    Record {
                        time: 12.0,
                        event: false,
                    }
                }
            })
            .collect();
        records.sort_by(|a, b| a.time.total_cmp(&b.time).then(b.event.cmp(&a.event)));
        let events = records.iter().filter(|r| r.event).count() as f64;
        let exponential = families::by_name("exponential").unwrap();
        let result = bootstrap(exponential, &records, 400, 3, &Control::none()).unwrap();
        assert!(result.failed.is_empty());
        let logs: Vec<f64> = result.params.iter().map(|p| p[0].ln()).collect();
        let m = logs.iter().sum::<f64>() / logs.len() as f64;
        let sd =
            (logs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (logs.len() - 1) as f64).sqrt();
        let expected = 1.0 / events.sqrt();
        // The sample SD of 400 replicates has relative standard error about 1/sqrt(2·399) ≈ 3.5%;
        // allow 20% for that and the approximation.
        assert!((sd / expected - 1.0).abs() < 0.2, "sd {sd} vs {expected}");
        let again = bootstrap(exponential, &records, 400, 3, &Control::none()).unwrap();
        assert_eq!(result, again);
    }

    #[test]
    fn uniform_index_covers_the_range_evenly() {
        // Chi-square test of 60,000 indices in 0..6 (5 degrees of freedom, 0.1% critical value
        // 20.52, from memory of the chi-square table).
        let mut rng = ChaCha20Rng::seed_from_u64(1);
        let mut counts = [0.0f64; 6];
        for _ in 0..60_000 {
            counts[uniform_index(&mut rng, 6) as usize] += 1.0;
        }
        let chi2: f64 = counts
            .iter()
            .map(|c| (c - 10_000.0).powi(2) / 10_000.0)
            .sum();
        assert!(chi2 < 20.52, "{chi2} {counts:?}");
    }
}
