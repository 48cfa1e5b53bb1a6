//! Estimators against textbook results: AR(1) processes, Gaussian and Maxwell moments, the
//! Langevin paramagnet.

use crate::common::*;
use spindrift_hamiltonian::constants::{K_B, MU_B};
use spindrift_observe::statistics::{MIN_BLOCKS, SOKAL_WINDOW_FACTOR};
use spindrift_observe::{autocorrelation_time, blocking, jackknife, ObserveError, Samples};
use std::f64::consts::PI;

/// A stationary AR(1) series `x_t = phi x_{t-1} + sqrt(1 - phi^2) eps_t` with unit variance.
fn ar1(phi: f64, n: usize, seed: u64) -> Vec<f64> {
    let mut rng = Rng::new(seed);
    let mut x = rng.normal();
    let kick = (1.0 - phi * phi).sqrt();
    (0..n)
        .map(|_| {
            x = phi * x + kick * rng.normal();
            x
        })
        .collect()
}

/// AR(1) with unit variance: the error of the mean of `n` samples tends to
/// `sqrt((1 + phi) / ((1 - phi) n))` and `tau_int = (1 + phi) / (2 (1 - phi))`
/// (textbook results, e.g. A. Sokal, "Monte Carlo methods in statistical mechanics", 1997).
/// Blocking (H. Flyvbjerg and H. G. Petersen, J. Chem. Phys. 91, 461 (1989)) must find the
/// error within 15%, and Sokal's windowed sum `tau_int` within 10%.
#[test]
fn ar1_errors_and_autocorrelation_times() {
    let n = 1 << 20;
    for (phi, seed) in [(0.0, 1), (0.5, 2), (0.9, 3)] {
        let x = ar1(phi, n, seed);
        let exact_error = ((1.0 + phi) / ((1.0 - phi) * n as f64)).sqrt();
        let exact_tau = (1.0 + phi) / (2.0 * (1.0 - phi));
        let b = blocking(&x).unwrap();
        assert!(b.converged, "phi {phi}: no plateau");
        assert!((b.error / exact_error - 1.0).abs() < 0.15, "phi {phi}: {} vs {exact_error}", b.error);
        assert!(
            (b.tau() / exact_tau - 1.0).abs() < 0.15,
            "phi {phi}: blocking tau {} vs {exact_tau}",
            b.tau()
        );
        assert!(b.mean.abs() < 5.0 * exact_error, "phi {phi}: mean {}", b.mean);
        let t = autocorrelation_time(&x, SOKAL_WINDOW_FACTOR).unwrap();
        assert!(t.converged);
        assert!((t.tau / exact_tau - 1.0).abs() < 0.1, "phi {phi}: tau {} vs {exact_tau}", t.tau);
        assert!((t.tau - exact_tau).abs() < 5.0 * t.error, "phi {phi}: tau {} +- {}", t.tau, t.error);
        assert!(t.window as f64 >= SOKAL_WINDOW_FACTOR * t.tau);
    }
}

/// For block size 1 the jackknife error of a plain mean is exactly the standard error
/// `s / sqrt(n)` with `s` the `n - 1` sample deviation (B. Efron, "The jackknife, the
/// bootstrap and other resampling plans", SIAM 1982).
#[test]
fn jackknife_of_a_mean_is_the_standard_error() {
    let x = ar1(0.0, 5000, 11);
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let s2 = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    let j = jackknife(&[&x], 1, |m| m[0]).unwrap();
    assert!((j.value - mean).abs() < 1e-15);
    assert!((j.error / (s2 / n).sqrt() - 1.0).abs() < 1e-9, "{} vs {}", j.error, (s2 / n).sqrt());
    assert!(matches!(jackknife(&[&x], 4000, |m| m[0]), Err(ObserveError::TooFew { .. })));
}

