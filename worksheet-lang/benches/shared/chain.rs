//! The ten-definition chain of `tests/bench/cells/chain.hrw`, written by hand on plain `f64`
//! in SI units: the practical limit for a sweep of it.

/// Load current of the chain's nominal case, in A.
pub const ILOAD: f64 = 0.180;

/// `y10` of the chain at one input voltage `vin` (V) and load `iload` (A); the result is a power
/// in W. Each line is the definition of the same name in chain.hrw.
#[inline]
pub fn y10(vin: f64, iload: f64) -> f64 {
    let parallel = |a: f64, b: f64| 1.0 / (1.0 / a + 1.0 / b);
    let y1 = vin - 5.0;
    let y2 = y1 * iload;
    let y3 = y2 + vin * 0.004;
    let y4 = y3 * (6.0 + 0.4 + parallel(22.0, 60.0));
    let y5 = vin * (iload + 0.004);
    let y6 = y5 - y3;
    let y7 = y6 / y5;
    let y8 = vin / (iload + 0.004);
    let y9 = parallel(y8, 470.0);
    y4 * 0.010 + y7 * vin * vin / y9
}

/// Fills `out` with `y10` at `out.len()` evenly spaced input voltages from `from` to `to`, both
/// ends included, as a sweep with `steps` does.
pub fn sweep(from: f64, to: f64, out: &mut [f64]) {
    let last = out.len().saturating_sub(1).max(1) as f64;
    for (k, y) in out.iter_mut().enumerate() {
        let vin = from + (to - from) * (k as f64 / last);
        *y = y10(vin, ILOAD);
    }
}
