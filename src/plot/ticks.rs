//! Tick positions and labels for linear and logarithmic axes.
//!
//! Linear axes get "nice" steps of 1, 2 or 5 × 10^k (the usual choice since
//! Heckbert 1990, "Nice numbers for graph labels", Graphics Gems (from memory));
//! log axes get one labelled tick per decade, with 2 and 5 added when the axis
//! spans fewer than three decades, and linear ticks when it spans less than one.

/// One tick: its value in data units and its label text.
#[derive(Debug, Clone, PartialEq)]
pub struct Tick {
    /// Position in data units.
    pub value: f64,
    /// Label shown beside the tick; for decades of a log axis this is the
    /// exponent form, e.g. `10^-12` is rendered from [`Tick::exponent`].
    pub label: String,
    /// For a decade tick of a log axis: the power of ten, drawn as a superscript.
    pub exponent: Option<i32>,
}

/// The nice step (1, 2 or 5 × 10^k) closest to `span / target` from above.
pub fn nice_step(span: f64, target: usize) -> f64 {
    let raw = span.abs() / target.max(1) as f64;
    if raw.is_nan() || raw <= 0.0 || !raw.is_finite() {
        return 1.0;
    }
    let power = 10f64.powf(raw.log10().floor());
    let frac = raw / power;
    let nice = if frac <= 1.0 {
        1.0
    } else if frac <= 2.0 {
        2.0
    } else if frac <= 5.0 {
        5.0
    } else {
        10.0
    };
    nice * power
}

/// Formats `value` with just enough decimals for ticks `step` apart; uses a
/// true minus sign (U+2212) for negative numbers.
pub fn format_tick(value: f64, step: f64) -> String {
    let decimals = if step >= 1.0 {
        0
    } else {
        (-step.log10().floor()) as usize
    };
    let v = if value.abs() < step * 1e-6 {
        0.0
    } else {
        value
    };
    let text = format!("{v:.decimals$}");
    match text.strip_prefix('-') {
        Some(rest) => format!("\u{2212}{rest}"),
        None => text,
    }
}

/// Ticks of a linear axis between `lo` and `hi` (either order), about `target` of them.
pub fn linear_ticks(lo: f64, hi: f64, target: usize) -> Vec<Tick> {
    let (a, b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    let step = nice_step(b - a, target);
    let first = (a / step - 1e-9).ceil() as i64;
    let last = (b / step + 1e-9).floor() as i64;
    (first..=last)
        .map(|k| {
            let value = k as f64 * step;
            Tick {
                value,
                label: format_tick(value, step),
                exponent: None,
            }
        })
        .collect()
}

/// Ticks of a log axis between positive `lo` and `hi` (either order).
pub fn log_ticks(lo: f64, hi: f64) -> Vec<Tick> {
    let (a, b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
    if a.is_nan() || a <= 0.0 || !b.is_finite() {
        return Vec::new();
    }
    let la = a.log10();
    let lb = b.log10();
    let decades = lb - la;
    if decades < 1.0 {
        return linear_ticks(a, b, 5);
    }
    let step = (decades / 8.0).ceil().max(1.0) as i32;
    let first = (la - 1e-9).ceil() as i32;
    let last = (lb + 1e-9).floor() as i32;
    let mut ticks = Vec::new();
    for k in first..=last {
        if (k - first) % step != 0 {
            continue;
        }
        let value = 10f64.powi(k);
        let plain = (-2..=4).contains(&k);
        ticks.push(Tick {
            value,
            label: if plain {
                format_tick(value, value.min(1.0))
            } else {
                format!("10^{k}")
            },
            exponent: if plain { None } else { Some(k) },
        });
    }
    if decades < 3.0 {
        for k in (la.floor() as i32)..=(lb.ceil() as i32) {
            for m in [2.0, 5.0] {
                let value = m * 10f64.powi(k);
                if value >= a * (1.0 - 1e-9) && value <= b * (1.0 + 1e-9) {
                    let step = 10f64.powi(k).min(1.0);
                    ticks.push(Tick {
                        value,
                        label: format_tick(value, step),
                        exponent: None,
                    });
                }
            }
        }
        ticks.sort_by(|p, q| p.value.total_cmp(&q.value));
    }
    ticks
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nice_steps_are_one_two_five() {
        assert_eq!(nice_step(10.0, 5), 2.0);
        assert_eq!(nice_step(1.0, 4), 0.5);
        assert_eq!(nice_step(0.7, 7), 0.1);
        assert_eq!(nice_step(300.0, 5), 100.0);
    }

    #[test]
    fn linear_ticks_cover_the_range_with_true_minus() {
        let t = linear_ticks(-0.5, 2.2, 6);
        let values: Vec<f64> = t.iter().map(|t| t.value).collect();
        assert_eq!(values, vec![-0.5, 0.0, 0.5, 1.0, 1.5, 2.0]);
        assert_eq!(t[0].label, "\u{2212}0.5");
        assert_eq!(t[1].label, "0.0");
        // Reversed bounds give the same ticks.
        assert_eq!(linear_ticks(2.2, -0.5, 6), t);
    }

    #[test]
    fn log_ticks_label_decades() {
        let t = log_ticks(1e-13, 1e-9);
        let exps: Vec<Option<i32>> = t.iter().map(|t| t.exponent).collect();
        assert_eq!(
            exps,
            vec![Some(-13), Some(-12), Some(-11), Some(-10), Some(-9)]
        );
        let t = log_ticks(0.5, 30.0);
        let labels: Vec<&str> = t.iter().map(|t| t.label.as_str()).collect();
        assert_eq!(labels, vec!["0.5", "1", "2", "5", "10", "20"]);
    }

    #[test]
    fn narrow_log_axis_falls_back_to_linear_ticks() {
        let t = log_ticks(2.0, 8.0);
        assert!(t.iter().all(|t| t.exponent.is_none()));
        assert!(t.len() >= 3);
    }
}
