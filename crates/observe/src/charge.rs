//! Topological charge of each layer, by the lattice solid-angle method.
//!
//! The continuum charge `Q = (1/4 pi) integral m.(dm/dx x dm/dy) dx dy` (INTERFACE.md) is
//! evaluated as `Q = (1/4 pi) sum Omega` over a triangulation of the layer, `Omega` being the
//! signed solid angle that the three spins of a triangle span on the unit sphere
//! (B. Berg and M. Lüscher, Nucl. Phys. B 190, 412 (1981)). On a closed (fully periodic)
//! layer the sum is exactly `4 pi` times an integer, the degree of the map from the torus to
//! the sphere, for any configuration without degenerate triangles.
//!
//! # Triangulation
//!
//! Each basis site `b` forms a Bravais sublattice of its layer, spanned by the in-plane
//! primitive vectors `a1`, `a2`. Every cell `c` contributes the two triangles
//! `(c, c+a1, c+a1+a2)` and `(c, c+a1+a2, c+a2)` of sites `b`, both counter-clockwise seen
//! from `+n`, `n` along `a1 x a2`; together they tile the sublattice's plane once. Triangles
//! are never stored: the corners follow from the site index, so the triangulation costs no
//! memory per spin. Triangles that would cross an open boundary are left out, as are those
//! with a vacant corner (recognised by its zero spin), and a periodic axis of a single cell
//! has no triangles (the image of a site is not its neighbour).
//!
//! The orientation is that of the laboratory: when `a1 x a2` points to negative `z` the
//! sign is flipped, so that `x, y` in the formula are the Cartesian axes whatever order
//! the crystal lists its vectors in. Layers that contain the `z` axis keep `n = a1 x a2`.
//!
//! # Several sites per layer
//!
//! A layer with several basis sites (honeycomb, the face-centred planes of a cubic cell)
//! is several interpenetrating sublattices. Each gives its own charge, the same integer for
//! a texture that is smooth on the scale of the lattice, and the charge of the layer is
//! their mean. Triangles joining different sublattices would depend on a choice of bonds;
//! the per-sublattice mean needs none and keeps the exact integer property of each one.
//!
//! # Sign
//!
//! For a radial texture `m = (sin theta cos Phi, sin theta sin Phi, cos theta)` with
//! `theta(r)` and `Phi = w phi + helicity`, the integral gives
//! `Q = (w / 2) [cos theta(0) - cos theta(infinity)]`. A skyrmion (`w = 1`) whose core
//! points to `-z` in a `+z` background thus has `Q = -1`; reversing every spin (core `+z`,
//! background `-z`) reverses `Q`, since it is odd in `m`, giving `Q = +1`.

use crate::atan2::atan2;
use crate::chunks::ChunkPlanes;
use crate::error::ObserveError;
use rayon::prelude::*;
use spindrift_hamiltonian::CHUNK;
use spindrift_lattice::{cross, dot, Supercell, Vec3};
use std::f64::consts::PI;

/// Signed solid angle (sr) of the spherical triangle of three unit vectors, in
/// `(-2 pi, 2 pi]`: `tan(Omega / 2) = S1.(S2 x S3) / (1 + S1.S2 + S2.S3 + S3.S1)`
/// (A. van Oosterom and J. Strackee, IEEE Trans. Biomed. Eng. 30, 125 (1983)), evaluated
/// with `atan2` (our own, `crate::atan2`: the same bits on every machine) so that the
/// quadrant is right. Positive when the corners run
/// counter-clockwise seen from outside the sphere.
#[inline(always)]
pub fn solid_angle(s1: Vec3, s2: Vec3, s3: Vec3) -> f64 {
    let numerator = dot(s1, cross(s2, s3));
    let denominator = 1.0 + dot(s1, s2) + dot(s2, s3) + dot(s3, s1);
    2.0 * atan2(numerator, denominator)
}

/// Topological charges of one spin configuration (dimensionless).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TopologicalCharge {
    /// Charge of each layer along `a3`, indexed like [`Supercell::layer`].
    pub by_layer: Vec<f64>,
    /// Mean of `by_layer`.
    pub mean: f64,
}

/// The geometry the triangulation needs, fixed at construction.
#[derive(Debug, Clone)]
struct Geometry {
    len: usize,
    basis_len: usize,
    cells: [usize; 3],
    periodic: [bool; 3],
    /// Layer of each basis site within its cell.
    basis_layer: Vec<usize>,
    layers_per_cell: usize,
    /// Sublattices in each layer of a cell, to average over.
    sublattices: Vec<usize>,
    /// `+1` or `-1`: the orientation of `a1 x a2` against the laboratory `z`.
    orientation: f64,
    chunks: ChunkPlanes,
    /// Partial sums per chunk: `span * basis_len` solid-angle sums.
    slot: usize,
}

