//! Lagged products of a series by fast Fourier transform, for autocorrelation functions.
//!
//! `sum_{i=0}^{n-1-t} x_i x_{i+t}` for every lag `t` costs `O(n^2)` directly; with the
//! series zero-padded to a power of two at least `2n` (so that the cyclic correlation has
//! no wrap-around), it is the inverse transform of `|X(k)|^2`, in `O(n log n)`
//! (Wiener-Khinchin theorem; the radix-2 algorithm of J. W. Cooley and J. W. Tukey,
//! Math. Comp. 19, 297 (1965)). The transform runs on one thread in a fixed order, so the
//! result does not depend on the machine's thread count.

use std::f64::consts::PI;

/// `out[t] = sum_{i=0}^{n-1-t} x_i x_{i+t}` for `t = 0 .. n-1`.
pub(crate) fn lagged_products(x: &[f64]) -> Vec<f64> {
    let n = x.len();
    if n == 0 {
        return Vec::new();
    }
    let size = (2 * n).next_power_of_two();
    let mut buf = vec![[0.0f64; 2]; size];
    for (b, &v) in buf.iter_mut().zip(x) {
        b[0] = v;
    }
    let twiddle = twiddles(size);
    transform(&mut buf, &twiddle, false);
    for b in buf.iter_mut() {
        *b = [b[0] * b[0] + b[1] * b[1], 0.0];
    }
    transform(&mut buf, &twiddle, true);
    let norm = 1.0 / size as f64;
    buf[..n].iter().map(|b| b[0] * norm).collect()
}

/// `exp(-2 pi i k / size)` for `k < size / 2`, each from its own sine and cosine so that
/// no rounding accumulates along the table.
fn twiddles(size: usize) -> Vec<[f64; 2]> {
    (0..size / 2)
        .map(|k| {
            let a = -2.0 * PI * k as f64 / size as f64;
            [a.cos(), a.sin()]
        })
        .collect()
}

/// In-place iterative radix-2 transform of a power-of-two length; the inverse is
/// unnormalised.
fn transform(buf: &mut [[f64; 2]], twiddle: &[[f64; 2]], inverse: bool) {
    let n = buf.len();
    let mut j = 0;
    for i in 1..n {
        let mut bit = n >> 1;
        while j & bit != 0 {
            j ^= bit;
            bit >>= 1;
        }
        j |= bit;
        if i < j {
            buf.swap(i, j);
        }
    }
    let sign = if inverse { -1.0 } else { 1.0 };
    let mut len = 2;
    while len <= n {
        let stride = n / len;
        for start in (0..n).step_by(len) {
            for k in 0..len / 2 {
                let w = twiddle[k * stride];
                let (wr, wi) = (w[0], sign * w[1]);
                let a = buf[start + k];
                let b = buf[start + k + len / 2];
                let t = [b[0] * wr - b[1] * wi, b[0] * wi + b[1] * wr];
                buf[start + k] = [a[0] + t[0], a[1] + t[1]];
                buf[start + k + len / 2] = [a[0] - t[0], a[1] - t[1]];
            }
        }
        len <<= 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The transform route equals the direct double sum (its definition) for awkward
    /// lengths, to rounding of order `log2(n)` machine epsilons times the zero-lag sum.
    #[test]
    fn matches_direct_sums() {
        for n in [1usize, 2, 3, 7, 64, 1000, 1025] {
            let x: Vec<f64> =
                (0..n).map(|i| ((i * 7919) % 101) as f64 / 50.0 - 1.0 + 0.3 * (i as f64).sin()).collect();
            let fast = lagged_products(&x);
            let scale: f64 = x.iter().map(|v| v * v).sum::<f64>().max(1e-300);
            for t in 0..n {
                let direct: f64 = (0..n - t).map(|i| x[i] * x[i + t]).sum();
                assert!((fast[t] - direct).abs() < 1e-13 * scale, "n {n} lag {t}: {} vs {direct}", fast[t]);
            }
        }
    }
}
