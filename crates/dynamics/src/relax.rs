//! Zero-temperature energy minimisation.
//!
//! # Method
//!
//! Projected steepest descent with Barzilai-Borwein step lengths (J. Barzilai and
//! J. M. Borwein, "Two-point step size gradient methods", IMA J. Numer. Anal. 8, 141
//! (1988)), on the product of unit spheres. The descent direction of site `i` is its
//! tangent field
//!
//! `g_i = -S_i x (S_i x B_i) = B_i - (S_i.B_i) S_i`  (T),
//!
//! which is the right-hand side of the damping-only flow `dS/dt = -S x (S x B)` (the
//! `alpha -> infinity` limit of the Landau-Lifshitz-Gilbert equation, time rescaled), and
//! `|g_i| = |S_i x B_i|` is the torque that the convergence test measures. One iteration is
//!
//! `S_i <- (S_i + tau g_i) / |S_i + tau g_i|`,
//!
//! with `tau` (1/T) from the last two iterates: with `s = S_k - S_{k-1}` and
//! `y = g_{k-1} - g_k` summed over all sites, `tau = s.s / s.y` (the "long" step) and
//! `tau = s.y / y.y` (the "short" step) taken alternately, a common practice for
//! Barzilai-Borwein methods on non-quadratic problems. The step is capped so that no spin
//! turns by more than [`MAX_TURN`] radians in one iteration, which keeps the first
//! iterations of a far-from-equilibrium state from overshooting; near a minimum the cap
//! grows without bound as the torque falls, leaving the Barzilai-Borwein steps free.
//!
//! One iteration costs one field evaluation (two passes over the spins), against two per
//! Heun step of a damped LLG run, and needs far fewer iterations: the step adapts to the
//! curvature of the energy instead of being held to the precession time scale of the
//! stiffest mode.
//!
//! # Use
//!
//! The engine steps with [`Relaxer::iterate`], observing and checkpointing as it likes;
//! [`Relaxer::relax`] is the plain loop to a tolerance. Sums over sites are added in fixed
//! chunks of [`CHUNK`] sites and then in chunk order, so the iterates are bitwise the same
//! for any thread count. Memory: three arrays of `N` 3-vectors (72 bytes per site).

use crate::error::{check_len, first_bad, StepError};
use rayon::prelude::*;
use spindrift_hamiltonian::{Hamiltonian, CHUNK};
use spindrift_lattice::{dot, Vec3};

/// Largest angle, rad, by which any spin may turn in one iteration.
pub const MAX_TURN: f64 = 0.3;

/// Step without curvature information, in units of the inverse of
/// [`Hamiltonian::max_field_bound`] (dimensionless; an explicit Euler step of the
/// damping flow with this step is stable for any curvature the system can have).
pub const FIRST_STEP: f64 = 0.5;

/// Parameters of a minimisation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RelaxParams {
    /// Converged when `max_i |S_i x B_i|` falls below this, T. Default `1e-4`.
    pub torque_tolerance: f64,
    /// Give up after this many iterations. Default `100_000`.
    pub max_iterations: u64,
}

impl Default for RelaxParams {
    fn default() -> Self {
        Self { torque_tolerance: 1e-4, max_iterations: 100_000 }
    }
}

/// Outcome of [`Relaxer::relax`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RelaxReport {
    /// Iterations taken (moves of the spins).
    pub steps: u64,
    /// Final `max_i |S_i x B_i|`, T.
    pub torque: f64,
    /// Whether the torque fell below the tolerance.
    pub converged: bool,
    /// Final energy, meV per spin.
    pub energy: f64,
}

/// Per-chunk partial results of the field pass.
#[derive(Debug, Clone, Copy, Default)]
struct Partial {
    ss: f64,
    sy: f64,
    yy: f64,
    torque2: f64,
    bad: Option<usize>,
}

/// The state a [`Relaxer`] carries between iterations, for checkpoints: restoring it with
/// [`Relaxer::restore`] continues bit for bit as if the run had not stopped.
#[derive(Debug, Clone, PartialEq)]
pub struct RelaxerState {
    /// Iterations taken so far.
    pub iteration: u64,
    /// Whether `difference` and `previous_torque` hold a previous iterate.
    pub has_previous: bool,
    /// `S_k - S_{k-1}` per site.
    pub difference: Vec<Vec3>,
    /// The tangent field `g_{k-1}` per site, T.
    pub previous_torque: Vec<Vec3>,
}

