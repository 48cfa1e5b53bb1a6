//! Neighbour shells by distance, for any lattice and basis.
//!
//! A shell is a distinct neighbour distance; shell 1 is the nearest. Distances are found
//! within the supercell that will be simulated, so that offsets it cannot hold are not
//! counted: a monolayer (one cell along `a3`) has in-plane shells only, and an open axis
//! of `n` cells holds offsets shorter than `n`. Distances closer than [`tolerance`] are
//! the same shell.

use crate::supercell::Supercell;
use crate::vec3::{norm, Vec3};

/// A neighbour of basis site `from`: basis site `to` in the cell at `offset`.
#[derive(Debug, Clone, PartialEq)]
pub struct Neighbour {
    /// Basis site of the centre.
    pub from: usize,
    /// Basis site of the neighbour.
    pub to: usize,
    /// Cell offset of the neighbour.
    pub offset: [i32; 3],
    /// Cartesian bond vector from centre to neighbour, Å.
    pub vector: Vec3,
    /// Bond length, Å.
    pub distance: f64,
}

/// Distance tolerance for "the same shell", Å: 1e-5 of the longest primitive vector.
pub fn tolerance(cell: &Supercell) -> f64 {
    1e-5 * cell.crystal().vectors.iter().map(|v| norm(*v)).fold(0.0, f64::max)
}

/// Every neighbour of basis site `from` closer than `rmax` (Å, plus tolerance), sorted by
/// distance, that the supercell can hold.
pub fn neighbours_within(cell: &Supercell, from: usize, rmax: f64) -> Vec<Neighbour> {
    let crystal = cell.crystal();
    let tol = tolerance(cell);
    let spacing = crystal.plane_spacings();
    let reach: Vec<i32> = (0..3).map(|k| (rmax / spacing[k]).ceil() as i32 + 1).collect();
    let origin = crystal.basis[from].position;
    let mut out = Vec::new();
    for o3 in -reach[2]..=reach[2] {
        for o2 in -reach[1]..=reach[1] {
            for o1 in -reach[0]..=reach[0] {
                let offset = [o1, o2, o3];
                if !cell.offset_allowed(offset) {
                    continue;
                }
                for (to, site) in crystal.basis.iter().enumerate() {
                    if to == from && offset == [0, 0, 0] {
                        continue;
                    }
                    let f = [
                        o1 as f64 + site.position[0] - origin[0],
                        o2 as f64 + site.position[1] - origin[1],
                        o3 as f64 + site.position[2] - origin[2],
                    ];
                    let vector = crystal.to_cartesian(f);
                    let distance = norm(vector);
                    if distance <= rmax + tol {
                        out.push(Neighbour { from, to, offset, vector, distance });
                    }
                }
            }
        }
    }
    out.sort_by(|a, b| a.distance.total_cmp(&b.distance).then(a.to.cmp(&b.to)).then(a.offset.cmp(&b.offset)));
    out
}

/// Sorted distinct distances of `neighbours`, merged within `tol`.
pub fn distinct_distances(neighbours: &[Neighbour], tol: f64) -> Vec<f64> {
    let mut d: Vec<f64> = neighbours.iter().map(|n| n.distance).collect();
    d.sort_by(f64::total_cmp);
    let mut out: Vec<f64> = Vec::new();
    for x in d {
        if out.last().is_none_or(|&l| x - l > tol) {
            out.push(x);
        }
    }
    out
}

/// The first `count` shell distances (Å) among pairs of basis sites accepted by `pair`,
/// searched out to the largest radius the supercell allows. Returns fewer when the
/// supercell holds fewer shells.
pub fn shell_distances(cell: &Supercell, count: usize, pair: &dyn Fn(usize, usize) -> bool) -> Vec<f64> {
    let crystal = cell.crystal();
    let longest = crystal.vectors.iter().map(|v| norm(*v)).fold(0.0, f64::max);
    let tol = tolerance(cell);
    // The largest distance any allowed offset could reach bounds the search.
    let limit = (0..3)
        .map(|k| {
            let n = cell.cells()[k] as f64;
            if cell.periodic()[k] && cell.cells()[k] > 1 {
                f64::INFINITY
            } else if cell.periodic()[k] {
                0.0
            } else {
                n * norm(crystal.vectors[k])
            }
        })
        .fold(0.0, |a: f64, b| a.max(b))
        .min(64.0 * longest)
        + 2.0 * longest;
    let mut rmax = 1.01 * longest;
    loop {
        let mut all = Vec::new();
        for from in 0..cell.basis_len() {
            all.extend(neighbours_within(cell, from, rmax).into_iter().filter(|n| pair(n.from, n.to)));
        }
        let shells = distinct_distances(&all, tol);
        if shells.len() > count || rmax >= limit {
            return shells.into_iter().take(count).collect();
        }
        rmax *= 1.5;
    }
}

