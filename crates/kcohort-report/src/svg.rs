//! A small SVG module for the report's charts: a frame with labelled axes, lines, markers with
//! a text title each, shaded bands. Shapes and labels carry the meaning; colour only repeats it.
//! Output is deterministic text (numbers rounded to 0.1 px).

use std::fmt::Write;

/// Escape text for XML.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// A linear scale from data to pixels.
#[derive(Debug, Clone, Copy)]
pub struct Scale {
    pub d0: f64,
    pub d1: f64,
    pub p0: f64,
    pub p1: f64,
}

impl Scale {
    pub fn at(&self, v: f64) -> f64 {
        if self.d1 == self.d0 {
            return (self.p0 + self.p1) / 2.0;
        }
        self.p0 + (v - self.d0) / (self.d1 - self.d0) * (self.p1 - self.p0)
    }
}

/// "Nice" tick values covering `[low, high]` (about `n` of them).
pub fn ticks(low: f64, high: f64, n: usize) -> Vec<f64> {
    if high.partial_cmp(&low) != Some(std::cmp::Ordering::Greater) {
        return vec![low];
    }
    let raw = (high - low) / n.max(1) as f64;
    let magnitude = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * magnitude)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * magnitude);
    let mut t = (low / step).floor() * step;
    let mut out = Vec::new();
    while t <= high + step * 1e-9 {
        out.push((t * 1e9).round() / 1e9);
        t += step;
    }
    out
}

/// A chart being drawn.
pub struct Chart {
    pub width: f64,
    pub height: f64,
    pub x: Scale,
    pub y: Scale,
    body: String,
}

/// Margins of the plot area: left, right, top, bottom.
const MARGIN: (f64, f64, f64, f64) = (64.0, 16.0, 16.0, 56.0);

impl Chart {
    /// A chart of `width` x `height` px over data ranges `x` and `y`.
    pub fn new(width: f64, height: f64, x: (f64, f64), y: (f64, f64)) -> Chart {
        let (l, r, t, b) = MARGIN;
        Chart {
            width,
            height,
            x: Scale {
                d0: x.0,
                d1: x.1,
                p0: l,
                p1: width - r,
            },
            y: Scale {
                d0: y.0,
                d1: y.1,
                p0: height - b,
                p1: t,
            },
            body: String::new(),
        }
    }

