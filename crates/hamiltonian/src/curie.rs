//! Curie-temperature estimates from the couplings: mean field and RPA (Tyablikov), for
//! classical spins and a ferromagnetic (all sublattices parallel) order.
//!
//! Sites are reduced to *sublattices*: one per basis site and per cell along every open
//! axis (a film of `N` layers has `N` of them per basis site), while periodic axes are
//! treated in the bulk limit through the Fourier transform `J_rs(q)` of the isotropic
//! couplings (`J` plus a third of a tensor's trace; DMI does not enter at this level).
//! Dilution enters as the virtual-crystal average, each bond weighted by the occupancy of
//! its far end: `A_rs(q) = J_rs(q) c_s`. That matrix is not Hermitian when the sublattices'
//! occupancies differ, but `C^(1/2) J(q) C^(1/2)`, entries `J_rs(q) sqrt(c_r c_s)`, is, and
//! it is similar to `A(q)` (by `C^(1/2)`), so it has the same eigenvalues, and the diagonal
//! of the inverse below is the same for both: the estimates use it.
//!
//! - Mean field: `kB T = lambda_max(J(0)) / 3` (for one sublattice `z J / 3`), the
//!   eigenvalue found by bisection on the band (see below).
//! - RPA: `1/(kB T) = (3/R) sum_r < [N(q)^-1]_rr >_q`, with
//!   `N_rs(q) = delta_rs (sum_t J_rt(0) + Delta_r) - J_rs(q)` and `R` sublattices; for one
//!   sublattice `kB T = [ 3 < 1/(J(0) - J(q)) >_q ]^-1`. `Delta_r = 2 max(k_r, 0)` is the
//!   gap an easy-axis anisotropy opens (an approximation that keeps films finite; without
//!   it an isotropic system periodic in at most two directions has `T = 0`, as the
//!   Mermin-Wagner theorem requires). The Brillouin-zone average uses midpoint grids
//!   refined until two Richardson-extrapolated values agree to 0.05%.
//!
//! Sublattices are numbered along the open axes (`a1` fastest), so `N(q)` is a band
//! matrix: a film's couplings reach a few layers, and its matrix has `N_rs = 0` beyond
//! `|r - s|` of a few basis sites. The diagonal of `N(q)^-1` comes from the band's
//! `L D L^H` factorisation and the selected inverse within the band (Takahashi's
//! recurrence: K. Takahashi, J. Fagan and M.-S. Chin, Formation of a sparse bus impedance
//! matrix and its application to short circuit study, 8th PICA Conference, 1973; A. M.
//! Erisman and W. F. Tinney, Commun. ACM 18, 177 (1975)), `O(n w^2)` operations for `n`
//! sublattices and half-bandwidth `w` instead of the `O(n^3)` of a dense inverse; the same
//! factorisation of `sigma 1 - J(0)` tells whether `sigma` lies above `lambda_max`, and
//! bisection on that finds it. Open axes are numbered from the shortest to the longest,
//! which keeps `w` small for films and wires; the estimates are skipped where
//! `n (w + 1)^2` exceeds [`MAX_BAND_COST`] (an island beyond about 110 by 110 cells, a box
//! open along all three axes beyond about 14 cells a side).
//!
//! Both are estimates of the model, not of the material: mean field ignores
//! fluctuations and overestimates `Tc`; RPA is usually closer to Monte Carlo.

use crate::constants::K_B;
use crate::hamiltonian::Hamiltonian;
use nalgebra::{Complex, ComplexField};
use spindrift_lattice::Bond;

/// The estimates `spindrift check` prints.
#[derive(Debug, Clone, PartialEq)]
pub struct CurieEstimates {
    /// Mean-field Curie temperature, K.
    pub mean_field: f64,
    /// RPA Curie temperature, K, where it could be computed.
    pub rpa: Option<f64>,
    /// A remark on how the numbers were obtained or why one is missing.
    pub note: Option<String>,
}

