//! A log-scale axis for ratios (risk, rate and hazard ratios) and the interval mark drawn on it:
//! a square at the estimate and a whisker from the lower to the upper limit, ending in an arrow
//! where the interval runs off the axis. Used by the forest plot and the cause table's mini marks.
//! A ratio is drawn only when it is a finite positive number; the text says the rest.

use crate::page::fixed;
use crate::svg::escape;
use std::fmt::Write;

/// The axis never reaches beyond these ratios; wider intervals end in an arrow.
const LOWEST: f64 = 0.01;
const HIGHEST: f64 = 100.0;
/// Axis ends and ticks come from this 1-2-5 sequence.
const STEPS: [f64; 13] = [
    0.01, 0.02, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0, 100.0,
];

/// A log scale from ratios `low..high` to pixels `p0..p1`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LogScale {
    pub low: f64,
    pub high: f64,
    pub p0: f64,
    pub p1: f64,
}

/// Where a value lands on a [`LogScale`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Place {
    /// On the axis, at this pixel.
    On(f64),
    /// Below the axis (including 0): the axis' first pixel.
    Below(f64),
    /// Above the axis (including +infinity): the axis' last pixel.
    Above(f64),
}

impl Place {
    pub fn x(self) -> f64 {
        match self {
            Place::On(x) | Place::Below(x) | Place::Above(x) => x,
        }
    }
}

/// An estimate that can be shown: a finite number, not negative (0 lands below the axis).
pub fn estimable(v: Option<f64>) -> Option<f64> {
    v.filter(|v| v.is_finite() && *v >= 0.0)
}

impl LogScale {
    /// The axis covering 1, 0.5 to 2 and every finite positive value given (within 0.01 to
    /// 100), with ends on the 1-2-5 sequence.
    pub fn fit(values: impl IntoIterator<Item = f64>, p0: f64, p1: f64) -> LogScale {
        let (mut low, mut high) = (0.5f64, 2.0f64);
        for v in values.into_iter().filter(|v| v.is_finite() && *v > 0.0) {
            let v = v.clamp(LOWEST, HIGHEST);
            low = low.min(v);
            high = high.max(v);
        }
        let low = STEPS
            .iter()
            .copied()
            .rfind(|s| *s <= low * (1.0 + 1e-9))
            .unwrap_or(LOWEST);
        let high = STEPS
            .iter()
            .copied()
            .find(|s| *s >= high * (1.0 - 1e-9))
            .unwrap_or(HIGHEST);
        LogScale { low, high, p0, p1 }
    }

    /// The pixel of a finite positive ratio, unclamped.
    pub fn at(&self, v: f64) -> f64 {
        let span = (self.high / self.low).ln();
        self.p0 + (v / self.low).ln() / span * (self.p1 - self.p0)
    }

    /// Where `v` lands; `None` when it is not a number.
    pub fn place(&self, v: f64) -> Option<Place> {
        if v.is_nan() {
            None
        } else if v < self.low * (1.0 - 1e-9) {
            Some(Place::Below(self.p0))
        } else if v > self.high * (1.0 + 1e-9) {
            Some(Place::Above(self.p1))
        } else {
            Some(Place::On(self.at(v)))
        }
    }

    /// The 1-2-5 ticks on the axis, thinned to powers of ten when there would be more than 7.
    pub fn ticks(&self) -> Vec<f64> {
        let all: Vec<f64> = STEPS
            .iter()
            .copied()
            .filter(|s| *s >= self.low && *s <= self.high)
            .collect();
        if all.len() <= 7 {
            return all;
        }
        all.into_iter()
            .filter(|s| (s.log10() - s.log10().round()).abs() < 1e-9)
            .collect()
    }
}

/// `estimate (lower to upper)` with 2 decimals, or `not estimable`. A missing limit reads `–`,
/// an infinite upper limit `∞`.
pub fn ratio_text(estimate: Option<f64>, lower: Option<f64>, upper: Option<f64>) -> String {
    let Some(e) = estimable(estimate) else {
        return "not estimable".into();
    };
    let limit = |v: Option<f64>| match v {
        Some(v) if v == f64::INFINITY => "∞".to_string(),
        Some(v) if v.is_finite() => fixed(v, 2),
        _ => "–".to_string(),
    };
    if lower.is_none() && upper.is_none() {
        return fixed(e, 2);
    }
    format!("{} ({} to {})", fixed(e, 2), limit(lower), limit(upper))
}

