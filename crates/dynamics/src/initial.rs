//! Initial spin states (INTERFACE.md, `[initial]`).
//!
//! Every function writes one unit vector per occupied site into the caller's array and
//! `[0, 0, 0]` on vacant sites. Positions are [`spindrift_lattice::Supercell::position`]
//! (Å, from the origin of cell `(0, 0, 0)`).
//!
//! * [`uniform`]: every spin along one direction.
//! * [`random`]: independent directions uniform on the sphere, from stream 2 of the seed.
//! * [`skyrmion`]: one skyrmion tube along the layer normal, its core against the
//!   background direction.
//! * [`helix`]: a flat spiral `S = cos(q.r) z + sin(q.r) x_perp`.
//! * [`from_spins`]: spins given by the caller (e.g. read from a run folder), checked and
//!   normalised.
//!
//! [`InitialState`] names one of these with its parameters.

use crate::error::InitError;
use spindrift_hamiltonian::Hamiltonian;
use spindrift_lattice::{cross, dot, norm, Vec3};
use spindrift_noise::{NoiseStream, STREAM_INITIAL_STATE};

/// An initial state and its parameters.
#[derive(Debug, Clone, PartialEq)]
pub enum InitialState {
    /// Every spin along `direction` (any non-zero length).
    Uniform {
        /// Direction, normalised on use.
        direction: Vec3,
    },
    /// Uniformly random directions from the run's seed.
    Random,
    /// One skyrmion; see [`skyrmion`].
    Skyrmion {
        /// Centre in fractions of the supercell along `a1` and `a2`.
        center: [f64; 2],
        /// Radius (where the spin lies in the plane), Å.
        radius: f64,
        /// Helicity, degrees; `None` takes [`favoured_helicity_for`] the background.
        helicity_deg: Option<f64>,
        /// Background direction (default `+z`).
        background: Vec3,
    },
    /// A flat spiral; see [`helix`].
    Helix {
        /// Wave vector, 1/Å.
        wavevector: Vec3,
        /// The `z` of the formula: the spin direction at zero phase (default `+z`).
        axis: Vec3,
    },
    /// Spins given one per site; see [`from_spins`].
    Given(Vec<Vec3>),
}

impl InitialState {
    /// Writes this state into `spins` (one entry per site of `h`'s supercell). `seed` is the
    /// run's seed, used by [`InitialState::Random`].
    pub fn apply(&self, h: &Hamiltonian, spins: &mut [Vec3], seed: u64) -> Result<(), InitError> {
        match self {
            Self::Uniform { direction } => uniform(h, spins, *direction),
            Self::Random => random(h, spins, seed),
            Self::Skyrmion { center, radius, helicity_deg, background } => {
                let helicity = match helicity_deg {
                    Some(x) => *x,
                    None => favoured_helicity_for(h, unit(*background, "skyrmion background")?),
                };
                skyrmion(h, spins, *center, *radius, helicity, *background)
            }
            Self::Helix { wavevector, axis } => helix(h, spins, *wavevector, *axis),
            Self::Given(given) => from_spins(h, spins, given),
        }
    }
}

fn check_len(h: &Hamiltonian, spins: &[Vec3]) -> Result<(), InitError> {
    if spins.len() == h.len() {
        Ok(())
    } else {
        Err(InitError::LengthMismatch { expected: h.len(), got: spins.len() })
    }
}

fn unit(v: Vec3, what: &'static str) -> Result<Vec3, InitError> {
    let l = norm(v);
    if l.is_finite() && l > 0.0 {
        Ok([v[0] / l, v[1] / l, v[2] / l])
    } else {
        Err(InitError::BadDirection { what, value: v })
    }
}

/// A unit vector perpendicular to the unit vector `a`.
fn perpendicular(a: Vec3) -> Vec3 {
    // Cross with the coordinate axis least aligned with `a`, which is never parallel to it.
    let e = if a[0].abs() <= a[1].abs() && a[0].abs() <= a[2].abs() {
        [1.0, 0.0, 0.0]
    } else if a[1].abs() <= a[2].abs() {
        [0.0, 1.0, 0.0]
    } else {
        [0.0, 0.0, 1.0]
    };
    let c = cross(a, e);
    let l = norm(c);
    [c[0] / l, c[1] / l, c[2] / l]
}

