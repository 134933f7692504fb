//! Statistics for two outcomes on the same pairs (two models on one spec, a real edit and its
//! placebo): McNemar's test and Newcombe's interval for the difference of paired proportions.
//!
//! Cells follow the usual 2×2 layout: `a` both yes, `b` first yes and second no, `c` first no and
//! second yes, `d` both no. The difference is first minus second, `(b − c) / n`.

use serde::{Deserialize, Serialize};
use statrs::distribution::{Binomial, ChiSquared, ContinuousCDF, DiscreteCDF};

use super::wilson_interval;

/// Counts of a paired 2×2 table.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct PairedCounts {
    /// Yes under both.
    pub a: u64,
    /// Yes under the first only.
    pub b: u64,
    /// Yes under the second only.
    pub c: u64,
    /// Yes under neither.
    pub d: u64,
}

impl PairedCounts {
    pub fn n(&self) -> u64 {
        self.a + self.b + self.c + self.d
    }

    /// Adds one pair's outcomes.
    pub fn add(&mut self, first: bool, second: bool) {
        match (first, second) {
            (true, true) => self.a += 1,
            (true, false) => self.b += 1,
            (false, true) => self.c += 1,
            (false, false) => self.d += 1,
        }
    }
}

/// McNemar's test of equal marginal proportions, three ways.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct McNemar {
    /// Discordant pairs `b` and `c`.
    pub b: u64,
    pub c: u64,
    /// `(b − c)² / (b + c)`; `None` when there are no discordant pairs.
    pub chi2: Option<f64>,
    /// Upper tail of χ² with 1 degree of freedom; 1 without discordant pairs.
    pub p_chi2: f64,
    /// With Edwards' continuity correction, `(|b − c| − 1)² / (b + c)`.
    pub chi2_corrected: Option<f64>,
    pub p_chi2_corrected: f64,
    /// Exact two-sided binomial p: `min(1, 2·P(X ≤ min(b, c)))`, `X ~ Bin(b + c, 1/2)`.
    pub p_exact: f64,
}

/// McNemar's test from the discordant counts (McNemar 1947; exact form as in Agresti,
/// *Categorical Data Analysis*, section on matched pairs).
pub fn mcnemar(b: u64, c: u64) -> McNemar {
    let m = b + c;
    if m == 0 {
        return McNemar {
            b,
            c,
            chi2: None,
            p_chi2: 1.0,
            chi2_corrected: None,
            p_chi2_corrected: 1.0,
            p_exact: 1.0,
        };
    }
    let chi_sq = ChiSquared::new(1.0).expect("1 degree of freedom is valid");
    let diff = b.abs_diff(c) as f64;
    let chi2 = diff * diff / m as f64;
    let corrected = (diff - 1.0).max(0.0).powi(2) / m as f64;
    let binomial = Binomial::new(0.5, m).expect("p = 1/2 and n > 0 are valid");
    McNemar {
        b,
        c,
        chi2: Some(chi2),
        p_chi2: chi_sq.sf(chi2),
        chi2_corrected: Some(corrected),
        p_chi2_corrected: chi_sq.sf(corrected),
        p_exact: (2.0 * binomial.cdf(b.min(c))).min(1.0),
    }
}

/// A difference of two proportions with its interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Difference {
    /// First minus second.
    pub value: f64,
    pub low: f64,
    pub high: f64,
    pub confidence: f64,
}

impl Difference {
    /// `"+12.0 points [5.6, 32.9]"`.
    pub fn describe(&self) -> String {
        format!(
            "{:+.1} points [{:.1}, {:.1}]",
            100.0 * self.value,
            100.0 * self.low,
            100.0 * self.high
        )
    }
}

