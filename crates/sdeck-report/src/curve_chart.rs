//! The yield-curve chart of a model with a `discount` line: zero yields and
//! instantaneous forwards against maturity, as inline SVG. Shared by `sdeck curve
//! --format svg` and the review document.

use crate::charts::escape;
use sdeck_calculus::curve::Curve;
use sdeck_semantics::Model;
use sdeck_units::number::plain;
use std::fmt::Write as _;

const WIDTH: f64 = 720.0;
const HEIGHT: f64 = 420.0;
const LEFT: f64 = 80.0;
const RIGHT: f64 = 30.0;
const TOP: f64 = 40.0;
const BOTTOM: f64 = 60.0;

/// A line chart of yields and forwards (per cent per year) against maturity in years.
pub fn yield_curve_svg(model: &Model, c: &Curve) -> String {
    let (width, height, left) = (WIDTH, HEIGHT, LEFT);
    let xs: Vec<f64> = c
        .points
        .iter()
        .map(|p| p.maturity * model.clock.years)
        .collect();
    let plot = Plot::of(c, &xs);
    let line = |pick: &dyn Fn(usize) -> f64| -> String {
        xs.iter()
            .enumerate()
            .filter(|(i, _)| pick(*i).is_finite())
            .map(|(i, x)| format!("{:.2},{:.2}", plot.px(*x), plot.py(pick(i))))
            .collect::<Vec<_>>()
            .join(" ")
    };
    let yields = line(&|i| c.points[i].yield_rate * 100.0);
    let forwards = line(&|i| c.points[i].forward * 100.0);
    let mut s = String::new();
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} {height}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(s, r#"<rect width="100%" height="100%" fill="white"/>"#);
    let _ = writeln!(
        s,
        r#"<text x="{left}" y="24" font-size="14">{} — zero yields and forwards{}</text>"#,
        escape(&model.name),
        model
            .measure
            .as_ref()
            .map_or(String::new(), |m| format!(" ({})", m.measure.as_str()))
    );
    plot.axes(&mut s);
    let (x1, y0) = (WIDTH - RIGHT, TOP);
    let _ = writeln!(
        s,
        r##"<polyline points="{yields}" fill="none" stroke="#1f54a0" stroke-width="2"/>"##
    );
    let _ = writeln!(
        s,
        r##"<polyline points="{forwards}" fill="none" stroke="#c8461e" stroke-width="2" stroke-dasharray="6 4"/>"##
    );
    let _ = writeln!(
        s,
        r##"<text x="{:.1}" y="{:.1}" fill="#1f54a0">zero yield</text><text x="{:.1}" y="{:.1}" fill="#c8461e">forward</text>"##,
        x1 - 150.0,
        y0 + 14.0,
        x1 - 70.0,
        y0 + 14.0
    );
    s.push_str("</svg>");
    s
}

/// The ranges drawn: maturities from 0 to `x_max` years, rates (per cent) from `y_min`
/// to `y_max`, padded.
struct Plot {
    x_max: f64,
    y_min: f64,
    y_max: f64,
}

impl Plot {
    fn of(c: &Curve, xs: &[f64]) -> Plot {
        let values: Vec<f64> = c
            .points
            .iter()
            .flat_map(|p| [p.yield_rate * 100.0, p.forward * 100.0])
            .filter(|v| v.is_finite())
            .collect();
        let x_max = xs.iter().copied().fold(0.0, f64::max).max(1e-9);
        let mut y_min = values.iter().copied().fold(f64::INFINITY, f64::min);
        let mut y_max = values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if !(y_min.is_finite() && y_max.is_finite()) {
            (y_min, y_max) = (0.0, 1.0);
        }
        let pad = ((y_max - y_min) * 0.08).max(0.05);
        Plot {
            x_max,
            y_min: y_min - pad,
            y_max: y_max + pad,
        }
    }

    fn px(&self, x: f64) -> f64 {
        LEFT + x / self.x_max * (WIDTH - LEFT - RIGHT)
    }

    fn py(&self, y: f64) -> f64 {
        TOP + (self.y_max - y) / (self.y_max - self.y_min) * (HEIGHT - TOP - BOTTOM)
    }

    /// The axes with their ticks and titles.
    fn axes(&self, s: &mut String) {
        let (x0, x1, y0, y1) = (LEFT, WIDTH - RIGHT, TOP, HEIGHT - BOTTOM);
        let _ = writeln!(
            s,
            r#"<path d="M{x0},{y0} L{x0},{y1} L{x1},{y1}" fill="none" stroke="black"/>"#
        );
        for k in 0..=5 {
            let v = self.y_min + (self.y_max - self.y_min) * k as f64 / 5.0;
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{:.2}</text>"#,
                x0 - 6.0,
                self.py(v) + 4.0,
                v
            );
            let x = self.x_max * k as f64 / 5.0;
            let _ = writeln!(
                s,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
                self.px(x),
                y1 + 18.0,
                plain((x * 100.0).round() / 100.0)
            );
        }
        let _ = writeln!(
            s,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">maturity (year)</text>"#,
            (x0 + x1) / 2.0,
            HEIGHT - 16.0
        );
        let _ = writeln!(
            s,
            r#"<text x="18" y="{:.1}" text-anchor="middle" transform="rotate(-90 18 {:.1})">rate (% per year, continuously compounded)</text>"#,
            (y0 + y1) / 2.0,
            (y0 + y1) / 2.0
        );
    }
}
