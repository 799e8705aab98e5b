//! Charts as inline SVG of our own drawing: the fan chart of a factor (simulated bands
//! with the closed-form law drawn over them) and the heat map of a correlation matrix.
//! Text is SVG `<text>` in the reader's sans-serif font; no font or image is loaded.

use sdeck_units::number::{plain, significant};
use std::fmt::Write as _;

const WIDTH: f64 = 780.0;
const HEIGHT: f64 = 330.0;
const LEFT: f64 = 78.0;
const RIGHT: f64 = 560.0;
const TOP: f64 = 48.0;
const BOTTOM: f64 = 282.0;
const BAND: &str = "#2b5d9c";
const CLOSED: &str = "#c4531d";

/// What a fan chart of one factor shows.
#[derive(Clone, Debug)]
pub struct FanChart<'a> {
    pub factor: &'a str,
    /// The factor's unit as written; `None` for a pure number.
    pub unit: Option<&'a str>,
    pub clock: &'a str,
    pub paths_simulated: usize,
    /// How many of them the bands are drawn from.
    pub paths_drawn: usize,
    pub times: &'a [f64],
    /// Simulated quantiles at 1, 5, 50, 95, 99% per time.
    pub simulated: &'a [[f64; 5]],
    /// Closed-form mean, 5%, median and 95% per time, where known.
    pub mean: &'a [Option<f64>],
    pub low: &'a [Option<f64>],
    pub median: &'a [Option<f64>],
    pub high: &'a [Option<f64>],
}

/// Escapes text for HTML and SVG.
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

/// About five round tick values covering `[low, high]`.
pub fn ticks(low: f64, high: f64) -> Vec<f64> {
    if !(low.is_finite() && high.is_finite()) || high <= low {
        return vec![low];
    }
    let raw = (high - low) / 5.0;
    let magnitude = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 2.5, 5.0, 10.0]
        .iter()
        .map(|m| m * magnitude)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * magnitude);
    let first = (low / step).ceil() as i64;
    let last = (high / step).floor() as i64;
    (first..=last).map(|k| k as f64 * step).collect()
}

