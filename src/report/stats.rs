//! Per catalog pair: how the chosen pairs' separations and normalized distances
//! compare with what the stated positional errors predict.
//!
//! For circular Gaussian errors of combined per-axis σ, the separation r of a
//! true match follows the Rayleigh law p(r) = (r/σ²)·exp(−r²/2σ²), and the
//! normalized distance d = r/σ has P(d ≤ k) = 1 − exp(−k²/2), i.e. d² ~ χ²₂
//! (FIELD.md §5.2–5.3; standard). Its median is √(2 ln 2) = 1.1774.
//!
//! The combined σ of each pair is recovered from the table as σ = sep_arcsec /
//! norm_dist: exact for circular errors, and for elliptical errors the
//! combined σ along the pair's direction. Pairs at zero separation (d = 0) take
//! the median σ of their catalog pair. The predicted separation distribution
//! of a catalog pair is the mixture of the pairs' own Rayleigh laws; the
//! candidate tolerance (99.73 % by default) truncates it, which these
//! predictions ignore (a 0.27 % effect at the default k = 3.439).

use serde::Serialize;

/// Median of the Rayleigh law in units of σ: √(2 ln 2) (FIELD.md §5.3).
pub const RAYLEIGH_MEDIAN: f64 = 1.177_410_022_515_474_6;

/// P(d ≤ k) for the normalized distance of a true match, 1 − exp(−k²/2).
pub fn rayleigh_cdf(k: f64) -> f64 {
    if k <= 0.0 {
        0.0
    } else {
        1.0 - (-0.5 * k * k).exp()
    }
}

/// A histogram with the counts a law predicts in the same bins.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Histogram {
    /// Bin edges, one more than the bins.
    pub edges: Vec<f64>,
    /// Observed counts per bin (values beyond the last edge go in the last bin).
    pub counts: Vec<u64>,
    /// Predicted counts per bin.
    pub expected: Vec<f64>,
}

/// Median of finite values (`None` when empty).
pub fn median(values: &[f64]) -> Option<f64> {
    let mut v: Vec<f64> = values.iter().copied().filter(|x| x.is_finite()).collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len();
    Some(if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    })
}

/// Robust width 1.4826 · median absolute deviation, the σ of a Gaussian
/// (FIELD.md §5.9, common practice).
pub fn robust_width(values: &[f64]) -> Option<f64> {
    let m = median(values)?;
    let dev: Vec<f64> = values.iter().map(|x| (x - m).abs()).collect();
    median(&dev).map(|d| 1.4826 * d)
}

/// Equal bins from 0 to `top` holding `values` (the last bin takes the overflow).
fn counts(values: &[f64], top: f64, bins: usize) -> (Vec<f64>, Vec<u64>) {
    let width = top / bins as f64;
    let edges: Vec<f64> = (0..=bins).map(|i| i as f64 * width).collect();
    let mut c = vec![0u64; bins];
    for &v in values {
        let i = ((v / width).floor().max(0.0) as usize).min(bins - 1);
        c[i] += 1;
    }
    (edges, c)
}

/// The normalized distances against the χ²₂ law: 0.25-wide bins up to
/// max(4, largest d rounded up).
pub fn norm_dist_histogram(d: &[f64]) -> Histogram {
    let top = d.iter().copied().fold(4.0f64, f64::max).ceil();
    let bins = (top / 0.25).round() as usize;
    let (edges, counts) = counts(d, top, bins);
    let n = d.len() as f64;
    let mut expected: Vec<f64> = edges
        .windows(2)
        .map(|w| n * (rayleigh_cdf(w[1]) - rayleigh_cdf(w[0])))
        .collect();
    if let Some(last) = expected.last_mut() {
        *last += n * (1.0 - rayleigh_cdf(top));
    }
    Histogram {
        edges,
        counts,
        expected,
    }
}

/// The separations against the mixture of each pair's Rayleigh law with its
/// own σ: 20 bins up to the largest separation.
pub fn separation_histogram(sep_arcsec: &[f64], sigma_arcsec: &[f64]) -> Histogram {
    let top = sep_arcsec.iter().copied().fold(0.0f64, f64::max);
    let top = if top > 0.0 { top * 1.0001 } else { 1.0 };
    let bins = 20;
    let (edges, counts) = counts(sep_arcsec, top, bins);
    let mut expected = vec![0.0; bins];
    for &s in sigma_arcsec {
        for (i, w) in edges.windows(2).enumerate() {
            expected[i] += rayleigh_cdf(w[1] / s) - rayleigh_cdf(w[0] / s);
        }
        expected[bins - 1] += 1.0 - rayleigh_cdf(top / s);
    }
    Histogram {
        edges,
        counts,
        expected,
    }
}

