//! Adjusting p-values for a family of tests read together (the groups of a run comparison), so
//! that "significant" in any one of them keeps the family-wise error rate at the stated level.
//!
//! Invariants: adjusted p-values come back in the input order, lie in [p, 1], and keep the order
//! of the raw p-values.

/// Holm's step-down adjusted p-values, in the input order: sort ascending, multiply the j-th
/// smallest (1-based) by `m − j + 1`, cap at 1, and carry the running maximum so the order holds.
/// Rejecting every test whose adjusted p is ≤ α is Holm's procedure at level α.
///
/// # References
/// S. Holm, "A simple sequentially rejective multiple test procedure", Scandinavian Journal of
/// Statistics 6(2):65-70, 1979.
#[must_use]
pub fn holm_adjusted(p_values: &[f64]) -> Vec<f64> {
    let m = p_values.len();
    let mut order: Vec<usize> = (0..m).collect();
    order.sort_by(|&i, &j| p_values[i].total_cmp(&p_values[j]).then(i.cmp(&j)));
    let mut adjusted = vec![0.0; m];
    let mut running_max: f64 = 0.0;
    for (rank, &idx) in order.iter().enumerate() {
        let scaled = ((m - rank) as f64 * p_values[idx]).min(1.0);
        running_max = running_max.max(scaled);
        adjusted[idx] = running_max;
    }
    adjusted
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand computation from Holm's definition: sorted 0.01, 0.02, 0.03, 0.5 get ×4, ×3, ×2, ×1
    /// = 0.04, 0.06, 0.06, 0.5 (the running maximum lifts 0.03·2 = 0.06 to itself).
    #[test]
    fn holm_follows_the_step_down_definition() {
        let adj = holm_adjusted(&[0.03, 0.5, 0.01, 0.02]);
        let want = [0.06, 0.5, 0.04, 0.06];
        for (a, w) in adj.iter().zip(want) {
            assert!((a - w).abs() < 1e-15, "{adj:?}");
        }
        assert!(holm_adjusted(&[]).is_empty());
        assert_eq!(holm_adjusted(&[0.7]), vec![0.7]);
        assert_eq!(holm_adjusted(&[0.6, 0.9]), vec![1.0, 1.0]);
    }
}
