//! Magnetisation against its definition `m = sum mu_i S_i / sum mu_i` (INTERFACE.md).

use crate::common::*;
use spindrift_hamiltonian::Hamiltonian;
use spindrift_lattice::Vec3;
use spindrift_observe::{MagnetizationObserver, ObserveError};

/// The definition evaluated directly, one site at a time (INTERFACE.md).
fn reference(h: &Hamiltonian, spins: &[Vec3]) -> (Vec3, Vec<Vec3>, Vec<Vec3>) {
    let cell = h.cell();
    let (s, l) = (h.species().len(), cell.layer_count());
    let mut num = ([0.0; 3], vec![[0.0; 3]; s], vec![[0.0; 3]; l]);
    let mut den = (0.0, vec![0.0; s], vec![0.0; l]);
    for i in 0..cell.len() {
        if !cell.is_occupied(i) {
            continue;
        }
        let mu = h.moment(i);
        let (sp, ly) = (cell.species(i), cell.layer(i));
        for a in 0..3 {
            num.0[a] += mu * spins[i][a];
            num.1[sp][a] += mu * spins[i][a];
            num.2[ly][a] += mu * spins[i][a];
        }
        den.0 += mu;
        den.1[sp] += mu;
        den.2[ly] += mu;
    }
    let div = |v: Vec3, d: f64| if d > 0.0 { [v[0] / d, v[1] / d, v[2] / d] } else { [0.0; 3] };
    (
        div(num.0, den.0),
        num.1.iter().zip(&den.1).map(|(v, d)| div(*v, *d)).collect(),
        num.2.iter().zip(&den.2).map(|(v, d)| div(*v, *d)).collect(),
    )
}

fn close(a: Vec3, b: Vec3, tol: f64) -> bool {
    (0..3).all(|k| (a[k] - b[k]).abs() <= tol)
}

/// A uniform state has `|m| = 1` whatever the moments, and so has every species and layer
/// (INTERFACE.md: moment-weighted, `|m| <= 1` with equality for parallel spins).
#[test]
fn uniform_state_with_mixed_moments_has_unit_magnetisation() {
    let h = system(crystal("honeycomb", 2.5, 2, 0.8), [9, 7, 3], [true, true, false], &[1.3, 3.7]);
    let d = normalised([0.3, -0.5, 0.8]);
    let spins = spins_from(h.cell(), |_, _| d);
    let m = MagnetizationObserver::new(&h).observe(&spins).unwrap();
    assert!(close(m.total, d, 1e-14), "{:?}", m.total);
    assert_eq!(m.by_species.len(), 2);
    assert_eq!(m.by_layer.len(), 3);
    for v in m.by_species.iter().chain(&m.by_layer) {
        assert!(close(*v, d, 1e-14), "{v:?}");
    }
}

/// Species up and down (a ferrimagnet): `m = (mu_A n_A - mu_B n_B) / (mu_A n_A + mu_B n_B)`
/// along z, each species fully polarised; layers in different directions each give their
/// own direction (definition, INTERFACE.md).
#[test]
fn species_and_layers_are_weighted_separately() {
    let (mu_a, mu_b) = (2.0, 3.5);
    let h = system(crystal("bcc", 2.9, 2, 0.9), [5, 4, 3], [true; 3], &[mu_a, mu_b]);
    let cell = h.cell();
    let spins =
        spins_from(cell, |i, _| if cell.species(i) == 0 { [0.0, 0.0, 1.0] } else { [0.0, 0.0, -1.0] });
    let mut obs = MagnetizationObserver::new(&h);
    let m = obs.observe(&spins).unwrap();
    let count = |s| (0..cell.len()).filter(|&i| cell.is_occupied(i) && cell.species(i) == s).count() as f64;
    let (na, nb) = (count(0), count(1));
    let expect = (mu_a * na - mu_b * nb) / (mu_a * na + mu_b * nb);
    assert!(close(m.total, [0.0, 0.0, expect], 1e-14), "{:?} vs {expect}", m.total);
    assert!(close(m.by_species[0], [0.0, 0.0, 1.0], 1e-14));
    assert!(close(m.by_species[1], [0.0, 0.0, -1.0], 1e-14));

    let directions: Vec<Vec3> = (0..cell.layer_count()).map(|l| normalised([l as f64, 1.0, -0.5])).collect();
    let spins = spins_from(cell, |i, _| directions[cell.layer(i)]);
    let m = obs.observe(&spins).unwrap();
    assert_eq!(m.by_layer.len(), 6, "bcc: two layers per cubic cell");
    for (got, want) in m.by_layer.iter().zip(&directions) {
        assert!(close(*got, *want, 1e-14), "{got:?} vs {want:?}");
    }
}