/// Writes `value(i)` on occupied sites and zero on vacant ones.
fn fill(h: &Hamiltonian, spins: &mut [Vec3], mut value: impl FnMut(usize) -> Vec3) {
    let cell = h.cell();
    for (i, s) in spins.iter_mut().enumerate() {
        *s = if cell.is_occupied(i) { value(i) } else { [0.0; 3] };
    }
}

/// Every spin along `direction` (normalised).
pub fn uniform(h: &Hamiltonian, spins: &mut [Vec3], direction: Vec3) -> Result<(), InitError> {
    check_len(h, spins)?;
    let d = unit(direction, "uniform direction")?;
    fill(h, spins, |_| d);
    Ok(())
}

/// Independent directions uniform on the sphere: for site `i`, with `u` the first two
/// numbers of `NoiseStream::new(seed, 2).uniform4(1, i)`, `cos(theta) = 2 u0 - 1` and
/// `phi = 2 pi u1` (uniform in `cos(theta)` and `phi` is uniform on the sphere, common
/// practice). Does not depend on the thread count.
pub fn random(h: &Hamiltonian, spins: &mut [Vec3], seed: u64) -> Result<(), InitError> {
    check_len(h, spins)?;
    let stream = NoiseStream::new(seed, STREAM_INITIAL_STATE);
    fill(h, spins, |i| {
        let u = stream.uniform4(1, i as u64);
        let z = 2.0 * u[0] - 1.0;
        let r = (1.0 - z * z).max(0.0).sqrt();
        let phi = std::f64::consts::TAU * u[1];
        [r * phi.cos(), r * phi.sin(), z]
    });
    Ok(())
}

/// The skyrmion texture at in-plane displacement `d` (Å) from its centre: polar angle
/// `theta(r) = 2 atan(sinh(R/w) / sinh(r/w))` from the background, `pi` at the centre,
/// `pi/2` at `r = R`, decaying as `exp(-r/w)` outside, with wall width `w = R/2` (a
/// smooth start that relaxation refines); the in-plane part turned by the helicity
/// `eta` from the outward radial direction `u` about the background `n`:
/// `S = cos(theta) n + sin(theta) (cos(eta) u + sin(eta) n x u)`.
fn skyrmion_spin(d: Vec3, radius: f64, cos_eta: f64, sin_eta: f64, n: Vec3) -> Vec3 {
    let w = 0.5 * radius;
    let r = norm(d);
    let theta = 2.0 * ((radius / w).sinh() / (r / w).sinh()).atan();
    let along = dot(d, n);
    let radial = [d[0] - along * n[0], d[1] - along * n[1], d[2] - along * n[2]];
    let l = norm(radial);
    // At the centre sin(theta) = 0 and the in-plane direction does not matter.
    let u = if l > 1e-12 * radius { [radial[0] / l, radial[1] / l, radial[2] / l] } else { perpendicular(n) };
    let v = cross(n, u);
    let (st, ct) = theta.sin_cos();
    let mut s = [0.0; 3];
    for a in 0..3 {
        s[a] = ct * n[a] + st * (cos_eta * u[a] + sin_eta * v[a]);
    }
    s
}