/// Largest `n (w + 1)^2` (sublattices times the squared band) for which the estimates are
/// made, about 3 s of them on a 2.4 GHz core (the mean field takes about 45 real band
/// factorisations, the RPA one complex factorisation and selected inverse per grid point).
/// A film of any practical thickness is far below it (a bcc film of 10^4 layers: 2 10^4
/// sublattices, `w` = 2); so is an island or a wire up to about 110 by 110 cells in
/// cross-section (`12100 (111)^2`); a box open along all three axes, whose couplings reach
/// a whole layer of sublattices ahead, only up to about 14 cells a side.
pub const MAX_BAND_COST: usize = 150_000_000;

/// The sublattices' count and numbering, known before any coupling is listed: the basis
/// site fastest, then the open axes from the shortest to the longest, so that the couplings
/// of a film, a wire or a slab reach as few sublattices ahead as the geometry allows (the
/// half-bandwidth of `N(q)`).
struct Shape {
    /// Open-axis extents in cells (1 along periodic axes).
    ext: [usize; 3],
    /// Index step of one cell along each axis (0 along periodic axes).
    stride: [usize; 3],
    nb: usize,
}

impl Shape {
    fn of(h: &Hamiltonian) -> Self {
        let cell = h.cell();
        let (cells, periodic, nb) = (cell.cells(), cell.periodic(), cell.basis_len());
        let ext = [0, 1, 2].map(|k| if periodic[k] { 1 } else { cells[k] });
        let mut order = [0, 1, 2];
        order.sort_by_key(|&k| ext[k]);
        let mut stride = [0; 3];
        let mut step = nb;
        for k in order {
            if ext[k] > 1 {
                stride[k] = step;
                step *= ext[k];
            }
        }
        Self { ext, stride, nb }
    }

    fn size(&self) -> usize {
        self.ext[0] * self.ext[1] * self.ext[2] * self.nb
    }

    fn index(&self, c: [usize; 3], b: usize) -> usize {
        c[0] * self.stride[0] + c[1] * self.stride[1] + c[2] * self.stride[2] + b
    }

    /// The half-bandwidth the couplings give, from the bond table alone (a coupling that
    /// spans as many cells as an open axis has, or more, links nothing and does not count).
    fn bandwidth(&self, h: &Hamiltonian) -> usize {
        let periodic = h.cell().periodic();
        let mut w = 0;
        for b in 0..self.nb {
            for bond in h.bonds().from_basis(b) {
                if isotropic_j(bond) == 0.0 {
                    continue;
                }
                let mut reach = bond.to as i64 - b as i64;
                let mut links = true;
                for k in (0..3).filter(|&k| !periodic[k]) {
                    let o = bond.offset[k] as i64;
                    links &= o.unsigned_abs() < self.ext[k] as u64;
                    reach += o * self.stride[k] as i64;
                }
                if links {
                    w = w.max(reach.unsigned_abs() as usize);
                }
            }
        }
        w
    }
}

/// The isotropic part of a bond's coupling, meV: `J` plus a third of a tensor's trace.
fn isotropic_j(bond: &Bond) -> f64 {
    let cp = &bond.coupling;
    cp.j + cp.tensor.map_or(0.0, |t| (t[0][0] + t[1][1] + t[2][2]) / 3.0)
}

struct Reduced {
    /// Sublattices (`Shape::size`).
    n: usize,
    /// Couplings `(r, s, J, offset along periodic axes)`, meV, not weighted by occupancy.
    links: Vec<(usize, usize, f64, [i32; 3])>,
    /// Occupancy of each sublattice.
    occ: Vec<f64>,
    /// Periodic axes that carry bonds.
    axes: Vec<usize>,
    gap: Vec<f64>,
}

impl Reduced {
    fn size(&self) -> usize {
        self.n
    }

