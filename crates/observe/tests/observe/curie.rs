//! Curie-temperature estimates from scans: exact parabolas, finite-size-scaling curves and
//! first-order error propagation.

use spindrift_observe::curie::{RESAMPLES, SUSCEPTIBILITY_PEAK};
use spindrift_observe::{binder_crossing, susceptibility_peak, BinderCurve, ObserveError, ScanPoint};

fn scan(ts: &[f64], mut f: impl FnMut(f64) -> (f64, f64)) -> Vec<ScanPoint> {
    ts.iter()
        .map(|&t| {
            let (value, error) = f(t);
            ScanPoint { temperature: t, value, error }
        })
        .collect()
}

fn grid(from: f64, to: f64, step: f64) -> Vec<f64> {
    let n = ((to - from) / step).round() as usize;
    (0..=n).map(|k| from + k as f64 * step).collect()
}

/// A parabola through three points is that parabola (algebra): its vertex is found
/// exactly, in any order of the points; without noise the error is the grid part
/// `h / sqrt(12)` alone.
#[test]
fn exact_parabola_vertex() {
    let ts = grid(100.0, 150.0, 5.0);
    let mut points = scan(&ts, |t| (5.0 - 0.02 * (t - 123.4) * (t - 123.4), 0.0));
    points.reverse();
    let fit = susceptibility_peak(&points, 1).unwrap();
    assert!((fit.value - 123.4).abs() < 1e-9, "{}", fit.value);
    assert!((fit.error - 5.0 / 12f64.sqrt()).abs() < 1e-12, "{}", fit.error);
    assert_eq!(fit.method, SUSCEPTIBILITY_PEAK);
}

/// A Lorentzian peak on a coarse grid: the parabola's vertex lies within its stated error
/// of the true peak (the documented grid error covers the shape error).
#[test]
fn lorentzian_peak_within_its_error() {
    let tc = 412.7;
    for step in [2.0, 5.0, 10.0] {
        let ts = grid(300.0, 500.0, step);
        let points = scan(&ts, |t| (1.0 / ((t - tc).powi(2) + 15.0f64.powi(2)), 0.0));
        let fit = susceptibility_peak(&points, 2).unwrap();
        assert!((fit.value - tc).abs() < fit.error, "step {step}: {} +- {}", fit.value, fit.error);
    }
}

/// The resampling error of the peak is the spread that independent noisy scans really
/// show (frequentist check of the error bar: 1000 scans with 2% noise on a Lorentzian).
#[test]
fn peak_noise_error_matches_the_spread_of_repeated_scans() {
    let tc = 412.7;
    let ts = grid(380.0, 440.0, 4.0);
    let truth = |t: f64| 1.0 / ((t - tc).powi(2) + 12.0f64.powi(2));
    let grid_part = 4.0 / 12f64.sqrt();
    let mut rng = crate::common::Rng::new(3);
    let mut vertices = Vec::new();
    let mut noise_parts = Vec::new();
    for k in 0..1000 {
        let points = scan(&ts, |t| {
            let v = truth(t);
            (v * (1.0 + 0.02 * rng.normal()), 0.02 * v)
        });
        let fit = susceptibility_peak(&points, k).unwrap();
        vertices.push(fit.value);
        noise_parts.push((fit.error * fit.error - grid_part * grid_part).max(0.0).sqrt());
    }
    let mean = vertices.iter().sum::<f64>() / 1000.0;
    let spread = (vertices.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / 999.0).sqrt();
    let typical = noise_parts.iter().sum::<f64>() / 1000.0;
    assert!((typical / spread - 1.0).abs() < 0.15, "resampled {typical} vs observed {spread}");
}

/// Same input and seed, same bits; another seed changes only the resampling part.
#[test]
fn peak_is_reproducible() {
    let ts = grid(10.0, 30.0, 1.0);
    let points = scan(&ts, |t| (1.0 / (1.0 + (t - 21.3f64).powi(2)), 0.01));
    let a = susceptibility_peak(&points, 5).unwrap();
    let b = susceptibility_peak(&points, 5).unwrap();
    let c = susceptibility_peak(&points, 6).unwrap();
    assert_eq!(a, b);
    assert_eq!(a.value, c.value);
    assert_ne!(a.error, c.error);
}

#[test]
fn peak_input_errors() {
    let ts = grid(10.0, 30.0, 5.0);
    let rising = scan(&ts, |t| (t, 0.0));
    assert_eq!(susceptibility_peak(&rising, 0), Err(ObserveError::PeakAtEdge { temperature: 30.0 }));
    assert!(matches!(susceptibility_peak(&rising[..2], 0), Err(ObserveError::TooFew { .. })));
    let mut dup = rising.clone();
    dup[1].temperature = 10.0;
    assert!(matches!(susceptibility_peak(&dup, 0), Err(ObserveError::DuplicateTemperature { .. })));
    let mut nan = rising.clone();
    nan[2].value = f64::NAN;
    assert!(matches!(susceptibility_peak(&nan, 0), Err(ObserveError::NonFinite { index: 2, .. })));
    let mut neg = rising;
    neg[0].error = -1.0;
    assert!(matches!(susceptibility_peak(&neg, 0), Err(ObserveError::NegativeError { .. })));
}