/// Gaussian three-component `m` (a paramagnet): `<|m|^4> = 5/3 <|m|^2>^2`, so
/// `U4 = 1 - 5/9 = 4/9`; `|m|` is Maxwell distributed, `<|m|> = sqrt(8/pi) sigma`,
/// `<|m|^2> = 3 sigma^2`, so with `sigma^2 = 1/(3N)` the estimator gives
/// `chi = (3 - 8/pi) / (3 kB T)` (textbook moments of the normal and Maxwell distributions).
#[test]
fn paramagnet_binder_cumulant_and_susceptibility() {
    let (spins, temperature) = (500, 800.0);
    let sigma = (1.0 / (3.0 * spins as f64)).sqrt();
    let mut rng = Rng::new(21);
    let mut s = Samples::with_capacity(1 << 17);
    for _ in 0..1 << 17 {
        s.push([sigma * rng.normal(), sigma * rng.normal(), sigma * rng.normal()], -1.0);
    }
    let a = s.averages(spins, temperature).unwrap();
    assert!(a.binder_err > 0.0 && a.binder_err < 0.01, "{}", a.binder_err);
    assert!((a.binder - 4.0 / 9.0).abs() < 4.0 * a.binder_err, "{} +- {}", a.binder, a.binder_err);
    let chi = (3.0 - 8.0 / PI) / (3.0 * K_B * temperature);
    assert!((a.susceptibility - chi).abs() < 4.0 * a.susceptibility_err, "{} vs {chi}", a.susceptibility);
    assert!(a.susceptibility_err < 0.02 * chi);
    // Uncorrelated samples: errors of the means are sigma / sqrt(n), tau = 1/2.
    let naive = sigma / ((1 << 17) as f64).sqrt();
    for k in 0..3 {
        assert!((a.magnetization_err[k] / naive - 1.0).abs() < 0.1, "{:?}", a.magnetization_err);
        assert!(a.magnetization[k].abs() < 5.0 * naive);
    }
    assert!((a.autocorrelation_time - 0.5).abs() < 0.05, "{}", a.autocorrelation_time);
    assert!(a.converged);
    assert_eq!(a.samples, 1 << 17);
}

/// Constant `|m|` (an ordered state with a wandering direction): `U4 = 1 - 1/3 = 2/3` and
/// no fluctuation of `|m|`, so `chi = 0` (definitions).
#[test]
fn constant_modulus_gives_two_thirds() {
    let mut rng = Rng::new(4);
    let mut s = Samples::new();
    for _ in 0..1000 {
        let d = rng.direction();
        s.push([0.7 * d[0], 0.7 * d[1], 0.7 * d[2]], -3.0 + 0.01 * rng.normal());
    }
    let a = s.averages(1000, 100.0).unwrap();
    assert!((a.binder - 2.0 / 3.0).abs() < 1e-12, "{}", a.binder);
    assert!(a.binder_err < 1e-12);
    assert!(a.susceptibility.abs() < 1e-20 && a.susceptibility_err < 1e-20, "{}", a.susceptibility);
    assert!((a.m_abs - 0.7).abs() < 1e-14);
}

/// A known variance: `|m|` normal with deviation `s` gives `chi = N s^2 / (kB T)`, and the
/// error of a sample variance of `n` normal values is `s^2 sqrt(2 / (n - 1))` (textbook
/// sampling distribution of the variance); the jackknife must find it within 15%.
#[test]
fn susceptibility_of_a_known_variance() {
    let (spins, temperature, s_dev, n) = (4096, 250.0, 0.01, 20000);
    let mut rng = Rng::new(8);
    let mut s = Samples::new();
    for _ in 0..n {
        s.push([0.5 + s_dev * rng.normal(), 0.0, 0.0], -2.0);
    }
    let a = s.averages(spins, temperature).unwrap();
    let chi = spins as f64 * s_dev * s_dev / (K_B * temperature);
    let chi_err = chi * (2.0 / (n - 1) as f64).sqrt();
    assert!((a.susceptibility - chi).abs() < 4.0 * chi_err, "{} vs {chi}", a.susceptibility);
    assert!((a.susceptibility_err / chi_err - 1.0).abs() < 0.15, "{} vs {chi_err}", a.susceptibility_err);
    assert!((a.m_abs_err / (s_dev / (n as f64).sqrt()) - 1.0).abs() < 0.1);
    // No energy fluctuation, no heat capacity.
    assert_eq!(a.heat_capacity, 0.0);
}