/// Random spins on systems spanning many chunks, several layers per chunk and vacancies
/// agree with the site-by-site definition, and never exceed `|m| = 1`.
#[test]
fn random_spins_match_the_definition() {
    let cases = [
        system(crystal("triangular", 2.7, 1, 1.0), [50, 50, 6], [true, true, false], &[2.2]),
        system(crystal("honeycomb", 2.5, 2, 0.7), [30, 20, 9], [true; 3], &[1.1, 2.9]),
        system(crystal("fcc", 3.6, 3, 1.0), [12, 12, 12], [false; 3], &[0.6, 1.6, 2.6]),
        system(crystal("square", 3.0, 1, 1.0), [1, 1, 3], [true; 3], &[1.0]),
    ];
    for h in &cases {
        let mut rng = Rng::new(h.len() as u64);
        let spins = spins_from(h.cell(), |_, _| rng.direction());
        let (total, species, layers) = reference(h, &spins);
        let mut m = Default::default();
        let mut obs = MagnetizationObserver::new(h);
        obs.observe_into(&spins, &mut m).unwrap();
        assert!(close(m.total, total, 1e-12), "{:?} vs {total:?}", m.total);
        for (a, b) in m.by_species.iter().zip(&species).chain(m.by_layer.iter().zip(&layers)) {
            assert!(close(*a, *b, 1e-12), "{a:?} vs {b:?}");
        }
        assert_eq!(m.by_layer.len(), h.cell().layer_count());
        let norm = |v: Vec3| (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
        assert!(norm(m.total) <= 1.0 && m.by_layer.iter().all(|v| norm(*v) <= 1.0 + 1e-15));
    }
}

/// Bitwise the same with 1 and 2 threads (STYLE/INTERFACE determinism rule; common practice
/// of ordered partial sums).
#[test]
fn thread_count_does_not_change_a_bit() {
    let h = system(crystal("honeycomb", 2.5, 2, 0.95), [64, 48, 3], [true; 3], &[1.7, 2.3]);
    let mut rng = Rng::new(5);
    let spins = spins_from(h.cell(), |_, _| rng.direction());
    let (a, b) = in_pools(|| MagnetizationObserver::new(&h).observe(&spins).unwrap());
    let bits = |m: &spindrift_observe::Magnetization| -> Vec<u64> {
        std::iter::once(&m.total)
            .chain(&m.by_species)
            .chain(&m.by_layer)
            .flatten()
            .map(|x| x.to_bits())
            .collect()
    };
    assert!(h.len() > 4 * spindrift_hamiltonian::CHUNK);
    assert_eq!(bits(&a), bits(&b));
}

#[test]
fn wrong_length_is_an_error() {
    let h = system(crystal("square", 3.0, 1, 1.0), [4, 4, 1], [true; 3], &[1.0]);
    let err = MagnetizationObserver::new(&h).observe(&[[0.0, 0.0, 1.0]; 3]).unwrap_err();
    assert_eq!(err, ObserveError::LengthMismatch { expected: 16, got: 3 });
}