/// Computes [`TopologicalCharge`]s of a supercell's layers.
///
/// Keeps the supercell's dimensions and a scratch buffer of partial sums (one number per
/// basis site and plane of cells a chunk touches, about `8 nb (2 + CHUNK / plane)` bytes per
/// [`CHUNK`] sites); the triangles themselves take no memory.
#[derive(Debug, Clone)]
pub struct ChargeObserver {
    geometry: Geometry,
    scratch: Vec<f64>,
}

impl ChargeObserver {
    /// Prepares the triangulation of the layers of `cell`.
    pub fn new(cell: &Supercell) -> Self {
        let crystal = cell.crystal();
        let nb = cell.basis_len();
        let cells = cell.cells();
        let layers_per_cell = cell.layers_per_cell();
        let basis_layer = cell.basis_layers().to_vec();
        let mut sublattices = vec![0; layers_per_cell];
        for &l in &basis_layer {
            sublattices[l] += 1;
        }
        let n = cross(crystal.vectors[0], crystal.vectors[1]);
        let orientation = if n[2] < 0.0 { -1.0 } else { 1.0 };
        let chunks = ChunkPlanes::new(cell.len(), cells[0] * cells[1] * nb);
        let slot = chunks.span * nb;
        let scratch = vec![0.0; chunks.count * slot];
        Self {
            geometry: Geometry {
                len: cell.len(),
                basis_len: nb,
                cells,
                periodic: cell.periodic(),
                basis_layer,
                layers_per_cell,
                sublattices,
                orientation,
                chunks,
                slot,
            },
            scratch,
        }
    }

    /// Number of layers (length of [`TopologicalCharge::by_layer`]).
    pub fn layer_count(&self) -> usize {
        self.geometry.cells[2] * self.geometry.layers_per_cell
    }

    /// The charges of `spins` (one unit vector per site, zero on vacant sites).
    pub fn observe(&mut self, spins: &[Vec3]) -> Result<TopologicalCharge, ObserveError> {
        let mut out = TopologicalCharge::default();
        self.observe_into(spins, &mut out)?;
        Ok(out)
    }

    /// Like [`Self::observe`], writing into `out`; its vector is resized once and then
    /// reused, so repeated calls do not allocate.
    pub fn observe_into(&mut self, spins: &[Vec3], out: &mut TopologicalCharge) -> Result<(), ObserveError> {
        let g = &self.geometry;
        if spins.len() != g.len {
            return Err(ObserveError::LengthMismatch { expected: g.len, got: spins.len() });
        }
        self.scratch
            .par_chunks_mut(g.slot.max(1))
            .zip(spins.par_chunks(CHUNK))
            .enumerate()
            .for_each(|(k, (acc, chunk))| g.accumulate(spins, ChunkPlanes::start(k), chunk.len(), acc));

        // Every sublattice of a layer has the same weight, so the mean of their charges is
        // the sum of all their solid angles over 4 pi times their number: the partial sums
        // go straight into the layer's entry, in the fixed order chunk, plane, basis site.
        let layers = self.layer_count();
        out.by_layer.clear();
        out.by_layer.resize(layers, 0.0);
        let nb = g.basis_len;
        let lpc = g.layers_per_cell;
        for (k, acc) in self.scratch.chunks(g.slot.max(1)).enumerate() {
            let planes = g.chunks.planes(k);
            for (p, c3) in planes.enumerate() {
                for b in 0..nb {
                    out.by_layer[c3 * lpc + g.basis_layer[b]] += acc[p * nb + b];
                }
            }
        }
        let mut sum = 0.0;
        for (l, q) in out.by_layer.iter_mut().enumerate() {
            *q *= g.orientation / (4.0 * PI * g.sublattices[l % lpc] as f64);
            sum += *q;
        }
        out.mean = if layers > 0 { sum / layers as f64 } else { 0.0 };
        Ok(())
    }
}

/// Positions of a row whose solid angles are computed together, in buffers on the stack
/// (about 2 KiB).
const SPAN: usize = 256;

/// Whether a spin is present (vacant sites hold the zero spin), without a branch.
#[inline(always)]
fn present(s: Vec3) -> bool {
    (s[0] != 0.0) | (s[1] != 0.0) | (s[2] != 0.0)
}

/// The sum of the solid angles of the two triangles anchored at a site `s0` with
/// neighbours `s1` (along a1), `s12` (along a1 + a2) and `s2` (along a2), each triangle
/// counted only when its corners are present: `(0 + Omega_1) + Omega_2`, the order of the
/// site-by-site sum. Without branches: both angles are computed and the absent ones
/// replaced by zero, which leaves the sum's bits alone (see `Geometry::accumulate`).
#[inline(always)]
fn anchored(s0: Vec3, s1: Vec3, s12: Vec3, s2: Vec3) -> f64 {
    let (p0, p1, p12, p2) = (present(s0), present(s1), present(s12), present(s2));
    let lower = solid_angle(s0, s1, s12);
    let upper = solid_angle(s0, s12, s2);
    let lower = if p0 & p1 & p12 { lower } else { 0.0 };
    let upper = if p0 & p12 & p2 { upper } else { 0.0 };
    (0.0 + lower) + upper
}

