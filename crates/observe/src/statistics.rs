//! Averages of Monte Carlo and thermostat runs, with statistical errors.
//!
//! Successive samples of a Markov chain or of a Langevin trajectory are correlated, so the
//! naive error `sigma / sqrt(n)` of a mean is too small by `sqrt(2 tau_int)`. Three
//! standard tools handle that:
//!
//! - [`blocking`]: the blocking (binning) analysis of H. Flyvbjerg and H. G. Petersen,
//!   J. Chem. Phys. 91, 461 (1989). The series is averaged in pairs again and again; the
//!   naive error of the block means rises with the block size until blocks are longer than
//!   the correlations and then stays on a plateau, which is the error of the mean.
//! - [`autocorrelation_time`]: the integrated autocorrelation time
//!   `tau_int = 1/2 + sum_{t>=1} rho(t)` with the automatic window of A. Sokal, "Monte Carlo
//!   methods in statistical mechanics: foundations and new algorithms" (1997): the sum runs
//!   to the smallest `W` with `W >= c tau_int(W)`, `c = 5`. With this convention the
//!   error of a mean is `sigma sqrt(2 tau_int / n)` and uncorrelated samples have
//!   `tau_int = 1/2`.
//! - [`jackknife`]: the error of a function of several means (a variance, a ratio) from
//!   the leave-one-block-out estimates (B. Efron, "The jackknife, the bootstrap and other
//!   resampling plans", SIAM 1982), with blocks long enough to be independent.
//!
//! [`Samples`] collects one magnetisation vector and one energy per spin per measurement,
//! and [`Samples::averages`] turns them into the [`ThermoAverages`] of a Monte Carlo or
//! thermostat point:
//!
//! - susceptibility per spin `chi = N (<|m|^2> - <|m|>^2) / (kB T)`, in 1/meV, with `N` the
//!   number of spins and `m` the dimensionless moment-weighted magnetisation. Multiplied by
//!   `mu muB` (meV/T) it is the response `d<m>/dB` in 1/T of a system of moment `mu`. The
//!   modulus `|m|` rather than `m` is the usual estimator of a finite system without
//!   symmetry-breaking field (K. Binder and D. W. Heermann, "Monte Carlo Simulation in
//!   Statistical Physics", Springer), whose `<m>` vanishes at every temperature;
//! - heat capacity per spin in units of kB, `C / kB = N (<e^2> - <e>^2) / (kB T)^2`, with
//!   `e` the energy per spin in meV: the fluctuation formula `C = var(E) / (kB T^2)` for the
//!   total energy `E = N e`, divided by `N kB`;
//! - Binder cumulant `U4 = 1 - <|m|^4> / (3 <|m|^2>^2)`: 2/3 in an ordered state, 4/9 for
//!   the Gaussian three-component `m` of a paramagnet.
//!
//! Everything here runs on one thread in a fixed order and is deterministic.

use crate::error::ObserveError;
use crate::fft::lagged_products;
use spindrift_hamiltonian::constants::K_B;
use spindrift_lattice::Vec3;

/// Sokal's window factor `c`: the autocorrelation sum runs to `W >= c tau_int(W)`.
pub const SOKAL_WINDOW_FACTOR: f64 = 5.0;

/// Blocking levels with fewer blocks than this are too noisy to locate a plateau.
pub const MIN_BLOCKS: usize = 16;

/// The jackknife uses at least this many blocks when the series is long enough.
pub const MIN_JACKKNIFE_BLOCKS: usize = 16;

/// A value with its one-standard-error estimate.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Estimate {
    /// The estimate.
    pub value: f64,
    /// Its standard error.
    pub error: f64,
}

/// One level of a blocking analysis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BlockingLevel {
    /// Samples per block.
    pub block_size: usize,
    /// Number of blocks.
    pub blocks: usize,
    /// Error of the mean estimated from the block means as if they were independent.
    pub error: f64,
    /// Standard error of `error` itself, `error / sqrt(2 (blocks - 1))`.
    pub error_of_error: f64,
}