/// Thousands separated by commas: 20000 → `20,000`.
pub fn count(n: usize) -> String {
    let digits = n.to_string();
    let mut out = String::new();
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

struct Frame {
    t_end: f64,
    low: f64,
    high: f64,
}

impl Frame {
    fn x(&self, t: f64) -> f64 {
        LEFT + (RIGHT - LEFT) * t / self.t_end
    }
    fn y(&self, v: f64) -> f64 {
        BOTTOM - (BOTTOM - TOP) * (v - self.low) / (self.high - self.low)
    }
}

fn polyline(frame: &Frame, points: impl Iterator<Item = (f64, f64)>) -> String {
    let mut d = String::new();
    for (t, v) in points.filter(|(t, v)| t.is_finite() && v.is_finite()) {
        let _ = write!(d, "{:.1},{:.1} ", frame.x(t), frame.y(v));
    }
    d.trim_end().to_string()
}

fn band(frame: &Frame, times: &[f64], lower: &[f64], upper: &[f64]) -> String {
    let up = times.iter().zip(upper).map(|(t, v)| (*t, *v));
    let down = times.iter().zip(lower).rev().map(|(t, v)| (*t, *v));
    polyline(frame, up.chain(down))
}

fn known(times: &[f64], values: &[Option<f64>]) -> Vec<(f64, f64)> {
    times
        .iter()
        .zip(values)
        .filter_map(|(t, v)| v.filter(|x| x.is_finite()).map(|x| (*t, x)))
        .collect()
}

impl FanChart<'_> {
    /// The chart as an `<svg>` element.
    pub fn svg(&self) -> String {
        let frame = self.frame();
        let mut s = String::new();
        self.axes(&mut s, &frame);
        let median = self.bands(&mut s, &frame);
        let mean = self.closed_form(&mut s, &frame);
        // Mean and median named at their right ends, so a skewed law is read as such.
        end_labels(
            &mut s,
            &frame,
            [
                ("mean", mean.last().map(|p| p.1), CLOSED),
                ("median", median.last().copied(), BAND),
            ],
        );
        legend(&mut s);
        s.push_str("</svg>");
        s
    }

    /// Simulated quantile `k` (0 to 4: 1, 5, 50, 95, 99%) per time.
    fn column(&self, k: usize) -> Vec<f64> {
        self.simulated.iter().map(|q| q[k]).collect()
    }

    /// The values drawn, simulated and closed-form, padded.
    fn frame(&self) -> Frame {
        let closed: Vec<f64> = [self.mean, self.low, self.median, self.high]
            .iter()
            .flat_map(|s| s.iter().flatten().copied())
            .collect();
        let (mut low, mut high) = self
            .simulated
            .iter()
            .flat_map(|q| q.iter().copied())
            .chain(closed)
            .filter(|v| v.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
                (a.min(v), b.max(v))
            });
        if !low.is_finite() {
            (low, high) = (0.0, 1.0);
        }
        let pad = if high > low {
            0.06 * (high - low)
        } else {
            0.05 * low.abs().max(1e-9)
        };
        Frame {
            t_end: self
                .times
                .last()
                .copied()
                .filter(|t| *t > 0.0)
                .unwrap_or(1.0),
            low: low - pad,
            high: high + pad,
        }
    }

    /// The opening of the `<svg>`, its title, the grid under the data and the axes with
    /// their titles.
    fn axes(&self, s: &mut String, frame: &Frame) {
        let unit = match self.unit {
            Some(u) if !u.trim().is_empty() && u.trim() != "1" => u.trim().to_string(),
            _ => "no unit".to_string(),
        };
        let _ = write!(
            s,
            r#"<svg xmlns="http://www.w3.org/2000/svg" class="fan" viewBox="0 0 {WIDTH} {HEIGHT}" width="{WIDTH}" height="{HEIGHT}" role="img" aria-label="fan chart of {f}" font-family="sans-serif" font-size="12">"#,
            f = escape(self.factor)
        );
        let _ = write!(
            s,
            r##"<rect width="{WIDTH}" height="{HEIGHT}" fill="#fff"/><text x="{LEFT}" y="22" font-size="15" font-weight="bold">{f}: {n} paths simulated, bands drawn from {d} of them</text>"##,
            f = escape(self.factor),
            n = count(self.paths_simulated),
            d = count(self.paths_drawn)
        );
        // Grid first, so that it lies under the bands.
        for v in ticks(frame.low, frame.high) {
            let y = frame.y(v);
            let _ = write!(
                s,
                r##"<line x1="{LEFT}" x2="{RIGHT}" y1="{y:.1}" y2="{y:.1}" stroke="#e3e3e3"/><text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"##,
                LEFT - 6.0,
                y + 4.0,
                significant(v, 4)
            );
        }
        for t in ticks(0.0, frame.t_end) {
            let x = frame.x(t);
            let _ = write!(
                s,
                r##"<line x1="{x:.1}" x2="{x:.1}" y1="{TOP}" y2="{BOTTOM}" stroke="#e3e3e3"/><text x="{x:.1}" y="{:.1}" text-anchor="middle">{}</text>"##,
                BOTTOM + 16.0,
                plain(t)
            );
        }
        let _ = write!(
            s,
            r##"<rect x="{LEFT}" y="{TOP}" width="{}" height="{}" fill="none" stroke="#999"/>"##,
            RIGHT - LEFT,
            BOTTOM - TOP
        );
        let _ = write!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">t ({})</text>"#,
            (LEFT + RIGHT) / 2.0,
            BOTTOM + 36.0,
            escape(self.clock)
        );
        let _ = write!(
            s,
            r#"<text transform="translate(16 {:.1}) rotate(-90)" text-anchor="middle">{} ({})</text>"#,
            (TOP + BOTTOM) / 2.0,
            escape(self.factor),
            escape(&unit)
        );
    }

    /// The simulated bands and median; the median per time.
    fn bands(&self, s: &mut String, frame: &Frame) -> Vec<f64> {
        for (lower, upper, opacity) in [(0, 4, 0.16), (1, 3, 0.30)] {
            let points = band(frame, self.times, &self.column(lower), &self.column(upper));
            if !points.is_empty() {
                let _ = write!(
                    s,
                    r#"<polygon points="{points}" fill="{BAND}" fill-opacity="{opacity}"/>"#
                );
            }
        }
        let median = self.column(2);
        let sim_median = polyline(
            frame,
            self.times.iter().copied().zip(median.iter().copied()),
        );
        let _ = write!(
            s,
            r#"<polyline points="{sim_median}" fill="none" stroke="{BAND}" stroke-width="2"/>"#
        );
        median
    }

    /// The closed-form law over the bands; the points of its mean.
    fn closed_form(&self, s: &mut String, frame: &Frame) -> Vec<(f64, f64)> {
        let mean = known(self.times, self.mean);
        for (series, dash, width) in [
            (known(self.times, self.low), "3 3", 1.4),
            (known(self.times, self.high), "3 3", 1.4),
            (known(self.times, self.median), "1 3", 1.6),
            (mean.clone(), "7 4", 2.2),
        ] {
            if series.len() > 1 {
                let _ = write!(
                    s,
                    r#"<polyline points="{}" fill="none" stroke="{CLOSED}" stroke-width="{width}" stroke-dasharray="{dash}"/>"#,
                    polyline(frame, series.into_iter())
                );
            }
        }
        mean
    }
}

/// Labels at the right end of the plot, each clear of the ones placed before it.
fn end_labels(s: &mut String, frame: &Frame, ends: [(&str, Option<f64>, &str); 2]) {
    let mut used: Vec<f64> = Vec::new();
    for (label, value, colour) in ends {
        let Some(v) = value.filter(|v| v.is_finite()) else {
            continue;
        };
        let mut y = frame.y(v) + 4.0;
        if let Some(u) = used.iter().find(|u| (*u - y).abs() < 13.0) {
            // Too close to a label already placed: stand clear of it on this side.
            y = if y >= *u { u + 13.0 } else { u - 13.0 };
        }
        used.push(y);
        let _ = write!(
            s,
            r#"<text x="{:.1}" y="{y:.1}" fill="{colour}">{label}</text>"#,
            RIGHT + 5.0
        );
    }
}

