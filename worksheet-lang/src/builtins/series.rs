//! IEC 60063 preferred-number series (E3 to E192) and picking preferred values from them.
//!
//! The tables are written out as IEC 60063 prints them, not computed: the rounding formula
//! round(10^(i/n)) reproduces neither E3–E24 nor every value of E192.
//! - E3, E6, E12 and E24 (two significant digits) keep the values in use before the series
//!   were standardised. Against round(10^(i/24), 2 digits) eight E24 values differ:
//!   2.7 (formula 2.6), 3.0 (2.9), 3.3 (3.2), 3.6 (3.5), 3.9 (3.8), 4.3 (4.2), 4.7 (4.6) and
//!   8.2 (8.3). E12, E6 and E3 are every second, fourth and eighth E24 value, so they inherit
//!   2.7, 3.3, 3.9, 4.7 and 8.2.
//! - E48, E96 and E192 (three significant digits) follow round(10^(i/n), 3 digits) except one
//!   value: E192 prints 9.20 where the formula gives 9.19 (10^(185/192) = 9.1948…). E48 and E96
//!   are every fourth and second E192 value and do not contain that position.
//!
//! The tables were written from memory of the standard and cross-checked against the formula
//! with the one known exception (see the tests in `tests/library.rs`).

use std::cmp::Ordering;

#[derive(Debug, PartialEq)]
pub struct Series {
    pub name: &'static str,
    /// Values of one decade, from 1.0 up to (not including) 10, as printed in IEC 60063.
    pub values: &'static [f64],
    /// The tolerance usually associated with the series (E24: 5 %), as a fraction.
    pub tolerance: f64,
}

/// How `Series::pick` rounds a value that is not itself a preferred value.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Rounding {
    /// The preferred value closest by ratio (geometrically); a tie goes up.
    Nearest,
    /// The smallest preferred value at or above.
    Up,
    /// The largest preferred value at or below.
    Down,
}

impl Rounding {
    pub fn from_name(name: &str) -> Option<Rounding> {
        match name {
            "nearest" => Some(Rounding::Nearest),
            "up" => Some(Rounding::Up),
            "down" => Some(Rounding::Down),
            _ => None,
        }
    }
}

/// Relative slack when comparing a value with a preferred value, so that a value entered
/// as exactly 4.7 kΩ (which may come out as 4700.000000000001 after unit scaling) counts as
/// 4.7 kΩ. Far below any component tolerance.
const SLACK: f64 = 1e-9;

impl Series {
    /// The printed values as exact integers in hundredths (4.7 → 470, 9.20 → 920).
    fn mantissas(&self) -> impl DoubleEndedIterator<Item = u32> + '_ {
        self.values.iter().map(|v| (v * 100.0).round() as u32)
    }

    /// The preferred values of the decade starting at 10^k, ascending. Computed from the
    /// integer mantissa with one correctly rounded operation, so 4.7 kΩ is exactly 4700.0
    /// and 0.47 Ω is the double nearest to 0.47.
    fn decade(&self, k: i32) -> impl DoubleEndedIterator<Item = f64> + '_ {
        self.mantissas().map(move |m| scaled(m, k - 2))
    }

    /// Every preferred value in `lo ..= hi` (both positive), ascending.
    pub fn between(&self, lo: f64, hi: f64) -> Vec<f64> {
        if !(lo > 0.0 && hi >= lo && hi.is_finite()) {
            return Vec::new();
        }
        let k0 = lo.log10().floor() as i32 - 1;
        let k1 = hi.log10().floor() as i32 + 1;
        (k0..=k1)
            .flat_map(|k| self.decade(k).collect::<Vec<_>>())
            .filter(|&c| c >= lo * (1.0 - SLACK) && c <= hi * (1.0 + SLACK))
            .collect()
    }

    /// The preferred value for `x` (positive, finite) by `rounding`; None for other `x`.
    pub fn pick(&self, x: f64, rounding: Rounding) -> Option<f64> {
        if !(x > 0.0 && x.is_finite()) {
            return None;
        }
        let k = x.log10().floor() as i32;
        // x lies in [10^k, 10^(k+1)), or just across a boundary where log10 rounds there: the
        // decade below holds the neighbour under 10^k, the decade above 10^(k+1) itself, so
        // the three cover every rounding. Ascending, computed as they are looked at.
        let mut candidates = (k - 1..=k + 1).flat_map(move |k| self.decade(k));
        match rounding {
            Rounding::Up => candidates.find(|&c| c >= x * (1.0 - SLACK)),
            Rounding::Down => candidates.rev().find(|&c| c <= x * (1.0 + SLACK)),
            Rounding::Nearest => candidates.min_by(|&a, &b| {
                let da = (a / x).ln().abs();
                let db = (b / x).ln().abs();
                if (da - db).abs() <= 1e-12 {
                    // A tie goes to the larger value.
                    b.partial_cmp(&a).unwrap_or(Ordering::Equal)
                } else {
                    da.partial_cmp(&db).unwrap_or(Ordering::Equal)
                }
            }),
        }
    }
}