/// Result of a blocking analysis.
#[derive(Debug, Clone, PartialEq)]
pub struct Blocking {
    /// Mean of the series.
    pub mean: f64,
    /// Error of the mean: the plateau value.
    pub error: f64,
    /// Standard error of `error`.
    pub error_of_error: f64,
    /// Block size of the level chosen as the plateau.
    pub block_size: usize,
    /// Whether a plateau was seen: at least one longer level with enough blocks agrees.
    /// When false the error is the last usable level's and may be an underestimate.
    pub converged: bool,
    /// Every level, from block size 1 up.
    pub levels: Vec<BlockingLevel>,
}

impl Blocking {
    /// Integrated autocorrelation time implied by the plateau, in samples:
    /// `tau = (error / naive error)^2 / 2`, 1/2 for uncorrelated samples (and for a series
    /// without fluctuations).
    pub fn tau(&self) -> f64 {
        let naive = self.levels[0].error;
        if naive > 0.0 {
            0.5 * (self.error / naive).powi(2)
        } else {
            0.5
        }
    }
}

/// Blocking analysis of a series (H. Flyvbjerg and H. G. Petersen, J. Chem. Phys. 91,
/// 461 (1989)). At each level the series is replaced by the means of neighbouring pairs
/// (an odd last sample is dropped), and `sqrt(c0 / (n - 1))` estimates the error of the
/// mean, `c0` being the variance of the `n` block means.
///
/// The plateau is the first level, among those with at least [`MIN_BLOCKS`] blocks, that
/// every longer such level agrees with: `error_j - error_k <= 2 sqrt(d_j^2 + d_k^2)`, `d`
/// the errors of the errors. A series shorter than [`MIN_BLOCKS`] gets the naive error.
pub fn blocking(series: &[f64]) -> Result<Blocking, ObserveError> {
    check_series("blocking analysis", series)?;
    let mean = mean_of(series);
    let mut x = series.to_vec();
    let mut levels = Vec::new();
    let mut block_size = 1;
    while x.len() >= 2 {
        let n = x.len();
        let m = mean_of(&x);
        let c0 = x.iter().map(|v| (v - m) * (v - m)).sum::<f64>() / n as f64;
        let error = (c0 / (n - 1) as f64).sqrt();
        let error_of_error = error / (2.0 * (n - 1) as f64).sqrt();
        levels.push(BlockingLevel { block_size, blocks: n, error, error_of_error });
        for i in 0..n / 2 {
            x[i] = 0.5 * (x[2 * i] + x[2 * i + 1]);
        }
        x.truncate(n / 2);
        block_size *= 2;
    }
    let mut candidates: Vec<usize> = (0..levels.len()).filter(|&k| levels[k].blocks >= MIN_BLOCKS).collect();
    if candidates.is_empty() {
        candidates.push(0);
    }
    let agrees = |k: usize, j: usize| {
        let (a, b) = (&levels[k], &levels[j]);
        b.error - a.error <= 2.0 * (a.error_of_error.powi(2) + b.error_of_error.powi(2)).sqrt()
    };
    let position = (0..candidates.len())
        .find(|&p| candidates[p + 1..].iter().all(|&j| agrees(candidates[p], j)))
        .unwrap_or(candidates.len() - 1);
    let chosen = levels[candidates[position]];
    Ok(Blocking {
        mean,
        error: chosen.error,
        error_of_error: chosen.error_of_error,
        block_size: chosen.block_size,
        converged: position + 1 < candidates.len(),
        levels,
    })
}

/// An integrated autocorrelation time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AutocorrelationTime {
    /// `tau_int`, in samples (1/2 for uncorrelated samples).
    pub tau: f64,
    /// Its standard error, `tau sqrt(2 (2 W + 1) / n)` (N. Madras and A. D. Sokal,
    /// J. Stat. Phys. 50, 109 (1988)).
    pub error: f64,
    /// The window `W` where the sum stopped.
    pub window: usize,
    /// Whether the window condition `W >= c tau_int(W)` was met before the series ran out.
    pub converged: bool,
}