/// Heat capacity of classical moments in a field (the Langevin paramagnet, textbook):
/// with `x = mu muB B / (kB T)`, `cos theta` has density `~ exp(x cos theta)`, the energy
/// per spin is `-mu muB B L(x)`, `L(x) = coth x - 1/x`, and `C / kB = 1 - x^2 / sinh^2 x`
/// per spin. Samples of `N` independent spins averaged per sample must give the same
/// per-spin heat capacity for every `N` (the normalisation `N var(e) / (kB T)^2`).
#[test]
fn langevin_paramagnet_heat_capacity() {
    let (mu, b, temperature) = (2.0, 5.0, 10.0);
    let zeeman = mu * MU_B * b;
    let x = zeeman / (K_B * temperature);
    let exact_c = 1.0 - x * x / x.sinh().powi(2);
    let exact_e = -zeeman * (1.0 / x.tanh() - 1.0 / x);
    for (spins, seed) in [(1usize, 31), (4, 32)] {
        let mut rng = Rng::new(seed);
        let mut s = Samples::new();
        for _ in 0..1 << 17 {
            let mut e = 0.0;
            for _ in 0..spins {
                // Inverse of the cumulative distribution of cos theta.
                let u = rng.uniform();
                let c = 1.0 + (u + (1.0 - u) * (-2.0 * x).exp()).ln() / x;
                e -= zeeman * c;
            }
            s.push([0.0, 0.0, 1.0], e / spins as f64);
        }
        let a = s.averages(spins, temperature).unwrap();
        assert!(a.heat_capacity_err < 0.02 * exact_c);
        assert!(
            (a.heat_capacity - exact_c).abs() < 4.0 * a.heat_capacity_err,
            "N {spins}: {} +- {} vs {exact_c}",
            a.heat_capacity,
            a.heat_capacity_err
        );
        assert!((a.energy - exact_e).abs() < 4.0 * a.energy_err, "N {spins}: {} vs {exact_e}", a.energy);
    }
}

/// Correlated samples: an AR(1) energy series with `phi = 0.8` (tau = 4.5) has a mean
/// energy error `sigma sqrt((1 + phi) / ((1 - phi) n))` (Sokal 1997), which the averages
/// must report within 15%, with jackknife blocks longer than one sample.
#[test]
fn correlated_samples_get_larger_errors() {
    let phi = 0.8;
    let n = 1 << 18;
    let e = ar1(phi, n, 5);
    let mut s = Samples::new();
    for v in &e {
        s.push([0.3, 0.0, 0.0], -2.0 + 0.05 * v);
    }
    let a = s.averages(100, 50.0).unwrap();
    let exact = 0.05 * ((1.0 + phi) / ((1.0 - phi) * n as f64)).sqrt();
    assert!((a.energy_err / exact - 1.0).abs() < 0.15, "{} vs {exact}", a.energy_err);
    assert!(a.block_size > 1);
}

#[test]
fn bad_input_is_an_error_not_a_panic() {
    let mut s = Samples::new();
    s.push([0.0, 0.0, 1.0], -1.0);
    assert!(matches!(s.averages(10, 10.0), Err(ObserveError::TooFew { .. })));
    s.push([0.0, 0.0, 0.9], -1.1);
    assert!(matches!(s.averages(10, 0.0), Err(ObserveError::BadTemperature { .. })));
    assert!(matches!(s.averages(0, 10.0), Err(ObserveError::NoSpins { .. })));
    s.push([f64::NAN, 0.0, 0.9], -1.1);
    assert!(matches!(s.averages(10, 10.0), Err(ObserveError::NonFinite { index: 2, .. })));
    assert!(matches!(blocking(&[1.0]), Err(ObserveError::TooFew { .. })));
    assert!(matches!(
        Samples::from_parts(vec![[0.0; 3]; 2], vec![1.0]),
        Err(ObserveError::LengthMismatch { .. })
    ));
    // Short series: the naive error, flagged as not converged.
    let b = blocking(&[1.0, 2.0, 3.0, 5.0]).unwrap();
    assert!(!b.converged && b.block_size == 1 && MIN_BLOCKS > 4);
}

/// Sequential estimators give the same bits inside pools of 1 and 2 threads
/// (determinism rule).
#[test]
fn averages_do_not_depend_on_threads() {
    let x = ar1(0.6, 1 << 14, 44);
    let mut s = Samples::new();
    for (k, v) in x.iter().enumerate() {
        s.push([0.4 + 0.1 * v, 0.02 * (k as f64).sin(), 0.1], -1.0 + 0.01 * v * v);
    }
    let (a, b) = in_pools(|| s.averages(64, 30.0).unwrap());
    assert_eq!(format!("{a:?}"), format!("{b:?}"));
}