/// m · 10^e with a single rounding.
fn scaled(m: u32, e: i32) -> f64 {
    let m = f64::from(m);
    if e >= 0 {
        m * 10f64.powi(e)
    } else {
        m / 10f64.powi(-e)
    }
}

pub static ALL: &[Series] = &[
    // IEC 60063 associates E3 with tolerances "above 20 %"; ±40 %, the series' step, is the
    // figure usually quoted (common practice, no source).
    Series {
        name: "E3",
        values: &[1.0, 2.2, 4.7],
        tolerance: 0.40,
    },
    Series {
        name: "E6",
        values: &[1.0, 1.5, 2.2, 3.3, 4.7, 6.8],
        tolerance: 0.20,
    },
    Series {
        name: "E12",
        values: &[1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2],
        tolerance: 0.10,
    },
    Series {
        name: "E24",
        values: &[
            1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7,
            5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1,
        ],
        tolerance: 0.05,
    },
    Series {
        name: "E48",
        values: &[
            1.00, 1.05, 1.10, 1.15, 1.21, 1.27, 1.33, 1.40, 1.47, 1.54, 1.62, 1.69, 1.78, 1.87,
            1.96, 2.05, 2.15, 2.26, 2.37, 2.49, 2.61, 2.74, 2.87, 3.01, 3.16, 3.32, 3.48, 3.65,
            3.83, 4.02, 4.22, 4.42, 4.64, 4.87, 5.11, 5.36, 5.62, 5.90, 6.19, 6.49, 6.81, 7.15,
            7.50, 7.87, 8.25, 8.66, 9.09, 9.53,
        ],
        tolerance: 0.02,
    },
    Series {
        name: "E96",
        values: &[
            1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30, 1.33, 1.37,
            1.40, 1.43, 1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74, 1.78, 1.82, 1.87, 1.91,
            1.96, 2.00, 2.05, 2.10, 2.15, 2.21, 2.26, 2.32, 2.37, 2.43, 2.49, 2.55, 2.61, 2.67,
            2.74, 2.80, 2.87, 2.94, 3.01, 3.09, 3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74,
            3.83, 3.92, 4.02, 4.12, 4.22, 4.32, 4.42, 4.53, 4.64, 4.75, 4.87, 4.99, 5.11, 5.23,
            5.36, 5.49, 5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65, 6.81, 6.98, 7.15, 7.32,
            7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76,
        ],
        tolerance: 0.01,
    },
    // E192 is also made in 0.25 % and 0.1 %; 0.5 % is its own step.
    Series {
        name: "E192",
        values: &[
            1.00, 1.01, 1.02, 1.04, 1.05, 1.06, 1.07, 1.09, 1.10, 1.11, 1.13, 1.14, 1.15, 1.17,
            1.18, 1.20, 1.21, 1.23, 1.24, 1.26, 1.27, 1.29, 1.30, 1.32, 1.33, 1.35, 1.37, 1.38,
            1.40, 1.42, 1.43, 1.45, 1.47, 1.49, 1.50, 1.52, 1.54, 1.56, 1.58, 1.60, 1.62, 1.64,
            1.65, 1.67, 1.69, 1.72, 1.74, 1.76, 1.78, 1.80, 1.82, 1.84, 1.87, 1.89, 1.91, 1.93,
            1.96, 1.98, 2.00, 2.03, 2.05, 2.08, 2.10, 2.13, 2.15, 2.18, 2.21, 2.23, 2.26, 2.29,
            2.32, 2.34, 2.37, 2.40, 2.43, 2.46, 2.49, 2.52, 2.55, 2.58, 2.61, 2.64, 2.67, 2.71,
            2.74, 2.77, 2.80, 2.84, 2.87, 2.91, 2.94, 2.98, 3.01, 3.05, 3.09, 3.12, 3.16, 3.20,
            3.24, 3.28, 3.32, 3.36, 3.40, 3.44, 3.48, 3.52, 3.57, 3.61, 3.65, 3.70, 3.74, 3.79,
            3.83, 3.88, 3.92, 3.97, 4.02, 4.07, 4.12, 4.17, 4.22, 4.27, 4.32, 4.37, 4.42, 4.48,
            4.53, 4.59, 4.64, 4.70, 4.75, 4.81, 4.87, 4.93, 4.99, 5.05, 5.11, 5.17, 5.23, 5.30,
            5.36, 5.42, 5.49, 5.56, 5.62, 5.69, 5.76, 5.83, 5.90, 5.97, 6.04, 6.12, 6.19, 6.26,
            6.34, 6.42, 6.49, 6.57, 6.65, 6.73, 6.81, 6.90, 6.98, 7.06, 7.15, 7.23, 7.32, 7.41,
            7.50, 7.59, 7.68, 7.77, 7.87, 7.96, 8.06, 8.16, 8.25, 8.35, 8.45, 8.56, 8.66, 8.76,
            8.87, 8.98, 9.09, 9.20, 9.31, 9.42, 9.53, 9.65, 9.76, 9.88,
        ],
        tolerance: 0.005,
    },
];