/// Integrated autocorrelation time of a series with Sokal's automatic window, factor `c`
/// (use [`SOKAL_WINDOW_FACTOR`]). The autocovariance at lag `t` is
/// `C(t) = (1 / (n - t)) sum_i (x_i - xbar)(x_{i+t} - xbar)`, computed by FFT. A series
/// without fluctuations has no measurable correlation and gets `tau = 1/2`.
pub fn autocorrelation_time(series: &[f64], c: f64) -> Result<AutocorrelationTime, ObserveError> {
    check_series("autocorrelation time", series)?;
    let n = series.len();
    let mean = mean_of(series);
    let centred: Vec<f64> = series.iter().map(|v| v - mean).collect();
    let sums = lagged_products(&centred);
    let c0 = sums[0] / n as f64;
    if c0 <= 0.0 {
        return Ok(AutocorrelationTime { tau: 0.5, error: 0.0, window: 0, converged: true });
    }
    let mut tau = 0.5;
    let mut window = 0;
    let mut converged = false;
    for t in 1..n {
        tau += sums[t] / (n - t) as f64 / c0;
        window = t;
        if t as f64 >= c * tau {
            converged = true;
            break;
        }
    }
    let error = tau.abs() * (2.0 * (2 * window + 1) as f64 / n as f64).sqrt();
    Ok(AutocorrelationTime { tau, error, window, converged })
}

/// Jackknife estimate of `f` of the means of several series of equal length, over blocks
/// of `block` samples (B. Efron, SIAM 1982; blocking for correlated data is common
/// practice). The value is `f` of the means of all samples; the error is
/// `sqrt((B - 1) / B sum_b (f_b - fbar)^2)` over the `B = n / block` leave-one-block-out
/// estimates `f_b`. When `n` is not a multiple of `block` the earliest samples are left
/// out of the blocks, being the least equilibrated.
pub fn jackknife(
    series: &[&[f64]],
    block: usize,
    f: impl Fn(&[f64]) -> f64,
) -> Result<Estimate, ObserveError> {
    let what = "jackknife";
    let n = series.first().map_or(0, |s| s.len());
    for s in series {
        check_series(what, s)?;
        if s.len() != n {
            return Err(ObserveError::LengthMismatch { expected: n, got: s.len() });
        }
    }
    let block = block.max(1);
    let blocks = n / block;
    if blocks < 2 {
        return Err(ObserveError::TooFew { what: "jackknife blocks", need: 2, got: blocks });
    }
    let skip = n - blocks * block;
    let k = series.len();
    let full: Vec<f64> = series.iter().map(|s| mean_of(s)).collect();
    let value = f(&full);
    let sums: Vec<Vec<f64>> =
        series.iter().map(|s| s[skip..].chunks(block).map(|c| c.iter().sum::<f64>()).collect()).collect();
    let totals: Vec<f64> = sums.iter().map(|s| s.iter().sum()).collect();
    let rest = ((blocks - 1) * block) as f64;
    let mut means = vec![0.0; k];
    let estimates: Vec<f64> = (0..blocks)
        .map(|b| {
            for j in 0..k {
                means[j] = (totals[j] - sums[j][b]) / rest;
            }
            f(&means)
        })
        .collect();
    let centre = mean_of(&estimates);
    let spread: f64 = estimates.iter().map(|e| (e - centre) * (e - centre)).sum();
    let error = ((blocks - 1) as f64 / blocks as f64 * spread).sqrt();
    Ok(Estimate { value, error })
}

