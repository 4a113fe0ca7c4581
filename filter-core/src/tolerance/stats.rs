//! Sample statistics of the trials: percentiles (Hyndman & Fan definition 7), mean, range.

use super::{Metric, MetricDistribution, PERCENTILES};

/// The `p`-th percentile (0 ≤ p ≤ 100) of `sorted` (ascending, not empty) by linear
/// interpolation between order statistics: h = (n − 1)·p/100, x[⌊h⌋] + (h − ⌊h⌋)·(x[⌊h⌋+1] −
/// x[⌊h⌋]) [2, definition 7].
pub(super) fn percentile(sorted: &[f64], p: f64) -> f64 {
    let n = sorted.len();
    if n == 0 {
        return f64::NAN;
    }
    let h = (n - 1) as f64 * (p / 100.0).clamp(0.0, 1.0);
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(n - 1);
    let t = h - lo as f64;
    sorted[lo] + t * (sorted[hi] - sorted[lo])
}

/// The distribution of `values` (trial order), or `None` when there are none.
pub(super) fn distribution(metric: Metric, values: Vec<f64>) -> Option<MetricDistribution> {
    if values.is_empty() {
        return None;
    }
    // Summed in trial order, so the mean does not depend on the thread count.
    let mean = values.iter().sum::<f64>() / values.len() as f64;
    let mut sorted = values;
    sorted.sort_by(f64::total_cmp);
    Some(MetricDistribution {
        metric,
        name: metric.name().to_string(),
        unit: metric.unit().to_string(),
        count: sorted.len(),
        percentiles: PERCENTILES
            .iter()
            .map(|&p| (p, percentile(&sorted, p)))
            .collect(),
        mean,
        min: sorted[0],
        max: sorted[sorted.len() - 1],
    })
}