/// The legend, outside the data.
fn legend(s: &mut String) {
    let lx = RIGHT + 58.0;
    let entries: [(&str, String); 6] = [
        (
            "simulated 1–99%",
            format!(r#"<rect width="18" height="10" y="-9" fill="{BAND}" fill-opacity="0.16"/>"#),
        ),
        (
            "simulated 5–95%",
            format!(r#"<rect width="18" height="10" y="-9" fill="{BAND}" fill-opacity="0.46"/>"#),
        ),
        (
            "simulated median",
            format!(r#"<line x2="18" y1="-4" y2="-4" stroke="{BAND}" stroke-width="2"/>"#),
        ),
        (
            "closed-form mean",
            format!(
                r#"<line x2="18" y1="-4" y2="-4" stroke="{CLOSED}" stroke-width="2.2" stroke-dasharray="7 4"/>"#
            ),
        ),
        (
            "closed-form median",
            format!(
                r#"<line x2="18" y1="-4" y2="-4" stroke="{CLOSED}" stroke-width="1.6" stroke-dasharray="1 3"/>"#
            ),
        ),
        (
            "closed-form 5–95%",
            format!(
                r#"<line x2="18" y1="-4" y2="-4" stroke="{CLOSED}" stroke-width="1.4" stroke-dasharray="3 3"/>"#
            ),
        ),
    ];
    for (k, (label, mark)) in entries.iter().enumerate() {
        let y = TOP + 10.0 + 20.0 * k as f64;
        let _ = write!(
            s,
            r#"<g transform="translate({lx} {y})">{mark}<text x="24">{label}</text></g>"#
        );
    }
}

/// Charts one under the other in one SVG document (for `sdeck simulate --plot`).
pub fn stack(charts: &[String]) -> String {
    let height = HEIGHT * charts.len().max(1) as f64;
    let mut s = format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {WIDTH} {height}" width="{WIDTH}" height="{height}">"#
    );
    for (i, chart) in charts.iter().enumerate() {
        // Each chart is itself an <svg>; placed by its y attribute.
        let placed = chart.replacen("<svg ", &format!(r#"<svg y="{}" "#, HEIGHT * i as f64), 1);
        s.push_str(&placed);
    }
    s.push_str("</svg>\n");
    s
}

/// A heat map of a correlation matrix (−1 blue, 0 white, +1 red), with the values written
/// in the cells.
pub fn heat_map_svg(names: &[String], matrix: &[Vec<Option<f64>>]) -> String {
    let n = names.len();
    let cell = 54.0;
    let label = 110.0;
    let size = label + cell * n as f64 + 10.0;
    let mut s = format!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" class="heat" viewBox="0 0 {size} {size}" width="{size}" height="{size}" role="img" aria-label="correlation heat map" font-family="sans-serif" font-size="12">"#
    );
    for (i, name) in names.iter().enumerate() {
        let c = label + cell * (i as f64 + 0.5);
        let _ = write!(
            s,
            r#"<text x="{:.1}" y="{c:.1}" text-anchor="end" dominant-baseline="middle">{n}</text><text transform="translate({c:.1} {:.1}) rotate(-45)">{n}</text>"#,
            label - 6.0,
            label - 6.0,
            n = escape(name)
        );
    }
    for (i, row) in matrix.iter().enumerate().take(n) {
        for (j, value) in row.iter().enumerate().take(n) {
            let (x, y) = (label + cell * j as f64, label + cell * i as f64);
            let (fill, text) = match value {
                Some(v) if v.is_finite() => {
                    let a = v.abs().min(1.0);
                    let mix = |full: f64| (255.0 - (255.0 - full) * a).round() as u8;
                    let colour = if *v >= 0.0 {
                        format!("rgb({},{},{})", 255, mix(90.0), mix(70.0))
                    } else {
                        format!("rgb({},{},{})", mix(50.0), mix(110.0), 255)
                    };
                    (colour, significant(*v, 2))
                }
                _ => ("#eee".to_string(), "–".to_string()),
            };
            let _ = write!(
                s,
                r##"<rect x="{x:.1}" y="{y:.1}" width="{cell}" height="{cell}" fill="{fill}" stroke="#fff"/><text x="{:.1}" y="{:.1}" text-anchor="middle" dominant-baseline="middle">{text}</text>"##,
                x + cell / 2.0,
                y + cell / 2.0
            );
        }
    }
    s.push_str("</svg>");
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_round_and_inside() {
        assert_eq!(
            ticks(0.0, 1.0),
            vec![0.0, 0.2, 0.4, 0.6000000000000001, 0.8, 1.0]
        );
        let t = ticks(0.0213, 0.0388);
        assert!(t.iter().all(|v| (0.0213..=0.0388).contains(v)));
        assert!(t.len() >= 3);
        assert_eq!(count(20_000), "20,000");
        assert_eq!(count(999), "999");
        assert_eq!(escape("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
    }
}