/// The averages of one Monte Carlo or thermostat point, each with its standard error.
/// Field for field what `spindrift_engine::PointRow` stores.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ThermoAverages {
    /// Mean magnetisation vector (dimensionless).
    pub magnetization: Vec3,
    /// Its error, per component.
    pub magnetization_err: Vec3,
    /// Mean of `|m|`.
    pub m_abs: f64,
    /// Its error.
    pub m_abs_err: f64,
    /// Susceptibility per spin `N (<|m|^2> - <|m|>^2) / (kB T)`, 1/meV.
    pub susceptibility: f64,
    /// Its error, 1/meV.
    pub susceptibility_err: f64,
    /// Heat capacity per spin `N (<e^2> - <e>^2) / (kB T)^2`, in units of kB.
    pub heat_capacity: f64,
    /// Its error, in units of kB.
    pub heat_capacity_err: f64,
    /// Binder cumulant `1 - <|m|^4> / (3 <|m|^2>^2)` (NaN if every sample has `m = 0`).
    pub binder: f64,
    /// Its error.
    pub binder_err: f64,
    /// Mean energy, meV per spin.
    pub energy: f64,
    /// Its error, meV per spin.
    pub energy_err: f64,
    /// Integrated autocorrelation time of `|m|`, in samples (Sokal's window).
    pub autocorrelation_time: f64,
    /// Number of samples averaged.
    pub samples: u64,
    /// Block size of the jackknife of the derived quantities, samples.
    pub block_size: usize,
    /// Whether every blocking analysis found its plateau and the autocorrelation window
    /// closed; false means the run was too short for its correlations and the errors may be
    /// too small.
    pub converged: bool,
}

/// Per-sample measurements of a Monte Carlo or thermostat run: one magnetisation vector
/// and one energy per spin (meV) per sample. `|m|`, `|m|^2` and `|m|^4` are derived from
/// the vector when averaging.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Samples {
    magnetization: Vec<Vec3>,
    energy: Vec<f64>,
}

impl Samples {
    /// An empty accumulator.
    pub fn new() -> Self {
        Self::default()
    }

    /// An empty accumulator with room for `n` samples, so that pushing them never
    /// reallocates.
    pub fn with_capacity(n: usize) -> Self {
        Self { magnetization: Vec::with_capacity(n), energy: Vec::with_capacity(n) }
    }

    /// Rebuilds an accumulator from stored series (e.g. a checkpoint).
    pub fn from_parts(magnetization: Vec<Vec3>, energy: Vec<f64>) -> Result<Self, ObserveError> {
        if magnetization.len() != energy.len() {
            return Err(ObserveError::LengthMismatch { expected: magnetization.len(), got: energy.len() });
        }
        Ok(Self { magnetization, energy })
    }

    /// Adds one sample: the magnetisation vector and the energy per spin, meV.
    pub fn push(&mut self, magnetization: Vec3, energy_per_spin: f64) {
        self.magnetization.push(magnetization);
        self.energy.push(energy_per_spin);
    }

    /// Number of samples.
    pub fn len(&self) -> usize {
        self.energy.len()
    }

    /// True before the first sample.
    pub fn is_empty(&self) -> bool {
        self.energy.is_empty()
    }

    /// Forgets every sample, keeping the memory.
    pub fn clear(&mut self) {
        self.magnetization.clear();
        self.energy.clear();
    }

    /// The magnetisation vectors, in order.
    pub fn magnetization(&self) -> &[Vec3] {
        &self.magnetization
    }

    /// The energies per spin, meV, in order.
    pub fn energy(&self) -> &[f64] {
        &self.energy
    }

    /// The series of `|m|`.
    pub fn m_abs(&self) -> Vec<f64> {
        self.magnetization.iter().map(|m| (m[0] * m[0] + m[1] * m[1] + m[2] * m[2]).sqrt()).collect()
    }

