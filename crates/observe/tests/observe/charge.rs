//! Topological charge by the lattice solid-angle method (B. Berg and M. Lüscher, Nucl.
//! Phys. B 190, 412 (1981)), checked against the continuum charge of analytic textures.
//!
//! For a radial texture `m = (sin theta cos Phi, sin theta sin Phi, cos theta)`,
//! `Phi = w phi + helicity`, the continuum formula of INTERFACE.md integrates to
//! `Q = (w / 2) [cos theta(0) - cos theta(edge)]` (elementary calculus; see the module
//! documentation of `charge.rs`): a skyrmion (`w = 1`) with its core at `-z` in a `+z`
//! background has `Q = -1`; reversing every spin gives `+1` (Q is odd in m); an
//! antiskyrmion (`w = -1`) with core `-z` has `+1`; a meron (`theta` from `pi` to `pi/2`)
//! has `-1/2`. On a closed (periodic) layer the lattice sum is exactly an integer.

use crate::common::*;
use spindrift_lattice::{preset, BasisSite, Crystal, Supercell, Vec3};
use spindrift_observe::{solid_angle, ChargeObserver, TopologicalCharge};
use std::f64::consts::PI;

/// Profile of a 360-degree wall skyrmion, `theta(r) = 2 atan(sinh(R/w) / sinh(r/w))`
/// (A. Romming et al., Phys. Rev. Lett. 114, 177203 (2015); form from memory): `pi` at
/// the centre, radius `R`, wall width `w`.
fn wall_profile(radius: f64, width: f64) -> impl Fn(f64) -> f64 {
    move |r| 2.0 * ((radius / width).sinh() / (r / width).sinh()).atan()
}

/// The domain-wall form `theta(r) = 2 atan(exp((R - r) / w))` (the Landau-Lifshitz wall
/// profile wrapped into a circle, common practice).
fn exp_profile(radius: f64, width: f64) -> impl Fn(f64) -> f64 {
    move |r| 2.0 * ((radius - r) / width).exp().atan()
}

/// A profile of compact support: `pi cos^2(pi r / (2 rc))` inside `rc`, 0 outside, so that
/// several skyrmions can sit side by side without overlapping.
fn compact_profile(rc: f64) -> impl Fn(f64) -> f64 {
    move |r| if r < rc { PI * (PI * r / (2.0 * rc)).cos().powi(2) } else { 0.0 }
}

/// A radial profile `theta(r)`, r in lattice constants.
type Profile = dyn Fn(f64) -> f64;

/// In-plane displacement from `centre` to `p`, to the nearest periodic image of the
/// supercell along periodic in-plane axes.
fn displacement(cell: &Supercell, p: Vec3, centre: Vec3) -> [f64; 2] {
    let v = cell.crystal().vectors;
    let n = cell.cells();
    let big1 = [v[0][0] * n[0] as f64, v[0][1] * n[0] as f64];
    let big2 = [v[1][0] * n[1] as f64, v[1][1] * n[1] as f64];
    let d = [p[0] - centre[0], p[1] - centre[1]];
    let det = big1[0] * big2[1] - big1[1] * big2[0];
    let mut x = (d[0] * big2[1] - d[1] * big2[0]) / det;
    let mut y = (big1[0] * d[1] - big1[1] * d[0]) / det;
    if cell.periodic()[0] {
        x -= x.round();
    }
    if cell.periodic()[1] {
        y -= y.round();
    }
    [x * big1[0] + y * big2[0], x * big1[1] + y * big2[1]]
}

/// The radial texture of `profile` around `centre`, vorticity `w`, helicity `eta`.
fn radial(d: [f64; 2], profile: &Profile, w: f64, eta: f64) -> Vec3 {
    let r = (d[0] * d[0] + d[1] * d[1]).sqrt();
    let theta = profile(r);
    let phi = w * d[1].atan2(d[0]) + eta;
    [theta.sin() * phi.cos(), theta.sin() * phi.sin(), theta.cos()]
}

/// Centre of the box: the middle of the periodic supercell or of the sites of an open one.
fn centre(cell: &Supercell) -> Vec3 {
    let n = cell.cells();
    let mid = |k: usize| if cell.periodic()[k] { n[k] as f64 / 2.0 } else { (n[k] - 1) as f64 / 2.0 };
    cell.crystal().to_cartesian([mid(0), mid(1), 0.0])
}

fn charge(cell: &Supercell, spins: &[Vec3]) -> TopologicalCharge {
    ChargeObserver::new(cell).observe(spins).unwrap()
}

