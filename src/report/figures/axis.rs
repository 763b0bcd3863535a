//! Axes of the figures: linear or base-10 logarithmic scales, and rows of
//! categories. Tick positions and labels are computed here with plain
//! arithmetic and the pure-Rust `libm` (plotters' own tick finder and label
//! formatter call the platform's maths library), so a figure's bytes do not
//! depend on the machine that drew it.

use std::ops::Range;

use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};

/// A flexibility axis switches to a log scale when its values span more than
/// this many decades.
pub(crate) const LOG_SPAN_DECADES: f64 = 1.5;

/// One axis of a figure: its range, scale and ticks.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Axis {
    lo: f64,
    hi: f64,
    log: bool,
    ticks: Vec<f64>,
    /// Decimals of the tick labels.
    decimals: usize,
}

/// The double nearest to m × 10^e (exact powers of ten for |e| ≤ 22, then
/// one correctly rounded multiplication or division).
fn decimal(m: i64, e: i32) -> f64 {
    let mut p = 1.0;
    for _ in 0..e.unsigned_abs() {
        p *= 10.0;
    }
    if e < 0 {
        m as f64 / p
    } else {
        m as f64 * p
    }
}

impl Axis {
    /// A linear axis over `[min, max]`, widened by `pad` of the span at each
    /// end, with about `target` ticks at 1, 2 or 5 times a power of ten.
    pub(crate) fn linear(min: f64, max: f64, pad: f64, target: usize) -> Axis {
        let (min, max) = if max > min {
            (min, max)
        } else {
            let half = (min.abs() * 0.1)
                .max(1e-9)
                .max(if min == 0.0 { 1.0 } else { 0.0 });
            (min - half, max + half)
        };
        let span = max - min;
        let (lo, hi) = (min - pad * span, max + pad * span);
        let raw = (hi - lo) / target.max(1) as f64;
        // The step is m × 10^e with m ∈ {1, 2, 5}: the smallest such step not
        // below `raw`.
        let mut exponent = libm::floor(libm::log10(raw)) as i32;
        let mut mantissa = 10;
        for m in [1, 2, 5] {
            if decimal(m, exponent) >= raw * (1.0 - 1e-9) {
                mantissa = m;
                break;
            }
        }
        if mantissa == 10 {
            mantissa = 1;
            exponent += 1;
        }
        let step = decimal(mantissa, exponent);
        let first = libm::ceil(lo / step - 1e-9) as i64;
        let last = libm::floor(hi / step + 1e-9) as i64;
        let ticks = (first..=last)
            .map(|k| decimal(k * mantissa, exponent))
            .collect();
        Axis {
            lo,
            hi,
            log: false,
            ticks,
            decimals: exponent.min(0).unsigned_abs() as usize,
        }
    }

    /// A log10 axis over `[min, max]` (both positive), widened by `pad` of its
    /// span in decades at each end; ticks at powers of ten, and also at 2 and
    /// 5 times them when the axis spans less than three decades.
    pub(crate) fn log10(min: f64, max: f64, pad: f64) -> Axis {
        let (dmin, dmax) = (libm::log10(min), libm::log10(max));
        let span = (dmax - dmin).max(0.5);
        let (dlo, dhi) = (dmin - pad * span, dmax + pad * span);
        let (lo, hi) = (libm::pow(10.0, dlo), libm::pow(10.0, dhi));
        let multiples: &[i64] = if dhi - dlo < 3.0 { &[1, 2, 5] } else { &[1] };
        let mut ticks = Vec::new();
        let mut decimals = 0;
        for e in libm::floor(dlo) as i32..=libm::ceil(dhi) as i32 {
            for &m in multiples {
                let v = decimal(m, e);
                if v >= lo && v <= hi {
                    ticks.push(v);
                    decimals = decimals.max(e.min(0).unsigned_abs() as usize);
                }
            }
        }
        Axis {
            lo,
            hi,
            log: true,
            ticks,
            decimals,
        }
    }

    /// A flexibility axis: log10 when the (positive) values span more than
    /// [`LOG_SPAN_DECADES`], linear otherwise.
    pub(crate) fn for_flexibility(values: &[f64]) -> Axis {
        let min = values.iter().copied().fold(f64::INFINITY, f64::min);
        let max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if min > 0.0 && libm::log10(max / min) > LOG_SPAN_DECADES {
            Axis::log10(min, max, 0.05)
        } else {
            Axis::linear(min, max, 0.06, 6)
        }
    }