/// Neighbours at distance `d` (within tolerance) of every basis site, for pairs accepted by
/// `pair`: the bonds of one shell.
pub fn neighbours_at(cell: &Supercell, d: f64, pair: &dyn Fn(usize, usize) -> bool) -> Vec<Neighbour> {
    let tol = tolerance(cell);
    (0..cell.basis_len())
        .flat_map(|from| neighbours_within(cell, from, d))
        .filter(|n| (n.distance - d).abs() <= tol && pair(n.from, n.to))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::preset;

    fn bulk(name: &str, a: f64) -> Supercell {
        Supercell::new(preset(name, a, None).unwrap(), [8, 8, 8], [true; 3], 0).unwrap()
    }

    /// Coordination numbers and shell radii of the cubic lattices from standard
    /// crystallography tables (C. Kittel, Introduction to Solid State Physics, 8th ed.,
    /// Wiley 2005, ch. 1, table 2): sc 6 at a, 12 at a*sqrt(2), 8 at a*sqrt(3);
    /// bcc 8 at a*sqrt(3)/2, 6 at a; fcc 12 at a/sqrt(2), 6 at a.
    #[test]
    fn cubic_shells_match_crystallography_tables() {
        let all = |_: usize, _: usize| true;
        let cases: [(&str, &[(f64, usize)]); 3] = [
            ("simple-cubic", &[(1.0, 6), (2f64.sqrt(), 12), (3f64.sqrt(), 8)]),
            ("bcc", &[(3f64.sqrt() / 2.0, 8), (1.0, 6), (2f64.sqrt(), 12)]),
            ("fcc", &[(1.0 / 2f64.sqrt(), 12), (1.0, 6), (1.5f64.sqrt(), 24)]),
        ];
        let a = 2.87;
        for (name, expected) in cases {
            let cell = bulk(name, a);
            let d = shell_distances(&cell, expected.len(), &all);
            for (k, &(r, z)) in expected.iter().enumerate() {
                assert!((d[k] - r * a).abs() < 1e-9, "{name} shell {}: {} vs {}", k + 1, d[k], r * a);
                for from in 0..cell.basis_len() {
                    let n = neighbours_at(&cell, d[k], &|f, _| f == from).len();
                    assert_eq!(n, z, "{name} shell {} basis {from}", k + 1);
                }
            }
        }
    }

    /// Two-dimensional coordination numbers (common practice): square 4 then 4 at
    /// a*sqrt(2); triangular 6 then 6 at a*sqrt(3); honeycomb 3 at a/sqrt(3), 6 at a.
    #[test]
    fn monolayer_shells_are_in_plane() {
        let all = |_: usize, _: usize| true;
        let cases: [(&str, &[(f64, usize)]); 3] = [
            ("square", &[(1.0, 4), (2f64.sqrt(), 4), (2.0, 4)]),
            ("triangular", &[(1.0, 6), (3f64.sqrt(), 6), (2.0, 6)]),
            ("honeycomb", &[(1.0 / 3f64.sqrt(), 3), (1.0, 6), (2.0 / 3f64.sqrt(), 3)]),
        ];
        for (name, expected) in cases {
            let cell = Supercell::new(preset(name, 3.0, None).unwrap(), [10, 10, 1], [true; 3], 0).unwrap();
            let d = shell_distances(&cell, expected.len(), &all);
            for (k, &(r, z)) in expected.iter().enumerate() {
                assert!((d[k] - 3.0 * r).abs() < 1e-9, "{name} shell {}", k + 1);
                let n = neighbours_at(&cell, d[k], &|f, _| f == 0).len();
                assert_eq!(n, z, "{name} shell {}", k + 1);
            }
        }
    }

    #[test]
    fn open_axes_limit_the_shells() {
        let cell =
            Supercell::new(preset("simple-cubic", 1.0, None).unwrap(), [1, 1, 2], [false; 3], 0).unwrap();
        let d = shell_distances(&cell, 3, &|_, _| true);
        assert_eq!(d.len(), 1, "a two-site stack has one bond length: {d:?}");
    }
}
