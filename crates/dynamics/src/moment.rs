//! The total moment `sum_i mu_i S_i` in fixed point, so that a Monte Carlo sampler can
//! follow the magnetisation from the accepted moves instead of a pass over the spins per
//! sweep.
//!
//! Each site contributes `round(mu_i S_i,a 2^K)` per component `a`, an integer (rounded to
//! nearest, ties to even), and the total is their integer sum. So the total is a function
//! of the spins alone, not of the order of summation: the total a Metropolis sweep
//! gathers from the spins it decides ([`crate::SweepStats::moment`]) equals a fresh
//! evaluation ([`MomentTally::units`]) exactly, for any thread count and chunking. The magnetisation
//! `m = sum_i mu_i S_i / sum_i mu_i` (INTERFACE.md) follows by one division
//! ([`MomentTally::magnetization`]).
//!
//! `K` is chosen from the largest moment `mu_max` of the system so that every contribution
//! lies below `2^50` in magnitude (`mu_max 2^K <= 2^49`, and `|S_a| <= 1` up to rounding):
//! the resolution is `2^-K mu_max ~ 2^-49 mu_max` per site (about `4e-15 mu_max`), below
//! the rounding of a floating-point sum over the spins. A contribution then converts to an
//! integer by adding `1.5 * 2^52` and reading the bits, which vectorises on every
//! instruction-set level (a float-to-integer conversion of 64-bit lanes would not), and up
//! to `2^12` of them add up in an `i64` without overflow.

use rayon::prelude::*;
use spindrift_hamiltonian::{Hamiltonian, CHUNK};
use spindrift_lattice::Vec3;

/// `1.5 * 2^52`: for `|x| < 2^51`, the bits of `x + MAGIC` minus those of `MAGIC` are
/// `x` rounded to the nearest integer (ties to even).
const MAGIC: f64 = 6_755_399_441_055_744.0;

/// The bits of [`MAGIC`] as an integer.
const MAGIC_BITS: i64 = MAGIC.to_bits() as i64;

/// Sites per `i64` partial sum: `2^12` contributions below `2^50` each stay below `2^62`.
const SPAN: usize = 4096;

// The chunks of a full evaluation fit one `i64` partial sum.
const _: () = assert!(CHUNK <= SPAN);

/// One site's contribution `round(w s_a)`, `w = mu 2^K`, per component, offset by the bits
/// of [`MAGIC`] (a sum of `n` of them, wrapping, minus `n MAGIC_BITS` is the exact sum).
#[inline(always)]
fn biased_units(w: f64, s: Vec3) -> [i64; 3] {
    std::array::from_fn(|a| (s[a] * w + MAGIC).to_bits() as i64)
}

/// The fixed-point moment sum of at most [`SPAN`] spins of one basis site, of weight `w`
/// (see [`MomentTally::weight`]).
#[inline(always)]
pub(crate) fn moment_units(w: f64, spins: &[Vec3]) -> [i128; 3] {
    debug_assert!(spins.len() <= SPAN);
    let mut sum = [0i64; 3];
    for &s in spins {
        let u = biased_units(w, s);
        for a in 0..3 {
            sum[a] = sum[a].wrapping_add(u[a]);
        }
    }
    let bias = (spins.len() as i64).wrapping_mul(MAGIC_BITS);
    sum.map(|x| i128::from(x.wrapping_sub(bias)))
}

/// [`moment_units`] of spins given as three arrays of components (x, y, z) of one length:
/// the same integers.
#[inline(always)]
pub(crate) fn component_units(w: f64, spins: [&[f64]; 3]) -> [i128; 3] {
    let n = spins[0].len();
    debug_assert!(n <= SPAN && spins.iter().all(|c| c.len() == n));
    let bias = (n as i64).wrapping_mul(MAGIC_BITS);
    spins.map(|c| {
        let sum = c.iter().fold(0i64, |acc, &x| acc.wrapping_add((x * w + MAGIC).to_bits() as i64));
        i128::from(sum.wrapping_sub(bias))
    })
}

/// The per-site weights of the fixed-point moment sum of one system.
#[derive(Debug, Clone)]
pub struct MomentTally {
    /// `mu_b 2^K` of each basis site, μB (exact: a moment times a power of two).
    weight: Vec<f64>,
    /// Cells per row, `n1`: the sites of one basis site come in pieces of `n1`.
    n1: usize,
    /// `2^-K / sum_i mu_i` over the occupied sites (0 when there are none), 1/μB.
    to_magnetization: f64,
}

impl MomentTally {
    /// The weights of the sites of `h` (moments from its species).
    pub fn new(h: &Hamiltonian) -> Self {
        let cell = h.cell();
        let moment: Vec<f64> = cell.crystal().basis.iter().map(|b| h.species()[b.species].moment).collect();
        let largest = moment.iter().fold(0.0f64, |m, &x| m.max(x.abs()));
        // The smallest power of two at or above the largest moment, then K = 49 - its
        // exponent, so that mu_max 2^K <= 2^49.
        let mut exponent = 0i32;
        while largest > 0.0 && 2f64.powi(exponent) < largest {
            exponent += 1;
        }
        while largest > 0.0 && 2f64.powi(exponent - 1) >= largest {
            exponent -= 1;
        }
        let scale = 2f64.powi(49 - exponent);
        let mut total = 0.0;
        for (i, b) in (0..cell.len()).zip(cell.basis_from(0)) {
            if cell.is_occupied(i) {
                total += moment[b];
            }
        }
        let to_magnetization = if total > 0.0 { 1.0 / (scale * total) } else { 0.0 };
        let n1 = cell.cells()[0];
        Self { weight: moment.iter().map(|m| m * scale).collect(), n1, to_magnetization }
    }

    /// `mu_b 2^K` of basis site `b`, μB (the weight of [`moment_units`]).
    #[inline]
    pub(crate) fn weight(&self, b: usize) -> f64 {
        self.weight[b]
    }

    /// The fixed-point total `sum_i round(mu_i S_i 2^K)` of `spins` (one entry per site;
    /// zero on vacant sites), per component, in units of `2^-K` μB. Exact, so the same for
    /// any thread count.
    pub fn units(&self, spins: &[Vec3]) -> [i128; 3] {
        let (nb, n1) = (self.weight.len(), self.n1);
        spins
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(k, chunk)| {
                if nb == 1 {
                    return moment_units(self.weight[0], chunk);
                }
                // Each basis site's sites come in pieces of `n1` (see `Supercell`).
                let (mut sum, mut lo) = ([0; 3], 0);
                while lo < chunk.len() {
                    let i = k * CHUNK + lo;
                    let hi = (lo + n1 - i % n1).min(chunk.len());
                    sum = add(sum, moment_units(self.weight[(i / n1) % nb], &chunk[lo..hi]));
                    lo = hi;
                }
                sum
            })
            .reduce(|| [0; 3], add)
    }

    /// The magnetisation `sum_i mu_i S_i / sum_i mu_i` (dimensionless) of a fixed-point
    /// total from [`Self::units`] or [`crate::SweepStats::moment`].
    pub fn magnetization(&self, units: [i128; 3]) -> Vec3 {
        units.map(|u| u as f64 * self.to_magnetization)
    }
}

/// Component-wise sum of fixed-point totals.
#[inline]
pub(crate) fn add(a: [i128; 3], b: [i128; 3]) -> [i128; 3] {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}
