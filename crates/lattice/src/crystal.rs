//! Crystals: primitive vectors plus a basis of sites, and the presets users name in configs.

use crate::error::LatticeError;
use crate::vec3::{cross, dot, norm, Vec3};

/// Names accepted by [`preset`].
pub const PRESETS: [&str; 7] =
    ["simple-cubic", "bcc", "fcc", "square", "triangular", "honeycomb", "hexagonal"];

/// One site of the basis.
#[derive(Debug, Clone, PartialEq)]
pub struct BasisSite {
    /// Fractional coordinates along the three primitive vectors.
    pub position: Vec3,
    /// Index into the caller's species list.
    pub species: usize,
    /// Probability that the site is occupied, in `(0, 1]` (1 = always).
    pub occupancy: f64,
}

/// A crystal: Cartesian primitive vectors (ångström) and a basis.
///
/// The third vector is the stacking axis: layers, films and the `layer` index of a spin
/// are counted along it.
#[derive(Debug, Clone, PartialEq)]
pub struct Crystal {
    /// Rows are the primitive vectors `a1, a2, a3`, Å.
    pub vectors: [Vec3; 3],
    /// Basis sites, at least one.
    pub basis: Vec<BasisSite>,
}

impl Crystal {
    /// Builds a crystal and checks that the vectors span a volume and no sites overlap.
    pub fn new(vectors: [Vec3; 3], basis: Vec<BasisSite>) -> Result<Self, LatticeError> {
        let volume = dot(vectors[0], cross(vectors[1], vectors[2])).abs();
        let scale = norm(vectors[0]) * norm(vectors[1]) * norm(vectors[2]);
        if !volume.is_finite() || scale == 0.0 || volume < 1e-9 * scale {
            return Err(LatticeError::DegenerateVectors { volume });
        }
        if basis.is_empty() {
            return Err(LatticeError::NoSites);
        }
        for (i, s) in basis.iter().enumerate() {
            if !(s.occupancy > 0.0 && s.occupancy <= 1.0) {
                return Err(LatticeError::BadOccupancy { site: i, value: s.occupancy });
            }
        }
        let crystal = Self { vectors, basis };
        let min_len = crystal.vectors.iter().map(|v| norm(*v)).fold(f64::MAX, f64::min);
        for a in 0..crystal.basis.len() {
            for b in (a + 1)..crystal.basis.len() {
                // Overlap modulo lattice translations: compare the fractional difference
                // reduced to the nearest image.
                let mut d = [0.0; 3];
                for k in 0..3 {
                    let x = crystal.basis[b].position[k] - crystal.basis[a].position[k];
                    d[k] = x - x.round();
                }
                let distance = norm(crystal.to_cartesian(d));
                if distance < 1e-3 * min_len {
                    return Err(LatticeError::OverlappingSites { a, b, distance });
                }
            }
        }
        Ok(crystal)
    }

    /// Cartesian position (Å) of fractional coordinates.
    pub fn to_cartesian(&self, f: Vec3) -> Vec3 {
        let v = &self.vectors;
        [
            f[0] * v[0][0] + f[1] * v[1][0] + f[2] * v[2][0],
            f[0] * v[0][1] + f[1] * v[1][1] + f[2] * v[2][1],
            f[0] * v[0][2] + f[1] * v[1][2] + f[2] * v[2][2],
        ]
    }

    /// Cell volume, Å^3.
    pub fn volume(&self) -> f64 {
        dot(self.vectors[0], cross(self.vectors[1], self.vectors[2])).abs()
    }

    /// Distance between the lattice planes spanned by the two other vectors, for each
    /// axis (Å). A sphere of radius `r` around a site needs `ceil(r / spacing)` cells
    /// along that axis.
    pub fn plane_spacings(&self) -> [f64; 3] {
        let v = &self.vectors;
        let vol = self.volume();
        [vol / norm(cross(v[1], v[2])), vol / norm(cross(v[2], v[0])), vol / norm(cross(v[0], v[1]))]
    }