fn monolayer(name: &str, n: usize, periodic: bool) -> Supercell {
    Supercell::new(preset(name, 1.0, None).unwrap(), [n, n, 1], [periodic, periodic, true], 0).unwrap()
}

fn skyrmion(cell: &Supercell, profile: &Profile, w: f64, eta: f64) -> Vec<Vec3> {
    let c = centre(cell);
    spins_from(cell, |_, p| radial(displacement(cell, p, c), profile, w, eta))
}

/// An isolated skyrmion with core `-z` in a `+z` background has `Q = -1` on square,
/// triangular and honeycomb lattices (INTERFACE.md convention; continuum formula above),
/// for Néel and Bloch helicities; the reversed texture and the antiskyrmion have `+1`.
#[test]
fn isolated_skyrmion_has_charge_minus_one() {
    let wall = wall_profile(5.0, 1.5);
    let exp = exp_profile(5.0, 1.2);
    let cases: [(&str, &Profile, f64); 4] = [
        ("square", &wall, 0.0),
        ("triangular", &exp, PI / 2.0),
        ("honeycomb", &wall, PI),
        ("square", &exp, -PI / 2.0),
    ];
    for (name, profile, eta) in cases {
        let cell = monolayer(name, 40, true);
        let spins = skyrmion(&cell, profile, 1.0, eta);
        let q = charge(&cell, &spins);
        assert_eq!(q.by_layer.len(), 1);
        assert!((q.by_layer[0] + 1.0).abs() < 1e-3, "{name}: {}", q.by_layer[0]);
        assert!((q.mean + 1.0).abs() < 1e-3);

        let reversed: Vec<Vec3> = spins.iter().map(|s| [-s[0], -s[1], -s[2]]).collect();
        let q = charge(&cell, &reversed).mean;
        assert!((q - 1.0).abs() < 1e-3, "{name} reversed: {q}");

        let anti = skyrmion(&cell, profile, -1.0, eta);
        let q = charge(&cell, &anti).mean;
        assert!((q - 1.0).abs() < 1e-3, "{name} antiskyrmion: {q}");
    }
}

/// With open boundaries the layer is not closed and the sum follows the continuum
/// integral over the box: `-1` for a skyrmion whose tail has decayed at the edge, and `-1/2`
/// for a meron `theta(r) = (pi/2)(1 + exp(-r^2/s^2))` (formula above). Inner edges of the
/// triangulation cancel, so the lattice sum equals the solid angle enclosed by the
/// geodesic polygon of the boundary spins (Gauss-Bonnet; common practice): within
/// `theta(edge)^2` of the pole for the skyrmion and exactly the equator's `2 pi` for the
/// meron, whose boundary spins are in-plane to `exp(-25)`. Hence the tight tolerance.
#[test]
fn open_layers_follow_the_continuum_integral() {
    let wall = wall_profile(5.0, 1.5);
    for name in ["square", "triangular"] {
        let cell = monolayer(name, 41, false);
        let q = charge(&cell, &skyrmion(&cell, &wall, 1.0, 0.0)).mean;
        assert!((q + 1.0).abs() < 1e-6, "{name}: {q}");
    }
    let s = 6.0;
    let meron = move |r: f64| 0.5 * PI * (1.0 + (-(r * r) / (s * s)).exp());
    let cell = monolayer("square", 61, false);
    let q = charge(&cell, &skyrmion(&cell, &meron, 1.0, 0.0)).mean;
    assert!((q + 0.5).abs() < 1e-9, "meron: {q}");
}

/// Textures without winding have `Q = 0`: the uniform state (every triangle spans nothing)
/// and a conical helix (its image is a circle on the sphere, which encloses no degree).
#[test]
fn uniform_and_helical_states_have_no_charge() {
    for name in ["square", "triangular", "honeycomb"] {
        let cell = monolayer(name, 40, true);
        let d = normalised([0.2, -0.4, 0.9]);
        assert_eq!(charge(&cell, &spins_from(&cell, |_, _| d)).mean, 0.0);
        // Two turns along x fit the box of every preset here (q.a2 n2 = 2 pi for the
        // triangular ones, whose a2 has x-component a/2).
        let q = 2.0 * 2.0 * PI / 40.0;
        let cone = 0.6f64;
        let helix = spins_from(&cell, |_, p| {
            [cone.sin() * (q * p[0]).cos(), cone.sin() * (q * p[0]).sin(), cone.cos()]
        });
        let c = charge(&cell, &helix).mean;
        assert!(c.abs() < 1e-9, "{name}: {c}");
    }
}