    /// The averages with errors, for `spins` spins at `temperature` (K).
    ///
    /// Means of `m`, `|m|` and `e` take their errors from [`blocking`]; susceptibility,
    /// heat capacity and Binder cumulant from [`jackknife`] over blocks as long as the
    /// longest blocking plateau of `|m|`, `|m|^2`, `|m|^4` and `e` (at most `n / 16`, so
    /// there are at least [`MIN_JACKKNIFE_BLOCKS`] blocks). Fluctuations are taken about
    /// the sample means before squaring, which leaves the variances unchanged and keeps
    /// their digits when they are small next to the squared means.
    pub fn averages(&self, spins: usize, temperature: f64) -> Result<ThermoAverages, ObserveError> {
        let what = "thermodynamic averages";
        let n = self.len();
        if n < 2 {
            return Err(ObserveError::TooFew { what: "samples for averages", need: 2, got: n });
        }
        if !(temperature.is_finite() && temperature > 0.0) {
            return Err(ObserveError::BadTemperature { what, value: temperature });
        }
        if spins == 0 {
            return Err(ObserveError::NoSpins { what });
        }
        if let Some(index) = self.magnetization.iter().position(|m| m.iter().any(|v| !v.is_finite())) {
            return Err(ObserveError::NonFinite { what: "magnetisation samples", index });
        }
        let kt = K_B * temperature;
        let count = spins as f64;

        let components: Vec<Vec<f64>> =
            (0..3).map(|a| self.magnetization.iter().map(|m| m[a]).collect()).collect();
        let m_abs = self.m_abs();
        let m2: Vec<f64> =
            self.magnetization.iter().map(|m| m[0] * m[0] + m[1] * m[1] + m[2] * m[2]).collect();
        let m4: Vec<f64> = m2.iter().map(|v| v * v).collect();

        let mut converged = true;
        let mut block = 1;
        let mut magnetization = [0.0; 3];
        let mut magnetization_err = [0.0; 3];
        for a in 0..3 {
            let b = blocking(&components[a])?;
            magnetization[a] = b.mean;
            magnetization_err[a] = b.error;
            converged &= b.converged;
        }
        let mut summarise = |series: &[f64]| -> Result<Blocking, ObserveError> {
            let b = blocking(series)?;
            converged &= b.converged;
            block = block.max(b.block_size);
            Ok(b)
        };
        let abs = summarise(&m_abs)?;
        summarise(&m2)?;
        summarise(&m4)?;
        let energy = summarise(&self.energy)?;
        let block = block.min((n / MIN_JACKKNIFE_BLOCKS).max(1));

        let dm: Vec<f64> = m_abs.iter().map(|v| v - abs.mean).collect();
        let dm2: Vec<f64> = dm.iter().map(|v| v * v).collect();
        let chi = jackknife(&[&dm, &dm2], block, |x| count * (x[1] - x[0] * x[0]) / kt)?;
        let de: Vec<f64> = self.energy.iter().map(|v| v - energy.mean).collect();
        let de2: Vec<f64> = de.iter().map(|v| v * v).collect();
        let heat = jackknife(&[&de, &de2], block, |x| count * (x[1] - x[0] * x[0]) / (kt * kt))?;
        let binder = jackknife(&[&m2, &m4], block, |x| 1.0 - x[1] / (3.0 * x[0] * x[0]))?;
        let tau = autocorrelation_time(&m_abs, SOKAL_WINDOW_FACTOR)?;
        converged &= tau.converged;

        Ok(ThermoAverages {
            magnetization,
            magnetization_err,
            m_abs: abs.mean,
            m_abs_err: abs.error,
            susceptibility: chi.value,
            susceptibility_err: chi.error,
            heat_capacity: heat.value,
            heat_capacity_err: heat.error,
            binder: binder.value,
            binder_err: binder.error,
            energy: energy.mean,
            energy_err: energy.error,
            autocorrelation_time: tau.tau,
            samples: n as u64,
            block_size: block,
            converged,
        })
    }
}

/// Mean by plain summation in index order (deterministic).
fn mean_of(x: &[f64]) -> f64 {
    x.iter().sum::<f64>() / x.len() as f64
}

fn check_series(what: &'static str, series: &[f64]) -> Result<(), ObserveError> {
    if series.len() < 2 {
        return Err(ObserveError::TooFew { what, need: 2, got: series.len() });
    }
    if let Some(index) = series.iter().position(|v| !v.is_finite()) {
        return Err(ObserveError::NonFinite { what, index });
    }
    Ok(())
}
