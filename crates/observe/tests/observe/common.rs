//! Shared helpers: seeded random numbers, small systems, thread pools.

use spindrift_hamiltonian::{Hamiltonian, Species};
use spindrift_lattice::{preset, unit_hash, BondList, Crystal, Supercell, Vec3};

/// Seeded uniform and normal numbers from `spindrift_lattice::unit_hash` (SplitMix64
/// finalisation), one stream per seed, with the Box-Muller transform (G. E. P. Box and
/// M. E. Muller, Ann. Math. Statist. 29, 610 (1958)).
pub struct Rng {
    seed: u64,
    counter: u64,
    spare: Option<f64>,
}

impl Rng {
    pub fn new(seed: u64) -> Self {
        Self { seed, counter: 0, spare: None }
    }

    /// Uniform in `(0, 1)`.
    pub fn uniform(&mut self) -> f64 {
        self.counter += 1;
        unit_hash(self.seed, 0x5EED, self.counter).max(1e-300)
    }

    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let r = (-2.0 * self.uniform().ln()).sqrt();
        let phi = std::f64::consts::TAU * self.uniform();
        self.spare = Some(r * phi.sin());
        r * phi.cos()
    }

    /// Uniform on the unit sphere.
    pub fn direction(&mut self) -> Vec3 {
        let z = 2.0 * self.uniform() - 1.0;
        let phi = std::f64::consts::TAU * self.uniform();
        let r = (1.0 - z * z).sqrt();
        [r * phi.cos(), r * phi.sin(), z]
    }
}

/// Species `S0, S1, ...` with the given moments (μB).
pub fn species(moments: &[f64]) -> Vec<Species> {
    moments
        .iter()
        .enumerate()
        .map(|(k, &moment)| Species {
            name: format!("S{k}"),
            moment,
            damping: 0.1,
            anisotropy: 0.0,
            axis: [0.0, 0.0, 1.0],
        })
        .collect()
}

/// A system without couplings: observers only need geometry and moments.
pub fn system(crystal: Crystal, cells: [usize; 3], periodic: [bool; 3], moments: &[f64]) -> Hamiltonian {
    let nb = crystal.basis.len();
    let cell = Supercell::new(crystal, cells, periodic, 17).unwrap();
    Hamiltonian::new(cell, species(moments), BondList::new(nb), [0.0; 3]).unwrap()
}

/// A preset crystal with species assigned to basis sites round-robin and an occupancy.
pub fn crystal(name: &str, a: f64, species_count: usize, occupancy: f64) -> Crystal {
    let mut c = preset(name, a, None).unwrap();
    for (k, s) in c.basis.iter_mut().enumerate() {
        s.species = k % species_count;
        s.occupancy = occupancy;
    }
    c
}

/// Spins from a function of the Cartesian position, zero on vacant sites.
pub fn spins_from(cell: &Supercell, mut f: impl FnMut(usize, Vec3) -> Vec3) -> Vec<Vec3> {
    (0..cell.len()).map(|i| if cell.is_occupied(i) { f(i, cell.position(i)) } else { [0.0; 3] }).collect()
}

/// Runs `f` inside rayon pools of 1 and 2 threads.
pub fn in_pools<T: Send>(f: impl Fn() -> T + Sync) -> (T, T) {
    let pool = |n| rayon::ThreadPoolBuilder::new().num_threads(n).build().unwrap();
    (pool(1).install(&f), pool(2).install(&f))
}

pub fn normalised(v: Vec3) -> Vec3 {
    let l = (v[0] * v[0] + v[1] * v[1] + v[2] * v[2]).sqrt();
    [v[0] / l, v[1] / l, v[2] / l]
}