spindrift_isa::multiversion! {
    /// `out[k] = anchored(row[k], row[k + 1], next[k + 1], next[k])`: the solid angles
    /// anchored at consecutive cells of one basis site's piece of a row whose neighbour
    /// cell along a1 is the next one in the row (no wrap), `next` being the piece of the
    /// row one cell further along a2. Compiled per instruction-set level (same bits on
    /// each).
    fn anchored_run(row: &[Vec3], next: &[Vec3], out: &mut [f64]) {
        let n = out.len();
        let (row, next) = (&row[..n + 1], &next[..n + 1]);
        for k in 0..n {
            out[k] = anchored(row[k], row[k + 1], next[k + 1], next[k]);
        }
    }
}

impl Geometry {
    /// Index along an in-plane axis one cell further, or `None` where the box ends.
    #[inline(always)]
    fn next(&self, axis: usize, c: usize) -> Option<usize> {
        if c + 1 < self.cells[axis] {
            Some(c + 1)
        } else if self.periodic[axis] && self.cells[axis] > 1 {
            Some(0)
        } else {
            None
        }
    }

    /// Sums the solid angles of the two triangles anchored at every site of one chunk,
    /// into one partial sum per plane of cells and basis site, site by site in index
    /// order.
    ///
    /// The chunk is walked by pieces of rows of cells along a1, one basis site's `n1`
    /// sites each (see `Supercell` for the site order). Where the row's neighbour along a2
    /// exists, the angles of a stretch of up to [`SPAN`] cells are computed by
    /// [`anchored_run`] (the last cell of a row, whose neighbour along a1 wraps or is
    /// cut, one at a time) and then added in order. A site without triangles
    /// adds `+0`, which changes no partial sum: each starts at `+0` and is a sum of terms
    /// none of which is `-0` (each term is `0 + ...`), so it is never `-0`; hence the bits
    /// are those of the sum over the sites that have triangles alone.
    fn accumulate(&self, spins: &[Vec3], start: usize, count: usize, acc: &mut [f64]) {
        acc.fill(0.0);
        let nb = self.basis_len;
        let [n1, n2, _] = self.cells;
        let plane = n1 * nb * n2;
        let first_plane = start / plane;
        // The cells of a row whose neighbour along a1 is the next cell of the row.
        let inner = n1.saturating_sub(1);
        let mut omega = [0.0; SPAN];
        let end = start + count;
        let mut site = start;
        while site < end {
            // The piece of basis site `b` of the row of cells `(*, c2, c3)`.
            let piece = site / n1;
            let (row, b) = (piece / nb, piece % nb);
            let piece_start = piece * n1;
            let seg_end = (piece_start + n1).min(end);
            let (c2, c3) = (row % n2, row / n2);
            let Some(d2) = self.next(1, c2) else {
                site = seg_end;
                continue;
            };
            let this = &spins[piece_start..piece_start + n1];
            let next_start = ((c3 * n2 + d2) * nb + b) * n1;
            let next = &spins[next_start..next_start + n1];
            let sum = &mut acc[(c3 - first_plane) * nb + b];
            let mut p = site - piece_start;
            let p_end = seg_end - piece_start;
            while p < p_end {
                let q = if p < inner { (p + SPAN).min(inner).min(p_end) } else { p_end };
                let out = &mut omega[..q - p];
                if p < inner {
                    anchored_run(&this[p..], &next[p..], out);
                } else {
                    // The last cell: its neighbour along a1 is the row's first cell, or none.
                    let wrap = self.next(0, n1 - 1).is_some();
                    for (k, w) in out.iter_mut().enumerate() {
                        let (i, j) = (p + k, p + k - inner);
                        *w = if wrap { anchored(this[i], this[j], next[j], next[i]) } else { 0.0 };
                    }
                }
                for &w in out.iter() {
                    *sum += w;
                }
                p = q;
            }
            site = seg_end;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The per-site definition of `Geometry::accumulate`: every site in index order, its
    /// two triangles where its neighbours exist and are present.
    fn accumulate_by_site(g: &Geometry, spins: &[Vec3], start: usize, count: usize, acc: &mut [f64]) {
        acc.fill(0.0);
        let nb = g.basis_len;
        let [n1, n2, _] = g.cells;
        let first_plane = start / (n1 * n2 * nb);
        for i in start..start + count {
            let (c1, b, c2, c3) = (i % n1, (i / n1) % nb, (i / (nb * n1)) % n2, i / (nb * n1 * n2));
            let s0 = spins[i];
            if s0 == [0.0; 3] {
                continue;
            }
            let (Some(d1), Some(d2)) = (g.next(0, c1), g.next(1, c2)) else { continue };
            let index = |x: usize, y: usize| ((c3 * n2 + y) * nb + b) * n1 + x;
            let (s1, s12, s2) = (spins[index(d1, c2)], spins[index(d1, d2)], spins[index(c1, d2)]);
            let mut omega = 0.0;
            if s1 != [0.0; 3] && s12 != [0.0; 3] {
                omega += solid_angle(s0, s1, s12);
            }
            if s12 != [0.0; 3] && s2 != [0.0; 3] {
                omega += solid_angle(s0, s12, s2);
            }
            acc[(c3 - first_plane) * nb + b] += omega;
        }
    }

    /// The row kernel gives the partial sums of the site-by-site loop bit for bit (common
    /// practice for a reordered kernel): rows cut by chunk ends, open and periodic edges,
    /// boxes of one cell along an axis, bases of one to four sites, vacancies, and aligned
    /// spins whose solid angles are signed zeros.
    #[test]
    fn row_kernel_equals_site_by_site_sum_bitwise() {
        use spindrift_lattice::{preset, unit_hash};
        let cases = [
            ("square", [40, 40, 1], [true, true, true], 1.0),
            ("simple-cubic", [70, 50, 3], [true, true, false], 1.0),
            ("simple-cubic", [33, 29, 6], [false, true, false], 0.85),
            ("honeycomb", [30, 45, 2], [false, false, true], 0.8),
            ("triangular", [1, 6, 1], [true, true, false], 1.0),
            ("triangular", [7, 1, 2], [true, true, false], 1.0),
            ("bcc", [17, 23, 5], [true, false, false], 0.9),
            ("fcc", [9, 13, 5], [true, true, true], 0.95),
        ];
        for (name, cells, periodic, occupancy) in cases {
            let mut crystal = preset(name, 1.0, None).unwrap();
            for b in &mut crystal.basis {
                b.occupancy = occupancy;
            }
            let cell = Supercell::new(crystal, cells, periodic, 3).unwrap();
            let spins: Vec<Vec3> = (0..cell.len())
                .map(|i| {
                    let i = i as u64;
                    if !cell.is_occupied(i as usize) {
                        [0.0; 3]
                    } else if unit_hash(4, 0, i) < 0.3 {
                        [0.0, 0.0, 1.0]
                    } else {
                        let z = 2.0 * unit_hash(4, 1, i) - 1.0;
                        let phi = 2.0 * PI * unit_hash(4, 2, i);
                        let r = (1.0 - z * z).sqrt();
                        [r * phi.cos(), r * phi.sin(), z]
                    }
                })
                .collect();
            let g = ChargeObserver::new(&cell).geometry;
            for k in 0..g.chunks.count {
                let start = ChunkPlanes::start(k);
                let count = CHUNK.min(g.len - start);
                let mut rows = vec![f64::NAN; g.slot];
                let mut sites = vec![f64::NAN; g.slot];
                g.accumulate(&spins, start, count, &mut rows);
                accumulate_by_site(&g, &spins, start, count, &mut sites);
                for (r, s) in rows.iter().zip(&sites) {
                    assert_eq!(r.to_bits(), s.to_bits(), "{name} {cells:?} chunk {k}: {r} != {s}");
                }
            }
        }
    }

    /// The octant of the unit sphere bounded by the three axes spans 4 pi / 8 = pi / 2 sr
    /// (elementary geometry), positive for the counter-clockwise order x, y, z.
    #[test]
    fn octant_spans_an_eighth_of_the_sphere() {
        let (x, y, z) = ([1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 1.0]);
        assert!((solid_angle(x, y, z) - PI / 2.0).abs() < 1e-15);
        assert!((solid_angle(x, z, y) + PI / 2.0).abs() < 1e-15);
        assert!((solid_angle(y, z, x) - PI / 2.0).abs() < 1e-15);
    }

    /// A small triangle near the pole spans about its flat area (the sphere is locally a
    /// plane): corners at polar angle eps around +z, 120 degrees apart, enclose the
    /// equilateral area (3 sqrt(3) / 4) eps^2 to relative order eps^2.
    #[test]
    fn small_triangle_spans_its_area() {
        let eps: f64 = 1e-3;
        let corner = |phi: f64| [eps.sin() * phi.cos(), eps.sin() * phi.sin(), eps.cos()];
        let t = 2.0 * PI / 3.0;
        let omega = solid_angle(corner(0.0), corner(t), corner(2.0 * t));
        let area = 3f64.sqrt() * 3.0 / 4.0 * eps * eps;
        assert!((omega / area - 1.0).abs() < 1e-5, "{omega} vs {area}");
    }
}
