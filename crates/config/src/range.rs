//! `from`, `to`, `step` ranges, shared by a temperature scan's `from`/`to`/`step` and
//! `spindrift sweep --vary KEY=from:to:step`.

/// The values from `from` to `to` (either way) in steps of `step` (positive and finite),
/// `to` included when it lies within 1e-9 of a step of the last value; `Err(count)` when
/// there would be `max` values or more (the count is kept in `f64`, since one that `usize`
/// cannot hold saturates there, and the `+ 1` would then wrap).
pub fn range_values(from: f64, to: f64, step: f64, max: usize) -> Result<Vec<f64>, f64> {
    let steps = ((to - from).abs() / step + 1e-9).floor();
    // A NaN count (a NaN end) is refused too.
    if steps.is_nan() || steps + 1.0 > max as f64 {
        return Err(steps + 1.0);
    }
    let sign = if to >= from { 1.0 } else { -1.0 };
    Ok((0..=steps as usize).map(|i| from + sign * step * i as f64).collect())
}

#[cfg(test)]
mod tests {
    use super::range_values;

    /// Our own behaviour: both directions, the end included, counts beyond `max` refused.
    #[test]
    fn ranges_count_their_values() {
        assert_eq!(range_values(10.0, 30.0, 10.0, 100), Ok(vec![10.0, 20.0, 30.0]));
        assert_eq!(range_values(1.0, 0.0, 1.0, 100), Ok(vec![1.0, 0.0]));
        assert_eq!(range_values(0.0, 1e300, 1.0, 100), Err(1e300 + 1.0));
        assert!(range_values(f64::NAN, 1.0, 1.0, 100).is_err());
    }
}