pub fn by_name(name: &str) -> Option<&'static Series> {
    ALL.iter().find(|s| s.name == name)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// What `pick` must return, by brute force: every preferred value of eleven decades
    /// around `x`, searched in full.
    fn pick_by_scan(s: &Series, x: f64, rounding: Rounding) -> Option<f64> {
        let k = x.log10().floor() as i32;
        let all: Vec<f64> = (k - 5..=k + 5).flat_map(|k| s.decade(k)).collect();
        match rounding {
            Rounding::Up => all.iter().copied().find(|&c| c >= x * (1.0 - SLACK)),
            Rounding::Down => all.iter().copied().rev().find(|&c| c <= x * (1.0 + SLACK)),
            Rounding::Nearest => {
                let mut best: Option<f64> = None;
                for &c in &all {
                    let dc = (c / x).ln().abs();
                    best = match best {
                        Some(b) => {
                            let db = (b / x).ln().abs();
                            if (dc - db).abs() <= 1e-12 {
                                Some(b.max(c))
                            } else if dc < db {
                                Some(c)
                            } else {
                                Some(b)
                            }
                        }
                        None => Some(c),
                    };
                }
                best
            }
        }
    }

    #[test]
    fn decade_boundaries_pick_as_a_full_scan() {
        // Powers of ten, and the doubles either side of them, where log10 may round across.
        for s in ALL {
            for e in -12..=12 {
                let p = 10f64.powi(e);
                for x in [
                    p,
                    p.next_up(),
                    p.next_down(),
                    p * (1.0 + 1e-12),
                    p * (1.0 - 1e-12),
                ] {
                    for r in [Rounding::Up, Rounding::Down, Rounding::Nearest] {
                        assert_eq!(s.pick(x, r), pick_by_scan(s, x, r), "{} {x} {r:?}", s.name);
                    }
                }
            }
        }
    }

    proptest! {
        #[test]
        fn any_value_picks_as_a_full_scan(
            series in 0..ALL.len(),
            mantissa in 1.0f64..10.0,
            e in -15i32..=15,
            r in 0..3usize,
        ) {
            let s = &ALL[series];
            let x = mantissa * 10f64.powi(e);
            let r = [Rounding::Up, Rounding::Down, Rounding::Nearest][r];
            prop_assert_eq!(s.pick(x, r), pick_by_scan(s, x, r));
        }
    }
}