/// Barzilai-Borwein minimiser. Owns only scratch buffers; the caller owns the spins.
#[derive(Debug, Clone)]
pub struct Relaxer {
    /// Tangent field at the current spins, T.
    torque: Vec<Vec3>,
    /// `S_k - S_{k-1}`.
    difference: Vec<Vec3>,
    /// `g_{k-1}`, T.
    previous: Vec<Vec3>,
    partial: Vec<Partial>,
    has_previous: bool,
    iteration: u64,
}

impl Relaxer {
    /// A minimiser for the supercell of `h`.
    pub fn new(h: &Hamiltonian) -> Self {
        let n = h.len();
        Self {
            torque: vec![[0.0; 3]; n],
            difference: vec![[0.0; 3]; n],
            previous: vec![[0.0; 3]; n],
            partial: vec![Partial::default(); n.div_ceil(CHUNK)],
            has_previous: false,
            iteration: 0,
        }
    }

    /// Forgets the previous iterate, so that the next step length is chosen afresh, and
    /// sets the count of iterations taken, whose parity picks the long or the short
    /// Barzilai-Borwein step of each iteration. Call it after changing the spins or the
    /// Hamiltonian (e.g. the field) between iterations, with the count reached so far
    /// ([`Relaxer::iterations`]); a caller resumed from a checkpoint between two such
    /// changes (a field loop, between fields) passes the count it had reached before the
    /// stop, so as to continue bit for bit.
    pub fn reset_at(&mut self, iterations: u64) {
        self.has_previous = false;
        self.iteration = iterations;
    }

    /// Iterations taken since construction (or as set by [`Relaxer::reset_at`]).
    pub fn iterations(&self) -> u64 {
        self.iteration
    }

    /// Bytes of scratch memory per site.
    pub fn bytes_per_site(&self) -> usize {
        3 * std::mem::size_of::<Vec3>()
    }

    /// A copy of the state carried between iterations, for a checkpoint.
    pub fn state(&self) -> RelaxerState {
        RelaxerState {
            iteration: self.iteration,
            has_previous: self.has_previous,
            difference: self.difference.clone(),
            previous_torque: self.previous.clone(),
        }
    }

    /// Restores a state from [`Relaxer::state`].
    pub fn restore(&mut self, state: &RelaxerState) -> Result<(), StepError> {
        check_len(self.torque.len(), state.difference.len())?;
        check_len(self.torque.len(), state.previous_torque.len())?;
        self.iteration = state.iteration;
        self.has_previous = state.has_previous;
        self.difference.copy_from_slice(&state.difference);
        self.previous.copy_from_slice(&state.previous_torque);
        Ok(())
    }