/// One skyrmion tube, uniform along the layer normal (the stacking axis `a3`), on the
/// background `background` (normalised; `+z` is the usual choice), its core pointing
/// against the background: with a `+z` background its topological charge is `-1`.
///
/// `center` is in fractions of the supercell along `a1` and `a2`; `radius` (Å, > 0) is
/// where the spin lies perpendicular to the background; `helicity_deg` turns the in-plane
/// part from outward radial (0: Néel, hedgehog outwards; 180: Néel inwards; +-90: Bloch)
/// about the background, see [`favoured_helicity`]. Distances along periodic in-plane
/// axes are minimum images, so a skyrmion near an edge wraps around.
pub fn skyrmion(
    h: &Hamiltonian,
    spins: &mut [Vec3],
    center: [f64; 2],
    radius: f64,
    helicity_deg: f64,
    background: Vec3,
) -> Result<(), InitError> {
    check_len(h, spins)?;
    let n = unit(background, "skyrmion background")?;
    if !(radius.is_finite() && radius > 0.0) {
        return Err(InitError::BadParameter { name: "radius", value: radius, expected: "finite and > 0 Å" });
    }
    for (k, &c) in center.iter().enumerate() {
        if !c.is_finite() {
            return Err(InitError::BadParameter {
                name: if k == 0 { "center[0]" } else { "center[1]" },
                value: c,
                expected: "finite fraction of the supercell",
            });
        }
    }
    if !helicity_deg.is_finite() {
        return Err(InitError::BadParameter {
            name: "helicity",
            value: helicity_deg,
            expected: "finite degrees",
        });
    }
    let (sin_eta, cos_eta) = helicity_deg.to_radians().sin_cos();
    let cell = h.cell();
    let crystal = cell.crystal();
    let normal = crystal.layer_normal();
    let cells = cell.cells();
    let periodic = cell.periodic();
    fill(h, spins, |i| {
        let (c, b) = cell.decompose(i);
        let p = crystal.basis[b].position;
        let mut f = [c[0] as f64 + p[0], c[1] as f64 + p[1], c[2] as f64 + p[2]];
        for k in 0..2 {
            let nk = cells[k] as f64;
            f[k] -= center[k] * nk;
            if periodic[k] {
                f[k] -= nk * (f[k] / nk).round();
            }
        }
        let d = crystal.to_cartesian(f);
        // The tube runs along the layer normal: only the in-plane displacement counts.
        let h = dot(d, normal);
        skyrmion_spin(
            [d[0] - h * normal[0], d[1] - h * normal[1], d[2] - h * normal[2]],
            radius,
            cos_eta,
            sin_eta,
            n,
        )
    });
    Ok(())
}

/// The helicity (degrees, in `(-180, 180]`) that the Hamiltonian's DMI favours for a
/// skyrmion on a `+z` background. See [`favoured_helicity_for`].
pub fn favoured_helicity(h: &Hamiltonian) -> f64 {
    favoured_helicity_for(h, [0.0, 0.0, 1.0])
}

/// The helicity (degrees, in `(-180, 180]`) that the Hamiltonian's DMI favours for a
/// skyrmion on the unit background `background`.
///
/// Turning the in-plane part of every spin by `eta` about the background changes the DMI
/// energy as `E(eta) = C + A cos(eta) + B sin(eta)` (each DMI pair energy is bilinear in the
/// two spins, whose components along the background do not turn), so the four candidates
/// `eta = 0, 90, 180, 270` degrees give `A = (E0 - E180)/2`, `B = (E90 - E270)/2`, and the
/// minimum is at `atan2(-B, -A)`. The energies are those of a small trial skyrmion (radius
/// three bond lengths of the longest DMI bond) on the infinite crystal with the
/// Hamiltonian's bonds. Interfacial DMI gives 0 or 180 (Néel) by the sign of `d`, bulk DMI
/// +-90 (Bloch), a mixture something between. Without DMI every helicity is equal and 0 is
/// returned.
pub fn favoured_helicity_for(h: &Hamiltonian, background: Vec3) -> f64 {
    let Ok(n) = unit(background, "background") else { return 0.0 };
    let cell = h.cell();
    let crystal = cell.crystal();
    let bonds = h.bonds();
    let nb = crystal.basis.len();
    let longest = (0..nb)
        .flat_map(|b| bonds.from_basis(b).iter())
        .filter(|x| x.coupling.d != [0.0; 3])
        .map(|x| norm(x.vector))
        .fold(0.0, f64::max);
    if longest == 0.0 {
        return 0.0;
    }
    let radius = 3.0 * longest;
    let reach = 4.0 * radius;
    let normal = crystal.layer_normal();
    let spacing = crystal.plane_spacings();
    let m = [(reach / spacing[0]).ceil() as i64 + 1, (reach / spacing[1]).ceil() as i64 + 1];
    let in_plane = |d: Vec3| {
        let h = dot(d, normal);
        [d[0] - h * normal[0], d[1] - h * normal[1], d[2] - h * normal[2]]
    };
    let mut energy = [0.0f64; 4];
    for (q, e) in energy.iter_mut().enumerate() {
        let (sin_eta, cos_eta) = match q {
            0 => (0.0, 1.0),
            1 => (1.0, 0.0),
            2 => (0.0, -1.0),
            _ => (-1.0, 0.0),
        };
        let mut sum = 0.0;
        for c1 in -m[0]..=m[0] {
            for c2 in -m[1]..=m[1] {
                for (b, site) in crystal.basis.iter().enumerate() {
                    let p = site.position;
                    let r = in_plane(crystal.to_cartesian([c1 as f64 + p[0], c2 as f64 + p[1], p[2]]));
                    if norm(r) > reach {
                        continue;
                    }
                    let si = skyrmion_spin(r, radius, cos_eta, sin_eta, n);
                    for bond in bonds.from_basis(b) {
                        let d = bond.coupling.d;
                        if d == [0.0; 3] {
                            continue;
                        }
                        let v = bond.vector;
                        let sj = skyrmion_spin(
                            in_plane([r[0] + v[0], r[1] + v[1], r[2] + v[2]]),
                            radius,
                            cos_eta,
                            sin_eta,
                            n,
                        );
                        // Each pair appears from both ends, hence the half.
                        sum -= 0.5 * dot(d, cross(si, sj));
                    }
                }
            }
        }
        *e = sum;
    }
    let a = 0.5 * (energy[0] - energy[2]);
    let b = 0.5 * (energy[1] - energy[3]);
    let scale = a.abs().max(b.abs());
    if scale.is_nan() || scale <= 1e-12 * energy.iter().map(|x| x.abs()).fold(0.0, f64::max) {
        return 0.0;
    }
    // Snap components that are rounding noise, so pure interfacial or bulk DMI gives the
    // exact Néel or Bloch helicity.
    let a = if a.abs() < 1e-9 * scale { 0.0 } else { a };
    let b = if b.abs() < 1e-9 * scale { 0.0 } else { b };
    let eta = (-b).atan2(-a).to_degrees();
    if eta <= -180.0 {
        eta + 360.0
    } else {
        eta
    }
}

