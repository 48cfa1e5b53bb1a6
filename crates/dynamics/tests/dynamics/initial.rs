//! Initial states: their defining properties.

use crate::common::*;
use spindrift_dynamics::initial::{self, InitialState};
use spindrift_dynamics::{favoured_helicity, InitError};
use spindrift_hamiltonian::{DmiKind, Hamiltonian};
use spindrift_lattice::{cross, dot, Vec3};
use std::f64::consts::PI;

/// Signed solid angle of the spherical triangle `(a, b, c)`:
/// `tan(Omega/2) = a.(b x c) / (1 + a.b + b.c + c.a)` (A. van Oosterom and J. Strackee,
/// IEEE Trans. Biomed. Eng. 30, 125 (1983)).
fn solid_angle(a: Vec3, b: Vec3, c: Vec3) -> f64 {
    2.0 * dot(a, cross(b, c)).atan2(1.0 + dot(a, b) + dot(b, c) + dot(c, a))
}

/// Topological charge of a square monolayer: the sum of the solid angles of the two
/// triangles of every plaquette over 4 pi (B. Berg and M. Lüscher, Nucl. Phys. B 190, 412
/// (1981)).
fn charge(h: &Hamiltonian, s: &[Vec3]) -> f64 {
    let cell = h.cell();
    let [n1, n2, _] = cell.cells();
    let mut q = 0.0;
    for y in 0..n2 {
        for x in 0..n1 {
            let i = cell.index([x, y, 0], 0);
            let r = cell.index([(x + 1) % n1, y, 0], 0);
            let u = cell.index([x, (y + 1) % n2, 0], 0);
            let ru = cell.index([(x + 1) % n1, (y + 1) % n2, 0], 0);
            q += solid_angle(s[i], s[r], s[ru]) + solid_angle(s[i], s[ru], s[u]);
        }
    }
    q / (4.0 * PI)
}

fn square(n: usize, dmi: Option<(f64, DmiKind)>) -> Hamiltonian {
    build(
        "square",
        3.0,
        [n, n, 1],
        [true; 3],
        &[shell(1, 10.0, dmi)],
        species(2.0, 0.1, 0.0, [0.0, 0.0, 1.0]),
        [0.0; 3],
    )
}

/// A skyrmion with its core against a `+z` background has charge `Q = -1` (INTERFACE.md,
/// with the lattice charge of Berg and Lüscher), whatever its helicity, also when its
/// centre sits on a periodic edge (minimum images).
#[test]
fn skyrmion_has_charge_minus_one() {
    let h = square(40, None);
    let mut s = vec![[0.0; 3]; h.len()];
    for (center, helicity) in
        [([0.5, 0.5], 0.0), ([0.3, 0.6], 90.0), ([0.0, 0.0], 180.0), ([0.98, 0.5], -45.0)]
    {
        initial::skyrmion(&h, &mut s, center, 15.0, helicity, [0.0, 0.0, 1.0]).unwrap();
        let q = charge(&h, &s);
        assert!((q + 1.0).abs() < 1e-3, "center {center:?} helicity {helicity}: Q = {q}");
    }
    // The core points down, the far field up, and the spin lies in the plane at the radius.
    initial::skyrmion(&h, &mut s, [0.5, 0.5], 15.0, 0.0, [0.0, 0.0, 1.0]).unwrap();
    let cell = h.cell();
    let core = s[cell.index([20, 20, 0], 0)];
    assert!(core[2] == -1.0 && core[0].abs() < 1e-15 && core[1].abs() < 1e-15, "{core:?}");
    assert!(s[cell.index([0, 0, 0], 0)][2] > 0.99);
    let at_radius = s[cell.index([25, 20, 0], 0)];
    assert!(at_radius[2].abs() < 1e-12 && at_radius[0] > 0.999, "{at_radius:?}");
    // Flipping the background flips the charge.
    initial::skyrmion(&h, &mut s, [0.5, 0.5], 15.0, 0.0, [0.0, 0.0, -1.0]).unwrap();
    assert!((charge(&h, &s) - 1.0).abs() < 1e-3);
}

