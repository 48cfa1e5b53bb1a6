//! Minimal 3-vector helpers on `[f64; 3]`, the layout every crate shares for positions,
//! spins and fields (contiguous, `Copy`, no alignment padding).

/// A Cartesian 3-vector.
pub type Vec3 = [f64; 3];

/// Dot product.
#[inline(always)]
pub fn dot(a: Vec3, b: Vec3) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Cross product `a x b`.
#[inline(always)]
pub fn cross(a: Vec3, b: Vec3) -> Vec3 {
    [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]
}

/// Euclidean norm.
#[inline(always)]
pub fn norm(a: Vec3) -> f64 {
    dot(a, a).sqrt()
}