/// Kolmogorov–Smirnov distance sup |F_n(d) − (1 − exp(−d²/2))| of the
/// normalized distances from the χ²₂ law (Kolmogorov 1933; standard).
pub fn ks_distance(d: &[f64]) -> Option<f64> {
    if d.is_empty() {
        return None;
    }
    let mut v = d.to_vec();
    v.sort_by(f64::total_cmp);
    let n = v.len() as f64;
    let mut worst = 0.0f64;
    for (i, &x) in v.iter().enumerate() {
        let f = rayleigh_cdf(x);
        worst = worst
            .max((f - i as f64 / n).abs())
            .max(((i + 1) as f64 / n - f).abs());
    }
    Some(worst)
}

/// Combined σ of each pair, sep / d; pairs at d = 0 get the median of the rest.
pub fn pair_sigmas(sep_arcsec: &[f64], norm_dist: &[f64]) -> Vec<f64> {
    let known: Vec<Option<f64>> = sep_arcsec
        .iter()
        .zip(norm_dist)
        .map(|(&s, &d)| (d > 0.0 && s > 0.0).then(|| s / d))
        .collect();
    let fill = median(&known.iter().flatten().copied().collect::<Vec<_>>()).unwrap_or(1.0);
    known.into_iter().map(|k| k.unwrap_or(fill)).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rayleigh_table_values() {
        // FIELD.md §5.3: r_P/σ = 1.177 at 50 %, 3.439 at 99.73 %; k = 1, 2, 3
        // enclose 39.3 %, 86.5 %, 98.9 %.
        assert!((rayleigh_cdf(RAYLEIGH_MEDIAN) - 0.5).abs() < 1e-12);
        assert!((rayleigh_cdf(3.439) - 0.9973).abs() < 5e-5);
        assert!((rayleigh_cdf(1.0) - 0.3935).abs() < 5e-5);
        assert!((rayleigh_cdf(2.0) - 0.8647).abs() < 5e-5);
        assert!((rayleigh_cdf(3.0) - 0.9889).abs() < 5e-5);
    }

    #[test]
    fn median_and_width() {
        assert_eq!(median(&[3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&[4.0, 1.0, 2.0, 3.0]), Some(2.5));
        assert_eq!(median(&[]), None);
        // Deviations from 2: 1, 1, 0, 1, 2 -> MAD 1.
        assert_eq!(robust_width(&[1.0, 3.0, 2.0, 1.0, 4.0]), Some(1.4826));
    }

    #[test]
    fn histograms_hold_every_value_and_the_law_sums_to_n() {
        let d = [0.1, 0.5, 1.2, 1.3, 2.2, 5.5];
        let h = norm_dist_histogram(&d);
        assert_eq!(h.edges.len(), h.counts.len() + 1);
        assert_eq!(*h.edges.last().unwrap(), 6.0);
        assert_eq!(h.counts.iter().sum::<u64>(), 6);
        assert!((h.expected.iter().sum::<f64>() - 6.0).abs() < 1e-9);
        assert_eq!(h.counts[0], 1);
        assert_eq!(h.counts[22], 1); // 5.5 / 0.25 = 22

        let s = separation_histogram(&[0.1, 0.2, 0.4], &[0.1, 0.1, 0.2]);
        assert_eq!(s.counts.iter().sum::<u64>(), 3);
        assert!((s.expected.iter().sum::<f64>() - 3.0).abs() < 1e-9);
    }

    #[test]
    fn ks_distance_of_the_law_quantiles_is_small() {
        // Quantiles of the law itself: d_i = sqrt(-2 ln(1 - (i + 0.5)/n)).
        let n = 1000;
        let d: Vec<f64> = (0..n)
            .map(|i| (-2.0 * (1.0 - (i as f64 + 0.5) / n as f64).ln()).sqrt())
            .collect();
        let ks = ks_distance(&d).unwrap();
        assert!((ks - 0.5 / n as f64).abs() < 1e-9, "{ks}");
        // Twice the errors: d halved, far from the law.
        let half: Vec<f64> = d.iter().map(|x| x * 2.0).collect();
        assert!(ks_distance(&half).unwrap() > 0.3);
    }

    #[test]
    fn sigmas_come_from_sep_over_d() {
        assert_eq!(
            pair_sigmas(&[0.2, 0.0, 0.6], &[2.0, 0.0, 2.0]),
            vec![0.1, 0.2, 0.3]
        );
    }
}