    /// Measures the torque `max_i |S_i x B_i|` (T) of `spins` and returns it; when it is
    /// at least `tolerance` (T), also moves the spins by one iteration. So a returned value
    /// below `tolerance` means the spins as they now are have converged.
    ///
    /// On [`StepError::NonFinite`] (a non-finite field) the spins are untouched.
    pub fn iterate(&mut self, h: &Hamiltonian, spins: &mut [Vec3], tolerance: f64) -> Result<f64, StepError> {
        check_len(self.torque.len(), spins.len())?;
        check_len(self.torque.len(), h.len())?;
        if tolerance.is_nan() || tolerance < 0.0 {
            return Err(StepError::BadParameter {
                name: "torque_tolerance",
                value: tolerance,
                expected: ">= 0 T",
            });
        }
        let occupation = h.cell().occupation();
        let has_previous = self.has_previous;

        // Pass A: tangent field, torque, and the Barzilai-Borwein inner products.
        {
            let spins: &[Vec3] = spins;
            let field_chunk =
                |start: usize, g: &mut [Vec3], diff: &[Vec3], prev: &[Vec3], part: &mut Partial| {
                    h.field_range(spins, start, g);
                    let mut p = Partial::default();
                    for k in 0..g.len() {
                        let i = start + k;
                        if occupation.is_some_and(|o| !o[i]) {
                            continue;
                        }
                        let s = spins[i];
                        let b = g[k];
                        let sb = dot(s, b);
                        let t = [b[0] - sb * s[0], b[1] - sb * s[1], b[2] - sb * s[2]];
                        g[k] = t;
                        let t2 = dot(t, t);
                        if !t2.is_finite() {
                            p.bad = first_bad(p.bad, Some(i));
                        }
                        p.torque2 = p.torque2.max(t2);
                        if has_previous {
                            let d = diff[k];
                            let y = [prev[k][0] - t[0], prev[k][1] - t[1], prev[k][2] - t[2]];
                            p.ss += dot(d, d);
                            p.sy += dot(d, y);
                            p.yy += dot(y, y);
                        }
                    }
                    *part = p;
                };
            if spins.len() <= CHUNK {
                field_chunk(0, &mut self.torque, &self.difference, &self.previous, &mut self.partial[0]);
            } else {
                self.torque
                    .par_chunks_mut(CHUNK)
                    .zip(self.difference.par_chunks(CHUNK))
                    .zip(self.previous.par_chunks(CHUNK))
                    .zip(self.partial.par_iter_mut())
                    .enumerate()
                    .for_each(|(k, (((g, d), p), part))| field_chunk(k * CHUNK, g, d, p, part));
            }
        }
        let mut total = Partial::default();
        for p in &self.partial {
            total.ss += p.ss;
            total.sy += p.sy;
            total.yy += p.yy;
            total.torque2 = total.torque2.max(p.torque2);
            total.bad = first_bad(total.bad, p.bad);
        }
        if let Some(site) = total.bad {
            return Err(StepError::NonFinite { site, step: self.iteration });
        }
        let torque = total.torque2.sqrt();
        if torque < tolerance || torque == 0.0 {
            return Ok(torque);
        }

        let cap = MAX_TURN.tan() / torque;
        let tau = if has_previous && total.sy > 0.0 && total.yy > 0.0 {
            let bb = if self.iteration % 2 == 1 { total.ss / total.sy } else { total.sy / total.yy };
            bb.min(cap)
        } else {
            // No usable curvature yet (first iteration, or s.y <= 0 away from a
            // minimum): an explicit step of the damping flow that is small against the
            // stiffest curvature the Hamiltonian can have, so that a spin in a shallow
            // metastable well (a hysteresis loop just below its switching field) is not
            // thrown over the barrier before the curvature is known.
            cap.min(FIRST_STEP / h.max_field_bound().max(f64::MIN_POSITIVE))
        };

        // Pass B: move, and keep what the next step length needs.
        let update_chunk =
            |start: usize, out: &mut [Vec3], g: &[Vec3], diff: &mut [Vec3], prev: &mut [Vec3]| {
                for k in 0..out.len() {
                    let i = start + k;
                    if occupation.is_some_and(|o| !o[i]) {
                        continue;
                    }
                    let s = out[k];
                    let t = g[k];
                    let v = [s[0] + tau * t[0], s[1] + tau * t[1], s[2] + tau * t[2]];
                    // |v|^2 = 1 + tau^2 |g|^2 >= 1 since g is tangent: the norm cannot vanish.
                    let inv = 1.0 / dot(v, v).sqrt();
                    let n = [v[0] * inv, v[1] * inv, v[2] * inv];
                    diff[k] = [n[0] - s[0], n[1] - s[1], n[2] - s[2]];
                    prev[k] = t;
                    out[k] = n;
                }
            };
        if spins.len() <= CHUNK {
            update_chunk(0, spins, &self.torque, &mut self.difference, &mut self.previous);
        } else {
            spins
                .par_chunks_mut(CHUNK)
                .zip(self.torque.par_chunks(CHUNK))
                .zip(self.difference.par_chunks_mut(CHUNK))
                .zip(self.previous.par_chunks_mut(CHUNK))
                .enumerate()
                .for_each(|(k, (((s, g), d), p))| update_chunk(k * CHUNK, s, g, d, p));
        }
        self.has_previous = true;
        self.iteration += 1;
        Ok(torque)
    }

    /// Iterates until the torque falls below `params.torque_tolerance` or
    /// `params.max_iterations` iterations have been taken in this call.
    pub fn relax(
        &mut self,
        h: &Hamiltonian,
        spins: &mut [Vec3],
        params: &RelaxParams,
    ) -> Result<RelaxReport, StepError> {
        let start = self.iteration;
        let torque = loop {
            // Once the budget is spent, only measure where the spins ended.
            let spent = self.iteration - start >= params.max_iterations;
            let tolerance = if spent { f64::INFINITY } else { params.torque_tolerance };
            let torque = self.iterate(h, spins, tolerance)?;
            if spent || torque < params.torque_tolerance || torque == 0.0 {
                break torque;
            }
        };
        let converged = torque < params.torque_tolerance || torque == 0.0;
        let energy = h.energy_total(spins) / h.spin_count().max(1) as f64;
        Ok(RelaxReport { steps: self.iteration - start, torque, converged, energy })
    }
}

/// Minimises the energy of `spins` with a fresh [`Relaxer`] (see the module documentation).
pub fn relax(h: &Hamiltonian, spins: &mut [Vec3], params: &RelaxParams) -> Result<RelaxReport, StepError> {
    Relaxer::new(h).relax(h, spins, params)
}