    /// Axes with ticks; `x_labels` are (data x, text) pairs; y ticks are computed.
    pub fn axes(&mut self, x_labels: &[(f64, String)], x_title: &str, y_title: &str) {
        let (x0, x1) = (self.x.p0, self.x.p1);
        let (y0, y1) = (self.y.p0, self.y.p1);
        let b = &mut self.body;
        writeln!(b, r#"<g class="axes"><line x1="{x0:.1}" y1="{y0:.1}" x2="{x1:.1}" y2="{y0:.1}"/><line x1="{x0:.1}" y1="{y0:.1}" x2="{x0:.1}" y2="{y1:.1}"/>"#).unwrap();
        for t in ticks(self.y.d0, self.y.d1, 5) {
            let py = self.y.at(t);
            writeln!(b, r#"<line class="grid" x1="{x0:.1}" y1="{py:.1}" x2="{x1:.1}" y2="{py:.1}"/><text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#, x0 - 6.0, py + 4.0, trim_number(t)).unwrap();
        }
        for (v, label) in x_labels {
            let px = self.x.at(*v);
            writeln!(b, r#"<text x="{px:.1}" y="{:.1}" text-anchor="end" transform="rotate(-45 {px:.1} {:.1})">{}</text>"#, y0 + 14.0, y0 + 14.0, escape(label)).unwrap();
        }
        writeln!(
            b,
            r#"<text class="axis-title" x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
            (x0 + x1) / 2.0,
            self.height - 4.0,
            escape(x_title)
        )
        .unwrap();
        writeln!(b, r#"<text class="axis-title" x="12" y="{:.1}" text-anchor="middle" transform="rotate(-90 12 {:.1})">{}</text></g>"#, (y0 + y1) / 2.0, (y0 + y1) / 2.0, escape(y_title)).unwrap();
    }

    /// A polyline through data points (skipping non-finite ones); `class` styles it.
    pub fn line(&mut self, points: &[(f64, f64)], class: &str, step: bool) {
        let mut d = String::new();
        let mut previous: Option<(f64, f64)> = None;
        for &(x, y) in points
            .iter()
            .filter(|(x, y)| x.is_finite() && y.is_finite())
        {
            let (px, py) = (self.x.at(x), self.y.at(y.clamp(self.y.d0, self.y.d1)));
            match previous {
                None => write!(d, "M{px:.1},{py:.1}").unwrap(),
                Some((_, qy)) if step => write!(d, " L{px:.1},{qy:.1} L{px:.1},{py:.1}").unwrap(),
                Some(_) => write!(d, " L{px:.1},{py:.1}").unwrap(),
            }
            previous = Some((px, py));
        }
        if !d.is_empty() {
            writeln!(self.body, r#"<path class="{class}" d="{d}"/>"#).unwrap();
        }
    }

    /// A marker: `shape` is `circle`, `diamond` (a signal) or `square`; `title` is its tooltip and
    /// accessible text.
    pub fn marker(&mut self, x: f64, y: f64, shape: &str, class: &str, title: &str) {
        let (px, py) = (self.x.at(x), self.y.at(y.clamp(self.y.d0, self.y.d1)));
        let t = escape(title);
        let b = &mut self.body;
        match shape {
            "diamond" => writeln!(b, r#"<path class="{class}" d="M{px:.1},{:.1} L{:.1},{py:.1} L{px:.1},{:.1} L{:.1},{py:.1} Z"><title>{t}</title></path>"#, py - 7.0, px + 7.0, py + 7.0, px - 7.0).unwrap(),
            "square" => writeln!(b, r#"<rect class="{class}" x="{:.1}" y="{:.1}" width="9" height="9"><title>{t}</title></rect>"#, px - 4.5, py - 4.5).unwrap(),
            _ => writeln!(b, r#"<circle class="{class}" cx="{px:.1}" cy="{py:.1}" r="4"><title>{t}</title></circle>"#).unwrap(),
        }
    }

    /// A vertical bar from `y_low` to `y_high` at `x` (a suppressed value's possible range).
    pub fn range_bar(&mut self, x: f64, y_low: f64, y_high: f64, class: &str, title: &str) {
        let px = self.x.at(x);
        let (a, b) = (
            self.y.at(y_low.clamp(self.y.d0, self.y.d1)),
            self.y.at(y_high.clamp(self.y.d0, self.y.d1)),
        );
        writeln!(self.body, r#"<rect class="{class}" x="{:.1}" y="{:.1}" width="6" height="{:.1}"><title>{}</title></rect>"#, px - 3.0, b.min(a), (a - b).abs().max(1.0), escape(title)).unwrap();
    }

    /// A text label at data coordinates.
    pub fn label(&mut self, x: f64, y: f64, text: &str, class: &str) {
        writeln!(
            self.body,
            r#"<text class="{class}" x="{:.1}" y="{:.1}">{}</text>"#,
            self.x.at(x),
            self.y.at(y),
            escape(text)
        )
        .unwrap();
    }

    /// The finished `<svg>` element with an accessible title and description.
    pub fn finish(self, title: &str, description: &str) -> String {
        format!(
            r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {w} {h}" width="{w}" height="{h}" role="img" aria-labelledby="t d"><title>{}</title><desc>{}</desc>
{}</svg>"#,
            escape(title),
            escape(description),
            self.body,
            w = self.width,
            h = self.height,
        )
    }
}

/// A number as short text: integers without decimals, others to 3 significant digits.
pub fn trim_number(v: f64) -> String {
    if (v - v.round()).abs() < 1e-9 {
        format!("{}", v.round() as i64)
    } else if v.abs() >= 10.0 {
        format!("{v:.1}")
    } else {
        format!("{v:.2}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_cover_the_range_with_round_steps() {
        assert_eq!(ticks(0.0, 10.0, 5), vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
        assert_eq!(ticks(0.0, 1.0, 4), vec![0.0, 0.25, 0.5, 0.75, 1.0]);
        let t = ticks(3.0, 97.0, 5);
        assert_eq!(t, vec![0.0, 20.0, 40.0, 60.0, 80.0]);
    }

    #[test]
    fn text_is_escaped_and_charts_are_well_formed() {
        assert_eq!(escape("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
        let mut c = Chart::new(300.0, 200.0, (0.0, 10.0), (0.0, 5.0));
        c.axes(&[(0.0, "Jan".into())], "month", "rate");
        c.line(&[(0.0, 1.0), (5.0, 2.0), (10.0, f64::NAN)], "centre", false);
        c.marker(5.0, 2.0, "diamond", "signal", "May: above the limit");
        let svg = c.finish("t", "d");
        assert!(svg.starts_with("<svg") && svg.ends_with("</svg>"));
        assert_eq!(svg.matches("<title>").count(), 2);
        assert!(svg.contains("M64.0,"), "{svg}");
    }
}