    /// Rows of `count` categories at 0, 1, …, `count - 1`.
    pub(crate) fn categories(count: usize) -> Axis {
        Axis {
            lo: -0.5,
            hi: count as f64 - 0.5,
            log: false,
            ticks: (0..count).map(|i| i as f64).collect(),
            decimals: 0,
        }
    }

    pub(crate) fn is_log(&self) -> bool {
        self.log
    }

    #[cfg(test)]
    pub(crate) fn ticks(&self) -> &[f64] {
        &self.ticks
    }

    /// The label of a tick.
    pub(crate) fn label(&self, value: f64) -> String {
        let magnitude = value.abs();
        if value != 0.0 && !(1e-4..1e7).contains(&magnitude) {
            format!("{value:.1e}")
        } else {
            let text = format!("{value:.*}", self.decimals);
            if text.starts_with('-') && text.trim_start_matches(['-', '0', '.']).is_empty() {
                text[1..].to_string()
            } else {
                text
            }
        }
    }

    fn transform(&self, value: f64) -> f64 {
        if self.log {
            libm::log10(value.max(self.lo * 1e-3))
        } else {
            value
        }
    }
}

impl Ranged for Axis {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let (lo, hi) = (self.transform(self.lo), self.transform(self.hi));
        let t = (self.transform(*value) - lo) / (hi - lo);
        limit.0 + libm::round(t * f64::from(limit.1 - limit.0)) as i32
    }

    /// The ticks for the labelled grid lines; no light grid lines.
    fn key_points<Hint: KeyPointHint>(&self, hint: Hint) -> Vec<f64> {
        if hint.weight().allow_light_points() || hint.max_num_points() == 0 {
            return Vec::new();
        }
        let every = self.ticks.len().div_ceil(hint.max_num_points()).max(1);
        self.ticks.iter().copied().step_by(every).collect()
    }

    fn range(&self) -> Range<f64> {
        self.lo..self.hi
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_ticks_are_round_numbers() {
        // 0..4.6 padded by 4% each side, about 6 ticks: steps of 1.
        let axis = Axis::linear(0.0, 4.6, 0.04, 6);
        assert_eq!(axis.ticks(), &[0.0, 1.0, 2.0, 3.0, 4.0]);
        assert_eq!(axis.label(2.0), "2");
        let fine = Axis::linear(1.7, 2.1, 0.0, 4);
        assert_eq!(fine.ticks(), &[1.7, 1.8, 1.9, 2.0, 2.1]);
        assert_eq!(fine.label(1.8), "1.8");
        assert_eq!(fine.label(2.0), "2.0");
    }

    #[test]
    fn negative_zero_never_shows() {
        let axis = Axis::linear(-1.0, 1.0, 0.0, 4);
        assert!(axis.ticks().contains(&0.0));
        assert_eq!(axis.label(-0.0), "0.0");
    }

    #[test]
    fn flexibility_goes_log_beyond_one_and_a_half_decades() {
        // The demo's range: 2 to 240 effective df (2.08 decades).
        let wide = Axis::for_flexibility(&[2.0, 13.0, 240.0]);
        assert!(wide.is_log());
        assert_eq!(wide.ticks(), &[2.0, 5.0, 10.0, 20.0, 50.0, 100.0, 200.0]);
        assert_eq!(wide.label(200.0), "200");
        // 2 to 60 is 1.48 decades: linear.
        assert!(!Axis::for_flexibility(&[2.0, 60.0]).is_log());
    }

    #[test]
    fn mapping_is_monotone_and_hits_the_ends() {
        let axis = Axis::log10(1.0, 1000.0, 0.0);
        assert_eq!(axis.map(&1.0, (0, 300)), 0);
        assert_eq!(axis.map(&10.0, (0, 300)), 100);
        assert_eq!(axis.map(&1000.0, (0, 300)), 300);
        // A reversed pixel range (plotters' y axis) maps the same way round.
        assert_eq!(axis.map(&10.0, (300, 0)), 200);
    }

    #[test]
    fn categories_sit_on_integers() {
        let axis = Axis::categories(3);
        assert_eq!(axis.ticks(), &[0.0, 1.0, 2.0]);
        assert_eq!(axis.map(&0.0, (0, 300)), 50);
        assert_eq!(axis.map(&2.0, (0, 300)), 250);
    }
}