    fn build(h: &Hamiltonian, shape: &Shape) -> Self {
        let cell = h.cell();
        let cells = cell.cells();
        let periodic = cell.periodic();
        let nb = cell.basis_len();
        let ext = shape.ext;
        let occ: Vec<f64> = cell.crystal().basis.iter().map(|s| s.occupancy).collect();
        let mut links = Vec::new();
        let mut axes = Vec::new();
        for c3 in 0..ext[2] {
            for c2 in 0..ext[1] {
                for c1 in 0..ext[0] {
                    for b in 0..nb {
                        for bond in h.bonds().from_basis(b) {
                            let j = isotropic_j(bond);
                            if j == 0.0 {
                                continue;
                            }
                            let mut t = [0usize; 3];
                            let mut phase = [0i32; 3];
                            let mut ok = true;
                            for k in 0..3 {
                                let c = [c1, c2, c3][k] as i64;
                                if periodic[k] {
                                    phase[k] = bond.offset[k];
                                    if bond.offset[k] != 0 && !axes.contains(&k) {
                                        axes.push(k);
                                    }
                                } else {
                                    let x = c + bond.offset[k] as i64;
                                    if x < 0 || x >= cells[k] as i64 {
                                        ok = false;
                                    } else {
                                        t[k] = x as usize;
                                    }
                                }
                            }
                            if ok {
                                links.push((shape.index([c1, c2, c3], b), shape.index(t, bond.to), j, phase));
                            }
                        }
                    }
                }
            }
        }
        axes.sort_unstable();
        // The basis site is the fastest index (`Shape::index`).
        let n = shape.size();
        let gap = (0..n)
            .map(|r| {
                let b = r % nb;
                let s = &h.species()[cell.crystal().basis[b].species];
                2.0 * s.anisotropy.max(0.0)
            })
            .collect();
        let occ = (0..n).map(|r| occ[r % nb]).collect();
        Self { n, links, occ, axes, gap }
    }