/// Finite-size scaling form `U4(T, L) = f((T - Tc) L^(1/nu))` (K. Binder, Z. Phys. B 43,
/// 119 (1981)) with `f` a tanh from 2/3 (ordered) to 4/9 (paramagnet): all sizes cross at
/// `Tc`. Linear interpolation misses each curve by at most `h^2/8 max|U''|` (textbook
/// interpolation bound), which moves the crossing by at most that sum over the slope of the
/// difference; the tolerance is twice this bound. Without noise there is no error (beyond
/// the rounding of a standard deviation of 1000 equal numbers).
#[test]
fn binder_curves_cross_at_tc() {
    let (tc, nu, width, h) = (452.3, 0.7, 200.0, 5.0);
    let ts = grid(400.0, 500.0, h);
    let k = |l: f64| l.powf(1.0 / nu) / width;
    let curve = |l: f64| BinderCurve {
        size: l,
        points: scan(&ts, |t| {
            let x = (t - tc) * k(l);
            (4.0 / 9.0 + (1.0 / 9.0) * (1.0 - x.tanh()), 0.0)
        }),
    };
    // U'' = (2/9) k^2 sech^2(x) tanh(x), whose largest modulus is (2/9) k^2 2/(3 sqrt 3);
    // the difference of two curves has slope (k_large - k_small)/9 at Tc.
    let bound = |a: f64, b: f64| {
        let curvature = 2.0 / 9.0 * 2.0 / (3.0 * 3f64.sqrt()) * (k(a).powi(2) + k(b).powi(2));
        h * h / 8.0 * curvature / ((k(b) - k(a)) / 9.0)
    };
    let curves = [curve(8.0), curve(16.0), curve(32.0)];
    let r = binder_crossing(&curves, 1).unwrap();
    assert_eq!(r.crossings.len(), 3, "every pair of sizes crosses");
    let mut widest: f64 = 0.0;
    for c in &r.crossings {
        let (a, b) = (curves[c.smaller].size, curves[c.larger].size);
        assert!(a < b);
        let tol = 2.0 * bound(a, b);
        widest = widest.max(tol);
        assert!((c.temperature - tc).abs() < tol, "{c:?}, tolerance {tol}");
        assert!(c.error < 1e-9, "{c:?}");
    }
    assert!((r.estimate.value - tc).abs() < widest);
    assert!(r.estimate.error < 1e-9);
    assert_eq!(r.estimate.method, "binder-crossing");
}

/// Two straight curves crossing halfway between grid points, with independent errors
/// `sigma` on every point: first-order error propagation (textbook) of
/// `T* = T0 + d0 h / (d0 - d1)` gives `sigma_T = sigma / (s_large - s_small)`, the slopes
/// being those of the two curves. The resampled error must agree within 15%.
#[test]
fn binder_crossing_error_matches_error_propagation() {
    let tc = 202.5;
    let ts = grid(180.0, 220.0, 5.0);
    let (s_small, s_large, sigma) = (0.002, 0.006, 0.001);
    let line =
        |size: f64, slope: f64| BinderCurve { size, points: scan(&ts, |t| (0.55 - slope * (t - tc), sigma)) };
    let r = binder_crossing(&[line(10.0, s_small), line(20.0, s_large)], 7).unwrap();
    let expect = sigma / (s_large - s_small);
    assert!((r.estimate.value - tc).abs() < 1e-9);
    assert!(
        (r.estimate.error / expect - 1.0).abs() < 0.15,
        "{} vs {expect} ({RESAMPLES} draws)",
        r.estimate.error
    );
    assert_eq!(r.crossings[0].error, r.estimate.error);
}

/// Curves on different grids are compared on their common range; curves crossing the
/// wrong way round (smaller system above below the crossing) are not a Curie point.
#[test]
fn binder_grids_orientation_and_errors() {
    let tc = 51.0;
    let small =
        BinderCurve { size: 8.0, points: scan(&grid(40.0, 60.0, 2.0), |t| (0.55 - 0.004 * (t - tc), 0.0)) };
    let large =
        BinderCurve { size: 16.0, points: scan(&grid(45.0, 70.0, 3.0), |t| (0.55 - 0.010 * (t - tc), 0.0)) };
    let r = binder_crossing(&[small.clone(), large.clone()], 0).unwrap();
    assert!((r.estimate.value - tc).abs() < 1e-9, "{}", r.estimate.value);
    let swapped = [BinderCurve { size: 16.0, ..small.clone() }, BinderCurve { size: 8.0, ..large }];
    assert_eq!(binder_crossing(&swapped, 0), Err(ObserveError::NoCrossing));
    assert_eq!(binder_crossing(&[small.clone(), small], 0), Err(ObserveError::TooFewSizes { sizes: 1 }));
}
