//! Interval estimates for rates, and tests for paired outcomes ([`paired`]). Pure arithmetic,
//! no I/O.

pub mod paired;

use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, Normal};

/// A proportion `successes / n` with its two-sided Wilson score interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Rate {
    pub count: u64,
    pub n: u64,
    /// `count / n`; `None` when `n` is 0.
    pub value: Option<f64>,
    /// Interval bounds at `confidence`; `None` when `n` is 0.
    pub low: Option<f64>,
    pub high: Option<f64>,
    pub confidence: f64,
}

impl Rate {
    pub fn new(count: u64, n: u64, confidence: f64) -> Rate {
        let (value, low, high) = match wilson_interval(count, n, confidence) {
            Some((lo, hi)) => (Some(count as f64 / n as f64), Some(lo), Some(hi)),
            None => (None, None, None),
        };
        Rate {
            count,
            n,
            value,
            low,
            high,
            confidence,
        }
    }

    /// `"25.0% [14.1, 40.2] (10/40)"`, or `"n/a (0/0)"`.
    pub fn describe(&self) -> String {
        match (self.value, self.low, self.high) {
            (Some(v), Some(lo), Some(hi)) => format!(
                "{:.1}% [{:.1}, {:.1}] ({}/{})",
                100.0 * v,
                100.0 * lo,
                100.0 * hi,
                self.count,
                self.n
            ),
            _ => format!("n/a ({}/{})", self.count, self.n),
        }
    }
}

/// Two-sided standard normal quantile for a confidence level, e.g. 1.959964 for 0.95.
pub fn normal_quantile(confidence: f64) -> f64 {
    let normal = Normal::new(0.0, 1.0).expect("standard normal parameters are valid");
    normal.inverse_cdf(1.0 - (1.0 - confidence) / 2.0)
}

/// Wilson score interval for `successes` of `n` (Wilson 1927; Newcombe 1998, method 3).
/// `None` when `n` is 0.
pub fn wilson_interval(successes: u64, n: u64, confidence: f64) -> Option<(f64, f64)> {
    if n == 0 {
        return None;
    }
    let z = normal_quantile(confidence);
    let n_f = n as f64;
    let p = successes as f64 / n_f;
    let z2 = z * z;
    let centre = p + z2 / (2.0 * n_f);
    let half = z * (p * (1.0 - p) / n_f + z2 / (4.0 * n_f * n_f)).sqrt();
    let denom = 1.0 + z2 / n_f;
    // At 0 and n the bound is exactly 0 or 1; rounding would leave ±1e-17 that sorts at random.
    let low = if successes == 0 {
        0.0
    } else {
        ((centre - half) / denom).max(0.0)
    };
    let high = if successes == n {
        1.0
    } else {
        ((centre + half) / denom).min(1.0)
    };
    Some((low, high))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Newcombe R.G. (1998), "Two-sided confidence intervals for the single proportion: comparison
    /// of seven methods", Statistics in Medicine 17:857-872, Table I, Wilson score rows (95%).
    #[test]
    fn wilson_matches_newcombe_1998_table_1() {
        let rows = [
            (81, 263, 0.2553, 0.3662),
            (15, 148, 0.0624, 0.1605),
            (0, 20, 0.0, 0.1611),
            (1, 29, 0.0061, 0.1718),
        ];
        for (r, n, lo, hi) in rows {
            let (l, h) = wilson_interval(r, n, 0.95).unwrap();
            assert!(
                (l - lo).abs() < 5e-5 && (h - hi).abs() < 5e-5,
                "{r}/{n}: got {l:.4}-{h:.4}, want {lo}-{hi}"
            );
        }
    }

    #[test]
    fn empty_sample_has_no_interval() {
        assert_eq!(wilson_interval(0, 0, 0.95), None);
        assert_eq!(Rate::new(0, 0, 0.95).describe(), "n/a (0/0)");
    }
}