/// A flat spiral `S(r) = cos(q.r) z + sin(q.r) x_perp`, with `q = wavevector` (1/Å),
/// `z = axis` (normalised) and `x_perp` the unit vector along the part of `q`
/// perpendicular to `z`: the rotation plane contains `q` and `z`, a cycloid, the spiral
/// that interfacial DMI with an interface normal along `z` favours (for `d > 0` and `q`
/// in the plane, the sense of rotation that lowers the DMI energy). When `q` is parallel
/// to `z`, `x_perp` is a fixed unit vector perpendicular to `z`. `q = 0` is the uniform
/// state along `z`.
pub fn helix(h: &Hamiltonian, spins: &mut [Vec3], wavevector: Vec3, axis: Vec3) -> Result<(), InitError> {
    check_len(h, spins)?;
    let z = unit(axis, "helix axis")?;
    if !wavevector.iter().all(|x| x.is_finite()) {
        return Err(InitError::BadDirection { what: "helix wavevector", value: wavevector });
    }
    let q = wavevector;
    let qz = dot(q, z);
    let perp = [q[0] - qz * z[0], q[1] - qz * z[1], q[2] - qz * z[2]];
    let l = norm(perp);
    let x = if l > 1e-12 * norm(q) { [perp[0] / l, perp[1] / l, perp[2] / l] } else { perpendicular(z) };
    let cell = h.cell();
    fill(h, spins, |i| {
        let (s, c) = dot(q, cell.position(i)).sin_cos();
        [c * z[0] + s * x[0], c * z[1] + s * x[1], c * z[2] + s * x[2]]
    });
    Ok(())
}

/// Copies `given` (one vector per site) into `spins`, normalising each occupied site's
/// vector and zeroing vacant sites. A zero or non-finite vector on an occupied site is an
/// error.
pub fn from_spins(h: &Hamiltonian, spins: &mut [Vec3], given: &[Vec3]) -> Result<(), InitError> {
    check_len(h, spins)?;
    if given.len() != h.len() {
        return Err(InitError::LengthMismatch { expected: h.len(), got: given.len() });
    }
    let cell = h.cell();
    for (i, (s, g)) in spins.iter_mut().zip(given).enumerate() {
        if !cell.is_occupied(i) {
            *s = [0.0; 3];
            continue;
        }
        let l = norm(*g);
        if !(l.is_finite() && l > 0.0) {
            return Err(InitError::BadSpin { site: i, value: *g });
        }
        *s = [g[0] / l, g[1] / l, g[2] / l];
    }
    Ok(())
}