    /// Unit normal of the plane spanned by `a1` and `a2` (the layer plane).
    pub fn layer_normal(&self) -> Vec3 {
        let n = cross(self.vectors[0], self.vectors[1]);
        let l = norm(n);
        [n[0] / l, n[1] / l, n[2] / l]
    }
}

/// Builds a preset crystal with one species (index 0) on every site.
///
/// `a` is the cubic or in-plane lattice constant (Å); `c` the stacking distance for the
/// two-dimensional presets and `hexagonal` (defaults to `a`). Cubic presets use the
/// conventional cubic cell (bcc: 2 sites, fcc: 4 sites), so that `cells` counts cubes and
/// layers lie in the `xy` plane. `honeycomb` has the triangular Bravais lattice of
/// constant `a` and two sites at distance `a/sqrt(3)`.
pub fn preset(name: &str, a: f64, c: Option<f64>) -> Result<Crystal, LatticeError> {
    if !(a.is_finite() && a > 0.0) {
        return Err(LatticeError::BadConstant { value: a });
    }
    let c = c.unwrap_or(a);
    if !(c.is_finite() && c > 0.0) {
        return Err(LatticeError::BadConstant { value: c });
    }
    let site = |x: f64, y: f64, z: f64| BasisSite { position: [x, y, z], species: 0, occupancy: 1.0 };
    let cubic = [[a, 0.0, 0.0], [0.0, a, 0.0], [0.0, 0.0, a]];
    let s3 = 3f64.sqrt();
    let hex = [[a, 0.0, 0.0], [0.5 * a, 0.5 * s3 * a, 0.0], [0.0, 0.0, c]];
    let (vectors, basis) = match name {
        "simple-cubic" => (cubic, vec![site(0.0, 0.0, 0.0)]),
        "bcc" => (cubic, vec![site(0.0, 0.0, 0.0), site(0.5, 0.5, 0.5)]),
        "fcc" => {
            (cubic, vec![site(0.0, 0.0, 0.0), site(0.5, 0.5, 0.0), site(0.5, 0.0, 0.5), site(0.0, 0.5, 0.5)])
        }
        "square" => ([[a, 0.0, 0.0], [0.0, a, 0.0], [0.0, 0.0, c]], vec![site(0.0, 0.0, 0.0)]),
        "triangular" | "hexagonal" => (hex, vec![site(0.0, 0.0, 0.0)]),
        "honeycomb" => (hex, vec![site(0.0, 0.0, 0.0), site(1.0 / 3.0, 1.0 / 3.0, 0.0)]),
        _ => return Err(LatticeError::UnknownPreset { name: name.to_string(), known: PRESETS.join(", ") }),
    };
    Crystal::new(vectors, basis)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn presets_build_and_reject_bad_input() {
        for p in PRESETS {
            let c = preset(p, 2.5, None).unwrap();
            assert!(c.volume() > 0.0, "{p}");
        }
        assert!(matches!(preset("diamond", 1.0, None), Err(LatticeError::UnknownPreset { .. })));
        assert!(matches!(preset("bcc", -1.0, None), Err(LatticeError::BadConstant { .. })));
    }

    #[test]
    fn collinear_vectors_and_overlapping_sites_are_refused() {
        let s = BasisSite { position: [0.0; 3], species: 0, occupancy: 1.0 };
        let collinear = [[1.0, 0.0, 0.0], [2.0, 0.0, 0.0], [0.0, 0.0, 1.0]];
        assert!(matches!(
            Crystal::new(collinear, vec![s.clone()]),
            Err(LatticeError::DegenerateVectors { .. })
        ));
        let cubic = [[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]];
        let mut t = s.clone();
        t.position = [1.0, 0.0, 0.0]; // the same site one cell over
        assert!(matches!(Crystal::new(cubic, vec![s, t]), Err(LatticeError::OverlappingSites { .. })));
    }
}