/// The favoured helicity: by the spiral argument in `relax.rs` (energy per x bond
/// `-d sin(qa)` for `S = cos(qx) z + sin(qx) x`), interfacial DMI with `d > 0` favours the
/// spin turning from `+z` towards `+x` as `x` grows; going outwards from a down core along
/// `+x`, that is the in-plane part pointing inwards: helicity 180. `d < 0` gives 0, and
/// bulk DMI, whose vectors lie along the bonds, gives a Bloch wall: +-90 by the sign of `d`.
#[test]
fn favoured_helicity_follows_the_dmi() {
    let bulk = |d: f64| Some((d, DmiKind::Bulk));
    assert_eq!(favoured_helicity(&square(8, interfacial(1.0))), 180.0);
    assert_eq!(favoured_helicity(&square(8, interfacial(-1.0))), 0.0);
    let plus = favoured_helicity(&square(8, bulk(1.0)));
    let minus = favoured_helicity(&square(8, bulk(-1.0)));
    assert!((plus.abs() - 90.0).abs() < 1e-9 && (minus + plus).abs() < 1e-9, "{plus} {minus}");
    assert_eq!(favoured_helicity(&square(8, None)), 0.0);
    // On the full system, the favoured skyrmion has lower DMI energy than the other three.
    for dmi in [interfacial(1.0), bulk(1.0), bulk(-1.0)] {
        let h = square(40, dmi);
        let best = favoured_helicity(&h);
        let dmi_energy = |eta: f64| {
            let mut s = vec![[0.0; 3]; h.len()];
            initial::skyrmion(&h, &mut s, [0.5, 0.5], 9.0, eta, [0.0, 0.0, 1.0]).unwrap();
            h.energy(&s).dmi
        };
        let e = dmi_energy(best);
        for k in 1..4 {
            assert!(e < dmi_energy(best + 90.0 * k as f64), "{dmi:?}: {best}");
        }
    }
}

/// The helix formula `S = cos(q.r) z + sin(q.r) x_perp`, the random state's uniformity on
/// the sphere (`<S> = 0`, `<S_z^2> = 1/3`, common practice) and the checks of given spins.
#[test]
fn helix_random_uniform_and_given_states() {
    let h = square(32, None);
    let mut s = vec![[0.0; 3]; h.len()];
    let q = [0.3, 0.1, 0.0];
    initial::helix(&h, &mut s, q, [0.0, 0.0, 1.0]).unwrap();
    let x = [0.3 / 0.1f64.sqrt(), 0.1 / 0.1f64.sqrt(), 0.0];
    for (i, v) in s.iter().enumerate() {
        let phase = dot(q, h.cell().position(i));
        assert!((v[2] - phase.cos()).abs() < 1e-12);
        assert!((dot(*v, x) - phase.sin()).abs() < 1e-12);
    }
    initial::random(&h, &mut s, 12).unwrap();
    let n = s.len() as f64;
    let mean: Vec3 = [0, 1, 2].map(|a| s.iter().map(|v| v[a]).sum::<f64>() / n);
    let zz = s.iter().map(|v| v[2] * v[2]).sum::<f64>() / n;
    // Standard errors: sqrt(1/3 / N) = 0.018 for the mean, sqrt(4/45 / N) = 0.009 for zz.
    assert!(dot(mean, mean).sqrt() < 0.06, "{mean:?}");
    assert!((zz - 1.0 / 3.0).abs() < 0.03, "{zz}");
    let mut again = vec![[0.0; 3]; h.len()];
    InitialState::Random.apply(&h, &mut again, 12).unwrap();
    assert_eq!(bits(&s), bits(&again));

    InitialState::Uniform { direction: [0.0, 3.0, 4.0] }.apply(&h, &mut s, 0).unwrap();
    assert!(s.iter().all(|v| *v == [0.0, 0.6, 0.8]));
    assert!(matches!(initial::uniform(&h, &mut s, [0.0; 3]), Err(InitError::BadDirection { .. })));

    let given = vec![[2.0, 0.0, 0.0]; h.len()];
    InitialState::Given(given.clone()).apply(&h, &mut s, 0).unwrap();
    assert!(s.iter().all(|v| *v == [1.0, 0.0, 0.0]));
    assert!(matches!(initial::from_spins(&h, &mut s, &given[1..]), Err(InitError::LengthMismatch { .. })));
    let mut bad = given;
    bad[7] = [f64::NAN, 0.0, 0.0];
    assert!(matches!(initial::from_spins(&h, &mut s, &bad), Err(InitError::BadSpin { site: 7, .. })));
    assert!(matches!(
        initial::skyrmion(&h, &mut s, [0.5, 0.5], -1.0, 0.0, [0.0, 0.0, 1.0]),
        Err(InitError::BadParameter { name: "radius", .. })
    ));
}