/// Two skyrmions under a smooth random perturbation `delta` with `|delta| < 1` everywhere
/// keep `Q = -2`: `m0 + t delta` never vanishes for `t` in `[0, 1]`, so normalising it is
/// a homotopy and the degree cannot change (standard topology argument).
#[test]
fn two_perturbed_skyrmions_have_charge_minus_two() {
    for name in ["square", "triangular", "honeycomb"] {
        let cell = monolayer(name, 48, true);
        let v = cell.crystal().vectors;
        let n = cell.cells();
        let det = v[0][0] * v[1][1] - v[0][1] * v[1][0];
        let b1 = [v[1][1] / det / n[0] as f64, -v[1][0] / det / n[0] as f64];
        let b2 = [-v[0][1] / det / n[1] as f64, v[0][0] / det / n[1] as f64];
        let mut rng = Rng::new(77);
        let mut modes = Vec::new();
        for h in -2i32..=2 {
            for k in 0i32..=2 {
                if k == 0 && h <= 0 {
                    continue;
                }
                let g = [
                    2.0 * PI * (h as f64 * b1[0] + k as f64 * b2[0]),
                    2.0 * PI * (h as f64 * b1[1] + k as f64 * b2[1]),
                ];
                let mut amp = || [0.02 * rng.normal(), 0.02 * rng.normal(), 0.02 * rng.normal()];
                modes.push((g, amp(), amp()));
            }
        }
        let delta = |p: Vec3| {
            let mut d = [0.0; 3];
            for (g, a, b) in &modes {
                let x = g[0] * p[0] + g[1] * p[1];
                for c in 0..3 {
                    d[c] += a[c] * x.cos() + b[c] * x.sin();
                }
            }
            d
        };
        let profile = compact_profile(8.0);
        let c = centre(&cell);
        let shift = cell.crystal().to_cartesian([n[0] as f64 / 4.0, 0.0, 0.0]);
        let cores = [[c[0] - shift[0], c[1] - shift[1], 0.0], [c[0] + shift[0], c[1] + shift[1], 0.0]];
        let mut largest: f64 = 0.0;
        let spins = spins_from(&cell, |_, p| {
            let (d0, d1) = (displacement(&cell, p, cores[0]), displacement(&cell, p, cores[1]));
            let near = if d0[0].hypot(d0[1]) < d1[0].hypot(d1[1]) { d0 } else { d1 };
            let m0 = radial(near, &profile, 1.0, 0.7);
            let d = delta(p);
            largest = largest.max((d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt());
            normalised([m0[0] + d[0], m0[1] + d[1], m0[2] + d[2]])
        });
        assert!(largest < 1.0, "the homotopy argument needs |delta| < 1, got {largest}");
        assert!(largest > 0.1, "the perturbation should matter: {largest}");
        let q = charge(&cell, &spins).mean;
        assert!((q + 2.0).abs() < 1e-3, "{name}: {q}");
    }
}

/// Layers are counted separately: a skyrmion in layer 0 and a uniform layer 1 give
/// `[-1, 0]` and mean `-1/2` (definition of the per-layer charge and its mean).
#[test]
fn charges_are_per_layer() {
    let cell =
        Supercell::new(preset("square", 1.0, None).unwrap(), [40, 40, 2], [true, true, false], 0).unwrap();
    let c = centre(&cell);
    let wall = wall_profile(5.0, 1.5);
    let spins = spins_from(&cell, |i, p| {
        if cell.layer(i) == 0 {
            radial(displacement(&cell, p, c), &wall, 1.0, 0.0)
        } else {
            [0.0, 0.0, 1.0]
        }
    });
    let q = charge(&cell, &spins);
    assert!((q.by_layer[0] + 1.0).abs() < 1e-3, "{:?}", q.by_layer);
    assert_eq!(q.by_layer[1], 0.0);
    assert!((q.mean + 0.5).abs() < 5e-4);
}

/// Vectors listed in left-handed order (`a1 x a2` along `-z`) measure the same charge:
/// the sign refers to the laboratory `x, y` of the continuum formula (INTERFACE.md).
#[test]
fn charge_sign_follows_the_laboratory_frame() {
    let site = BasisSite { position: [0.0; 3], species: 0, occupancy: 1.0 };
    let swapped = Crystal::new([[0.0, 1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0]], vec![site]).unwrap();
    let cell = Supercell::new(swapped, [40, 40, 1], [true; 3], 0).unwrap();
    let q = charge(&cell, &skyrmion(&cell, &wall_profile(5.0, 1.5), 1.0, 0.0)).mean;
    assert!((q + 1.0).abs() < 1e-3, "{q}");
}

/// The triangulation as specified, built naively from `Supercell::neighbour` per site:
/// triangles `(c, c+a1, c+a1+a2)` and `(c, c+a1+a2, c+a2)` of each sublattice, skipped at
/// open boundaries and vacancies, averaged over the sublattices of a layer.
fn reference(cell: &Supercell, spins: &[Vec3]) -> Vec<f64> {
    let nb = cell.basis_len();
    let lpc = cell.layers_per_cell();
    let mut sums = vec![vec![0.0; nb]; cell.layer_count()];
    let allowed = cell.offset_allowed([1, 0, 0]) && cell.offset_allowed([0, 1, 0]);
    for i in 0..cell.len() {
        if !cell.is_occupied(i) || !allowed {
            continue;
        }
        let (c, b) = cell.decompose(i);
        let at = |o: [i32; 3]| cell.neighbour(c, o, b).filter(|&j| cell.is_occupied(j));
        let (j1, j12, j2) = (at([1, 0, 0]), at([1, 1, 0]), at([0, 1, 0]));
        let l = cell.layer(i);
        if let (Some(j1), Some(j12)) = (j1, j12) {
            sums[l][b] += solid_angle(spins[i], spins[j1], spins[j12]);
        }
        if let (Some(j12), Some(j2)) = (j12, j2) {
            sums[l][b] += solid_angle(spins[i], spins[j12], spins[j2]);
        }
    }
    let v = cell.crystal().vectors;
    let sign = if v[0][0] * v[1][1] - v[0][1] * v[1][0] < 0.0 { -1.0 } else { 1.0 };
    sums.iter()
        .enumerate()
        .map(|(l, s)| {
            let members: Vec<usize> = (0..nb).filter(|&b| cell.basis_layers()[b] == l % lpc).collect();
            sign * members.iter().map(|&b| s[b]).sum::<f64>() / (4.0 * PI * members.len() as f64)
        })
        .collect()
}

/// The chunked, parallel observer equals the naive triangulation on awkward systems:
/// several sites per layer, films, open and single-cell axes, vacancies, random spins.
#[test]
fn matches_naive_triangulation() {
    let cases = [
        (crystal("bcc", 1.0, 1, 1.0), [30, 20, 4], [true, false, false]),
        (crystal("fcc", 1.0, 1, 0.85), [16, 16, 5], [true, true, false]),
        (crystal("honeycomb", 1.0, 1, 0.9), [40, 30, 3], [false, true, true]),
        (crystal("triangular", 1.0, 1, 1.0), [90, 1, 2], [true, true, true]),
        (crystal("simple-cubic", 1.0, 1, 1.0), [70, 70, 3], [true; 3]),
    ];
    for (k, (crystal, cells, periodic)) in cases.into_iter().enumerate() {
        let cell = Supercell::new(crystal, cells, periodic, 3).unwrap();
        let mut rng = Rng::new(k as u64);
        let spins = spins_from(&cell, |_, _| rng.direction());
        let q = charge(&cell, &spins);
        let r = reference(&cell, &spins);
        assert_eq!(q.by_layer.len(), r.len());
        for (a, b) in q.by_layer.iter().zip(&r) {
            assert!((a - b).abs() < 1e-10, "case {k}: {a} vs {b}");
        }
        if cells[1] == 1 {
            assert!(q.by_layer.iter().all(|&x| x == 0.0), "a single cell along a2 has no triangles");
        }
    }
}

/// Bitwise the same with 1 and 2 threads (determinism rule; ordered partial sums).
#[test]
fn thread_count_does_not_change_a_bit() {
    let cell = Supercell::new(preset("honeycomb", 1.0, None).unwrap(), [80, 60, 2], [true; 3], 0).unwrap();
    let mut rng = Rng::new(9);
    let spins = spins_from(&cell, |_, _| rng.direction());
    let (a, b) = in_pools(|| charge(&cell, &spins));
    assert!(cell.len() > 4 * spindrift_hamiltonian::CHUNK);
    let bits = |q: &TopologicalCharge| -> Vec<u64> {
        q.by_layer.iter().chain(std::iter::once(&q.mean)).map(|x| x.to_bits()).collect()
    };
    assert_eq!(bits(&a), bits(&b));
}
