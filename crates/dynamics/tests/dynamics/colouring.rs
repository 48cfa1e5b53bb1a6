//! The colouring used by parallel Monte Carlo is proper on every preset.

use crate::common::*;
use spindrift_dynamics::Colouring;
use spindrift_hamiltonian::Hamiltonian;

/// A proper colouring: every occupied site appears in exactly one class, and no bond joins
/// two sites of the same class (definition of a graph colouring; common practice). Checked
/// on sc, bcc, fcc, triangular and honeycomb with 1 to 3 neighbour shells, in even and odd
/// periodic boxes and an open one.
#[test]
fn colouring_is_proper_on_every_lattice() {
    let cases: [(&str, [usize; 3]); 10] = [
        ("simple-cubic", [4, 4, 4]),
        ("simple-cubic", [5, 3, 7]),
        ("bcc", [4, 4, 4]),
        ("bcc", [5, 5, 3]),
        ("fcc", [4, 4, 4]),
        ("fcc", [3, 5, 3]),
        ("triangular", [6, 6, 1]),
        ("triangular", [7, 5, 1]),
        ("honeycomb", [6, 6, 1]),
        ("honeycomb", [5, 7, 1]),
    ];
    for (name, cells) in cases {
        for shells in 1..=3 {
            for periodic in [[true; 3], [false, true, false]] {
                let list: Vec<_> = (1..=shells).map(|n| shell(n, 1.0, None)).collect();
                let h = build(
                    name,
                    3.0,
                    cells,
                    periodic,
                    &list,
                    species(2.0, 0.1, 0.0, [0.0, 0.0, 1.0]),
                    [0.0; 3],
                );
                let colours = check_proper(&h);
                if periodic[0] {
                    println!("{name} {cells:?} {shells} shell(s): {colours} colours");
                }
            }
        }
    }
}

fn check_proper(h: &Hamiltonian) -> usize {
    let c = Colouring::new(h).unwrap();
    let cell = h.cell();
    let mut colour = vec![usize::MAX; h.len()];
    for k in 0..c.len() {
        let class = c.class(k);
        assert!(class.windows(2).all(|w| w[0] < w[1]), "class {k} not ascending");
        for &s in class {
            assert_eq!(colour[s as usize], usize::MAX, "site {s} in two classes");
            colour[s as usize] = k;
        }
    }
    let mut bonds_checked = 0;
    for i in 0..h.len() {
        assert_ne!(colour[i], usize::MAX, "site {i} uncoloured");
        let (cc, b) = cell.decompose(i);
        for bond in h.bonds().from_basis(b) {
            if let Some(j) = cell.neighbour(cc, bond.offset, bond.to) {
                if j != i {
                    assert_ne!(colour[i], colour[j], "bonded sites {i} and {j} share colour {}", colour[i]);
                    bonds_checked += 1;
                }
            }
        }
    }
    assert!(bonds_checked > 0);
    c.len()
}