/// A triangle at the axis end `x`, pointing outwards (left when `left`).
fn arrow(out: &mut String, x: f64, y: f64, half: f64, left: bool) {
    let back = if left { x + half * 1.5 } else { x - half * 1.5 };
    write!(
        out,
        r#"<path class="arrow" d="M{x:.1},{y:.1} L{back:.1},{:.1} L{back:.1},{:.1} Z"/>"#,
        y - half,
        y + half
    )
    .unwrap();
}

/// The interval mark at height `y`: whisker, arrows where it runs off the axis, a square of
/// `size` px at the estimate (only the arrow when the estimate itself is off the axis). Empty
/// when the estimate is not [`estimable`]. `title` becomes the mark's tooltip.
pub fn interval_mark(
    scale: &LogScale,
    y: f64,
    estimate: Option<f64>,
    lower: Option<f64>,
    upper: Option<f64>,
    size: f64,
    title: &str,
) -> String {
    let Some(centre) = estimable(estimate).and_then(|e| scale.place(e)) else {
        return String::new();
    };
    // A limit that is not a number leaves that side of the whisker out; a negative one is 0.
    let left = lower
        .and_then(|l| scale.place(l.max(0.0)))
        .unwrap_or(centre);
    let right = upper.and_then(|u| scale.place(u)).unwrap_or(centre);
    let mut out = String::new();
    write!(out, "<g class=\"mark\"><title>{}</title>", escape(title)).unwrap();
    if (right.x() - left.x()).abs() > 0.05 {
        write!(
            out,
            r#"<line class="whisker" x1="{:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}"/>"#,
            left.x(),
            right.x()
        )
        .unwrap();
    }
    let half = (size / 2.0).max(3.0);
    let off_left = matches!(left, Place::Below(_)) || matches!(centre, Place::Below(_));
    let off_right = matches!(right, Place::Above(_)) || matches!(centre, Place::Above(_));
    if off_left {
        arrow(&mut out, scale.p0, y, half, true);
    }
    if off_right {
        arrow(&mut out, scale.p1, y, half, false);
    }
    if let Place::On(x) = centre {
        write!(
            out,
            r#"<rect class="estimate" x="{:.1}" y="{:.1}" width="{size:.1}" height="{size:.1}"/>"#,
            x - size / 2.0,
            y - size / 2.0
        )
        .unwrap();
    }
    out.push_str("</g>");
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_axis_covers_the_values_on_round_ends() {
        let check = |values: &[f64], want: (f64, f64)| {
            let s = LogScale::fit(values.iter().copied(), 0.0, 100.0);
            assert_eq!((s.low, s.high), want, "{values:?}");
        };
        check(&[], (0.5, 2.0));
        check(&[1.0, 4.0], (0.5, 5.0));
        check(&[0.3, 1.2], (0.2, 2.0));
        check(&[f64::NAN, f64::INFINITY, 0.0, -1.0], (0.5, 2.0));
        check(&[1e-6, 1e6], (0.01, 100.0));
        check(&[2.0], (0.5, 2.0));
    }

    #[test]
    fn ratios_equally_far_from_one_are_equally_far_from_its_pixel() {
        let s = LogScale::fit([0.25, 4.0], 0.0, 300.0);
        let one = s.at(1.0);
        assert!(((s.at(4.0) - one) - (one - s.at(0.25))).abs() < 1e-9);
        assert_eq!(s.place(1000.0), Some(Place::Above(300.0)));
        assert_eq!(s.place(0.0), Some(Place::Below(0.0)));
        assert_eq!(s.place(f64::NAN), None);
        assert_eq!(s.ticks(), vec![0.2, 0.5, 1.0, 2.0, 5.0]);
    }

    #[test]
    fn ratio_text_names_what_is_missing() {
        let check = |e, l, u, want: &str| assert_eq!(ratio_text(e, l, u), want);
        check(Some(2.0), Some(1.0), Some(4.0), "2.00 (1.00 to 4.00)");
        check(
            Some(2.0),
            Some(0.5),
            Some(f64::INFINITY),
            "2.00 (0.50 to ∞)",
        );
        check(Some(2.0), Some(f64::NAN), None, "2.00 (– to –)");
        check(Some(2.0), None, None, "2.00");
        check(None, Some(1.0), Some(2.0), "not estimable");
        check(Some(f64::INFINITY), None, None, "not estimable");
    }
}