    /// The largest eigenvalue of `C^(1/2) J(0) C^(1/2)` (entries `J_rs(0) sqrt(c_r c_s)`,
    /// symmetrised), meV, by bisection on positive definiteness: `sigma 1 - J(0)` has an
    /// `L D L^T` factorisation with positive pivots exactly when `sigma` lies above every
    /// eigenvalue (Sylvester's law of inertia; the bisection of J. W. Givens's method, see
    /// G. H. Golub and C. F. Van Loan, Matrix Computations, 4th ed. (2013), sec. 8.4).
    /// Bracketed below by the largest diagonal entry and the Rayleigh quotient of the
    /// uniform vector, above by Gershgorin's bound; refined to 1e-13 of the larger bound.
    /// `band` holds `n (w + 1)` numbers.
    fn largest_j0_eigenvalue(&self, w: usize, band: &mut [f64]) -> f64 {
        let n = self.size();
        let stride = w + 1;
        // The lower band of the symmetrised J(0): each link between two sublattices adds
        // half its weight to the entry (max, min) and its reverse the other half; a link
        // from a sublattice to itself (through a periodic axis) adds its whole weight.
        let mut j0 = vec![0.0; n * stride];
        for &(r, s, j, _) in &self.links {
            let x = j * (self.occ[r] * self.occ[s]).sqrt();
            let (hi, lo) = (r.max(s), r.min(s));
            j0[lo * stride + (hi - lo)] += if r == s { x } else { 0.5 * x };
        }
        let (mut diag, mut total, mut gershgorin) = (f64::MIN, 0.0, vec![0.0; n]);
        for c in 0..n {
            diag = diag.max(j0[c * stride]);
            total += j0[c * stride];
            gershgorin[c] += j0[c * stride];
            for k in 1..stride.min(n - c) {
                let x = j0[c * stride + k];
                total += 2.0 * x;
                gershgorin[c] += x.abs();
                gershgorin[c + k] += x.abs();
            }
        }
        let mut lo = diag.max(total / n as f64);
        let mut hi = gershgorin.iter().copied().fold(f64::MIN, f64::max).max(lo);
        let mut above = |sigma: f64| {
            for (b, &x) in band.iter_mut().zip(&j0) {
                *b = -x;
            }
            for c in 0..n {
                band[c * stride] += sigma;
            }
            band_factorise(band, n, w)
        };
        // About 45 halvings from a bracket of the order of the value itself.
        let tol = 1e-13 * hi.abs().max(lo.abs());
        while hi - lo > tol {
            let mid = 0.5 * (lo + hi);
            if mid <= lo || mid >= hi {
                break;
            }
            if above(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        hi
    }

    /// The half-bandwidth of the couplings: the largest `|r - s|` of a link (0 without).
    fn bandwidth(&self) -> usize {
        self.links.iter().map(|&(r, s, _, _)| r.abs_diff(s)).max().unwrap_or(0)
    }

    /// The lower band of `N(q) = diag(sum_t J_rt(0) c_t + Delta_r) - C^(1/2) J(q) C^(1/2)`,
    /// meV: `band[r (w + 1) + k] = N_{r+k, r}` for `k = 0 ..= w` (entries past the matrix's
    /// end are zero).
    fn band_nq(&self, q: [f64; 3], row_sums: &[f64], w: usize, band: &mut [Complex<f64>]) {
        band.fill(Complex::new(0.0, 0.0));
        for (r, (&sum, &gap)) in row_sums.iter().zip(&self.gap).enumerate() {
            band[r * (w + 1)] = Complex::new(sum + gap, 0.0);
        }
        for &(r, s, j, o) in &self.links {
            // The lower triangle only: the upper is its conjugate (each link has its
            // reverse, with the opposite phase).
            if s < r {
                continue;
            }
            let phi = q[0] * o[0] as f64 + q[1] * o[1] as f64 + q[2] * o[2] as f64;
            let w8 = j * (self.occ[r] * self.occ[s]).sqrt();
            // N_sr = -J_sr(q) = -conj(J_rs(q)).
            band[r * (w + 1) + (s - r)] -= Complex::new(w8 * phi.cos(), -w8 * phi.sin());
        }
    }

    /// The virtual-crystal exchange field of each sublattice in the ferromagnetic state,
    /// `sum_s J_rs(0) c_s`, meV.
    fn field_sums(&self) -> Vec<f64> {
        let mut sums = vec![0.0; self.size()];
        for &(r, s, j, _) in &self.links {
            sums[r] += j * self.occ[s];
        }
        sums
    }
}

/// Mean-field and RPA Curie temperatures of the ferromagnetic state of `h`.
pub fn curie_estimates(h: &Hamiltonian) -> CurieEstimates {
    // The cost is known from the bond table before any coupling is listed, so that a large
    // box open along every axis is refused without listing its millions of links.
    let shape = Shape::of(h);
    let n = shape.size();
    let reach = shape.bandwidth(h).min(n - 1);
    let cost = n.saturating_mul((reach + 1).pow(2));
    if cost > MAX_BAND_COST {
        return CurieEstimates {
            mean_field: f64::NAN,
            rpa: None,
            note: Some(format!(
                "estimates skipped: {n} sublattices along open axes (one per basis site and cell), each coupled \
                 to sublattices up to {reach} places ahead in their numbering, so the band solver would take \
                 n (w + 1)^2 = {cost:.1e} operations per factorisation, above its limit of {MAX_BAND_COST:.1e}; \
                 fewer open axes (a film or a wire) or fewer cells along them are estimated",
                cost = cost as f64,
                MAX_BAND_COST = MAX_BAND_COST as f64
            )),
        };
    }
    let red = Reduced::build(h, &shape);
    // The band the listed links occupy: `reach` by construction, but taken from the links
    // themselves, so that the band can never be narrower than what is written into it.
    let w = red.bandwidth().min(n - 1);
    let lambda = red.largest_j0_eigenvalue(w, &mut vec![0.0; n * (w + 1)]);
    let mean_field = (lambda / (3.0 * K_B)).max(0.0);
    if lambda <= 0.0 {
        return CurieEstimates {
            mean_field: 0.0,
            rpa: Some(0.0),
            note: Some("no ferromagnetic coupling".into()),
        };
    }
    let row_sums = red.field_sums();
    let gapless = red.gap.iter().all(|&g| g == 0.0);
    if gapless && red.axes.len() <= 2 {
        return CurieEstimates {
            mean_field,
            rpa: Some(0.0),
            note: Some(
                "isotropic couplings periodic in at most two directions: no order above 0 K (Mermin-Wagner); RPA gives 0"
                    .into(),
            ),
        };
    }
    let mut band = vec![Complex::new(0.0, 0.0); n * (w + 1)];
    let mut work = vec![Complex::new(0.0, 0.0); n * (w + 1)];
    let mut mean_inverse = |m: usize| -> Option<f64> {
        // Average of (1/R) tr N(q)^-1 over an m^d midpoint grid of the periodic axes.
        let d = red.axes.len();
        let points = m.pow(d as u32);
        let mut total = 0.0;
        for p in 0..points {
            let mut q = [0.0; 3];
            let mut rest = p;
            for &k in &red.axes {
                q[k] = std::f64::consts::TAU * ((rest % m) as f64 + 0.5) / m as f64;
                rest /= m;
            }
            red.band_nq(q, &row_sums, w, &mut band);
            // None where N(q) is not positive definite.
            total += band_inverse_trace(&mut band, n, w, &mut work)? / n as f64;
        }
        Some(total / points as f64)
    };
    let d = red.axes.len();
    // Grid points allowed: up to 4e6, and as many as about 2e9 operations of the band
    // factorisations allow (`n (w + 1)^2` each; a second or two), which lets a film with a
    // small anisotropy gap (a sharp peak at q = 0 in two dimensions) refine its grid far
    // enough: a budget of 4e6 / n^2 points stopped bcc 64 x 64 x 16 (32 sublattices, gap
    // 0.4 meV against J(0) = 40 meV) at 32 x 32 without converging.
    let budget = (2_000_000_000usize / (n * (w + 1) * (w + 1)).max(1)).min(4_000_000);
    let mut m = 8usize;
    let mut prev: Option<f64> = None;
    let mut prev_ext: Option<f64> = None;
    let mut result = None;
    // Whether N(q) was not positive definite at some q: the ferromagnetic state is then no
    // minimum of the couplings (J(q) above J(0) somewhere), and RPA has nothing to expand.
    let mut unstable = false;
    while m.pow(d as u32) <= budget.max(1) {
        let Some(s) = mean_inverse(m) else {
            unstable = true;
            break;
        };
        if d == 0 {
            result = Some(s);
            break;
        }
        if let Some(p) = prev {
            // The 1/q^2 Goldstone singularity in three periodic dimensions makes the
            // midpoint error fall like 1/m; Richardson removes that leading term.
            let ext = 2.0 * s - p;
            if (s - p).abs() < 5e-4 * s {
                result = Some(s);
                break;
            }
            if let Some(pe) = prev_ext {
                if (ext - pe).abs() < 5e-4 * ext {
                    result = Some(ext);
                    break;
                }
            }
            prev_ext = Some(ext);
        }
        prev = Some(s);
        m *= 2;
    }
    match result {
        Some(s) if s > 0.0 => CurieEstimates { mean_field, rpa: Some(1.0 / (3.0 * s * K_B)), note: None },
        _ if unstable => CurieEstimates {
            mean_field,
            rpa: None,
            note: Some(
                "the ferromagnetic state is not the lowest of these couplings (J(q) exceeds J(0) at some q), \
                 so neither estimate describes the order; RPA not computed"
                    .into(),
            ),
        },
        _ => CurieEstimates {
            mean_field,
            rpa: None,
            note: Some("RPA average did not converge within the grid budget".into()),
        },
    }
}

/// Factorises the Hermitian band matrix `N` (lower band in `band`, as in
/// [`band_inverse_trace`]) in place as `L D L^H`: `band[j (w + 1)] = d_j` (real),
/// `band[j (w + 1) + k] = L_{j+k, j}`. Returns whether every pivot `d_j` is positive, that
/// is whether `N` is positive definite (a NaN counts as not); on `false` the band is left
/// part-factorised. Complex for `N(q)`, real for the mean field's `sigma 1 - J(0)`.
fn band_factorise<T: ComplexField<RealField = f64> + Copy>(band: &mut [T], n: usize, w: usize) -> bool {
    let stride = w + 1;
    for j in 0..n {
        let lo = j.saturating_sub(w);
        let mut d = band[j * stride].real();
        for k in lo..j {
            d -= band[k * stride + (j - k)].modulus_squared() * band[k * stride].real();
        }
        if d.is_nan() || d <= 0.0 {
            return false;
        }
        band[j * stride] = T::from_real(d);
        for i in j + 1..(j + stride).min(n) {
            let mut x = band[j * stride + (i - j)];
            // Columns k < j with both L_ik and L_jk inside the band.
            for k in i.saturating_sub(w)..j {
                x -= (band[k * stride + (i - k)] * band[k * stride + (j - k)].conjugate())
                    .scale(band[k * stride].real());
            }
            band[j * stride + (i - j)] = x.unscale(d);
        }
    }
    true
}

/// The trace of `N^-1`, real part, for the Hermitian matrix `N` whose lower band is
/// `band` (`band[r (w + 1) + k] = N_{r+k, r}`, see [`Reduced::band_nq`]; overwritten with
/// the factor), or `None` if `N` is not positive definite. `work` holds `n (w + 1)`
/// numbers.
///
/// `N = L D L^H` with `L` unit lower triangular, as banded as `N`, and `D` real; then the
/// entries of `Z = N^-1` within the band follow from the last row up,
/// `Z_ij = delta_ij / d_i - sum_{k > i} conj(L_ki) Z_kj` for `j >= i` (Takahashi et al. 1973;
/// Erisman and Tinney 1975), each sum over at most `w` terms that are already known.
fn band_inverse_trace(
    band: &mut [Complex<f64>],
    n: usize,
    w: usize,
    work: &mut [Complex<f64>],
) -> Option<f64> {
    if !band_factorise(band, n, w) {
        return None;
    }
    let stride = w + 1;
    let zero = Complex::new(0.0, 0.0);
    // Selected inverse: work[i stride + k] = Z_{i, i+k}.
    let z = |work: &[Complex<f64>], a: usize, b: usize| {
        if a <= b {
            work[a * stride + (b - a)]
        } else {
            work[b * stride + (a - b)].conj()
        }
    };
    let mut trace = 0.0;
    for i in (0..n).rev() {
        let hi = (i + stride).min(n);
        for j in (i + 1..hi).rev() {
            let mut x = zero;
            for k in i + 1..hi {
                x -= band[i * stride + (k - i)].conj() * z(work, k, j);
            }
            work[i * stride + (j - i)] = x;
        }
        let mut x = Complex::new(1.0 / band[i * stride].re, 0.0);
        for k in i + 1..hi {
            x -= band[i * stride + (k - i)].conj() * z(work, k, i);
        }
        work[i * stride] = x;
        trace += x.re;
    }
    Some(trace)
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::DMatrix;

    /// A random Hermitian matrix with half-bandwidth `w`, made positive definite (or not)
    /// by its diagonal.
    fn banded(n: usize, w: usize, seed: u64, shift: f64) -> DMatrix<Complex<f64>> {
        let mut state = seed;
        let mut next = move || {
            state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        let mut m = DMatrix::from_element(n, n, Complex::new(0.0, 0.0));
        for r in 0..n {
            for s in r + 1..n.min(r + w + 1) {
                let x = Complex::new(next(), next());
                m[(s, r)] = x;
                m[(r, s)] = x.conj();
            }
        }
        for r in 0..n {
            m[(r, r)] = Complex::new(shift + next(), 0.0);
        }
        m
    }

    fn lower_band(m: &DMatrix<Complex<f64>>, w: usize) -> Vec<Complex<f64>> {
        let n = m.nrows();
        let mut band = vec![Complex::new(0.0, 0.0); n * (w + 1)];
        for r in 0..n {
            for k in 0..=w.min(n - 1 - r) {
                band[r * (w + 1) + k] = m[(r + k, r)];
            }
        }
        band
    }

    /// The band solver's trace of the inverse against nalgebra's dense inverse (a
    /// general-purpose reference library), from a tridiagonal matrix to a full one.
    #[test]
    fn band_inverse_trace_matches_the_dense_inverse() {
        for (n, w) in [(1, 0), (5, 1), (12, 2), (40, 3), (33, 7), (9, 8)] {
            for seed in 0..3 {
                let m = banded(n, w, seed, 2.0 * w as f64 + 2.0);
                let expect = m.clone().try_inverse().unwrap().diagonal().iter().map(|z| z.re).sum::<f64>();
                let mut band = lower_band(&m, w);
                let mut work = vec![Complex::new(0.0, 0.0); n * (w + 1)];
                let got = band_inverse_trace(&mut band, n, w, &mut work).unwrap();
                assert!((got - expect).abs() <= 1e-12 * expect.abs(), "n {n} w {w}: {got} against {expect}");
            }
        }
    }

    /// A Hermitian matrix with a negative eigenvalue has no `L D L^H` with positive `D`.
    #[test]
    fn band_inverse_trace_refuses_an_indefinite_matrix() {
        let m = banded(20, 2, 1, 0.0);
        let lowest = m.clone().symmetric_eigenvalues().iter().copied().fold(f64::MAX, f64::min);
        assert!(lowest < 0.0);
        let mut band = lower_band(&m, 2);
        let mut work = vec![Complex::new(0.0, 0.0); 20 * 3];
        assert_eq!(band_inverse_trace(&mut band, 20, 2, &mut work), None);
    }

    /// The bisection's largest eigenvalue of `C^(1/2) J(0) C^(1/2)` against nalgebra's dense
    /// symmetric eigenvalues (a general-purpose reference library): random couplings of
    /// either sign within a band, each link with its reverse, links from a sublattice to
    /// itself, and random occupancies.
    #[test]
    fn bisection_finds_the_dense_largest_eigenvalue() {
        let mut state = 7u64;
        let mut next = move || {
            state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        for (n, w) in [(1, 0), (2, 1), (17, 2), (60, 5), (31, 30)] {
            let occ: Vec<f64> = (0..n).map(|_| 0.3 + 0.7 * next()).collect();
            let mut links = Vec::new();
            for r in 0..n {
                let own = 4.0 * next() - 1.0;
                links.push((r, r, own, [1, 0, 0]));
                links.push((r, r, own, [-1, 0, 0]));
                for s in r + 1..n.min(r + w + 1) {
                    let j = 10.0 * next() - 3.0;
                    links.push((r, s, j, [0, 1, 0]));
                    links.push((s, r, j, [0, -1, 0]));
                }
            }
            let red = Reduced { n, links, occ, axes: vec![0, 1], gap: vec![0.0; n] };
            let mut dense = DMatrix::<f64>::zeros(n, n);
            for &(r, s, j, _) in &red.links {
                dense[(r, s)] += j * (red.occ[r] * red.occ[s]).sqrt();
            }
            let expect = dense.symmetric_eigenvalues().iter().copied().fold(f64::MIN, f64::max);
            let got = red.largest_j0_eigenvalue(w, &mut vec![0.0; n * (w + 1)]);
            assert!(
                (got - expect).abs() <= 1e-11 * expect.abs().max(1.0),
                "n {n} w {w}: {got} against {expect}"
            );
        }
    }
}