/// Interval for the difference of paired proportions `(a + b)/n − (a + c)/n`, built from the two
/// Wilson score intervals and the correlation φ of the table (Newcombe R.G. 1998, "Improved
/// confidence intervals for the difference between binomial proportions based on paired data",
/// Statistics in Medicine 17:2635-2650, method 10). `None` when `n` is 0.
pub fn newcombe_paired_difference(t: PairedCounts, confidence: f64) -> Option<Difference> {
    let n = t.n();
    if n == 0 {
        return None;
    }
    let n_f = n as f64;
    let (first, second) = (t.a + t.b, t.a + t.c);
    let p1 = first as f64 / n_f;
    let p2 = second as f64 / n_f;
    let (l1, u1) = wilson_interval(first, n, confidence)?;
    let (l2, u2) = wilson_interval(second, n, confidence)?;
    let margins = [t.a + t.b, t.c + t.d, t.a + t.c, t.b + t.d];
    // Newcombe's φ: ad − bc shrunk by n/2 towards 0 when positive, 0 in between, kept when
    // negative. The same rule is in R's biostatUZH `confIntPairedProportion` (citing Altman et
    // al., "Statistics with Confidence", 2000, p. 52); without it the worked example in the test
    // gives 0.0618-0.3242 instead of Newcombe's 0.0562-0.3292.
    let phi = if margins.contains(&0) {
        0.0
    } else {
        let product: f64 = margins.iter().map(|&m| m as f64).product();
        let cross = t.a as f64 * t.d as f64 - t.b as f64 * t.c as f64;
        let shrunk = if cross > n_f / 2.0 {
            cross - n_f / 2.0
        } else if cross < 0.0 {
            cross
        } else {
            0.0
        };
        shrunk / product.sqrt()
    };
    let d = p1 - p2;
    let below = ((p1 - l1).powi(2) - 2.0 * phi * (p1 - l1) * (u2 - p2) + (u2 - p2).powi(2))
        .max(0.0)
        .sqrt();
    let above = ((u1 - p1).powi(2) - 2.0 * phi * (u1 - p1) * (p2 - l2) + (p2 - l2).powi(2))
        .max(0.0)
        .sqrt();
    Some(Difference {
        value: d,
        low: (d - below).max(-1.0),
        high: (d + above).min(1.0),
        confidence,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Agresti, *Categorical Data Analysis* (presidential approval ratings, table [[794, 150],
    /// [86, 570]]; also the example of R's `mcnemar.test`): values from shared/REFERENCES.md.
    #[test]
    fn mcnemar_matches_agresti_presidential_approval() {
        let t = mcnemar(150, 86);
        assert!((t.chi2.unwrap() - 17.3559).abs() < 5e-5, "{t:?}");
        assert!((t.p_chi2 - 3.0993e-05).abs() < 5e-9, "{t:?}");
        assert!((t.chi2_corrected.unwrap() - 16.8178).abs() < 5e-5, "{t:?}");
        assert!((t.p_chi2_corrected - 4.1146e-05).abs() < 5e-9, "{t:?}");
        assert!((t.p_exact - 3.7159e-05).abs() < 5e-9, "{t:?}");
        // Symmetric in b and c.
        assert_eq!(mcnemar(86, 150).p_exact, t.p_exact);
    }

    #[test]
    fn mcnemar_without_discordant_pairs_finds_nothing() {
        let t = mcnemar(0, 0);
        assert_eq!((t.chi2, t.p_chi2, t.p_exact), (None, 1.0, 1.0));
        // One discordant pair: exact p = 2 · 1/2 capped at 1 (hand computation).
        assert!((mcnemar(1, 0).p_exact - 1.0).abs() < 1e-12);
    }

    /// Newcombe (1998), Statistics in Medicine 17:2635-2650, method 10, worked example with cells
    /// (a, b, c, d) = (20, 12, 2, 16): D = 0.2, 95% interval 0.0562 to 0.3292 (shared/REFERENCES.md).
    #[test]
    fn newcombe_method_10_matches_the_paired_example() {
        let counts = PairedCounts {
            a: 20,
            b: 12,
            c: 2,
            d: 16,
        };
        let d = newcombe_paired_difference(counts, 0.95).unwrap();
        assert!((d.value - 0.2).abs() < 1e-12);
        assert!((d.low - 0.0562).abs() < 5e-5, "{d:?}");
        assert!((d.high - 0.3292).abs() < 5e-5, "{d:?}");
    }

    #[test]
    fn newcombe_interval_contains_the_difference_and_flips_with_the_order() {
        let t = PairedCounts {
            a: 5,
            b: 0,
            c: 7,
            d: 1,
        };
        let d = newcombe_paired_difference(t, 0.95).unwrap();
        assert!(d.low <= d.value && d.value <= d.high);
        let swapped = PairedCounts {
            b: t.c,
            c: t.b,
            ..t
        };
        let e = newcombe_paired_difference(swapped, 0.95).unwrap();
        assert!((d.low + e.high).abs() < 1e-12 && (d.high + e.low).abs() < 1e-12);
        assert_eq!(
            newcombe_paired_difference(
                PairedCounts {
                    a: 0,
                    b: 0,
                    c: 0,
                    d: 0
                },
                0.95
            ),
            None
        );
    }
}
