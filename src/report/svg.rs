//! Minimal SVG line charts (no dependencies): linear or logarithmic axes, several series,
//! optional dashed reference lines, a legend. Owns layout only; receives plain numbers.
//!
//! Every text stays inside the picture: the margins and the width grow with the longest legend
//! entry, category name and title, measured by [`text_width`] (0.6 em per character, a common
//! estimate of an average sans-serif glyph's advance, generous for lower case). A legend names
//! only what is drawn.

use std::fmt::Write;

/// One line of a chart.
#[derive(Debug, Clone)]
pub struct Series {
    pub name: String,
    pub points: Vec<(f64, f64)>,
    pub dashed: bool,
    /// Draw a dot at every point.
    pub markers: bool,
    /// Join the points by a line.
    pub joined: bool,
}

/// A chart: title, axis labels and scales, series.
#[derive(Debug, Clone)]
pub struct Chart {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub log_x: bool,
    pub log_y: bool,
    pub series: Vec<Series>,
}

const WIDTH: f64 = 720.0;
const HEIGHT: f64 = 440.0;
const LEFT: f64 = 80.0;
const RIGHT: f64 = 180.0;
const TOP: f64 = 50.0;
const BOTTOM: f64 = 60.0;
const COLOURS: [&str; 6] = [
    "#1f5fa8", "#c2491d", "#2e8540", "#7a3ea1", "#8c6d1f", "#444444",
];

/// Estimated width of `text` at `size` px: 0.6 em a character (see the module comment).
pub fn text_width(text: &str, size: f64) -> f64 {
    0.6 * size * text.chars().count() as f64
}

/// Room kept between a text and the picture's edge.
const PAD: f64 = 8.0;

/// The width of a picture whose content spans `content` px, widened so that a title of
/// `title` centred at `centre` fits; returns `(width, title centre)`.
fn fit_title(content: f64, centre: f64, title: &str) -> (f64, f64) {
    let half = text_width(title, 15.0) / 2.0;
    if centre - half >= PAD && centre + half <= content - PAD {
        return (content, centre);
    }
    let width = content.max(2.0 * half + 2.0 * PAD);
    (width, width / 2.0)
}

fn nice_step(span: f64) -> f64 {
    let raw = span / 5.0;
    let magnitude = 10f64.powf(raw.log10().floor());
    let unit = raw / magnitude;
    magnitude
        * if unit < 1.5 {
            1.0
        } else if unit < 3.5 {
            2.0
        } else if unit < 7.5 {
            5.0
        } else {
            10.0
        }
}

/// Axis range and tick positions (in data units) for values `lo..hi`.
fn axis(lo: f64, hi: f64, log: bool) -> (f64, f64, Vec<f64>) {
    if log {
        let (a, b) = (
            lo.log10().floor(),
            hi.log10().ceil().max(lo.log10().floor() + 1.0),
        );
        let every = ((b - a) / 8.0).ceil().max(1.0);
        let ticks = (0..=((b - a) / every) as i32)
            .map(|k| 10f64.powf(a + every * k as f64))
            .collect();
        (10f64.powf(a), 10f64.powf(b), ticks)
    } else {
        let (lo, hi) = if hi > lo {
            (lo, hi)
        } else {
            (lo - 1.0, hi + 1.0)
        };
        let step = nice_step(hi - lo);
        let (a, b) = ((lo / step).floor() * step, (hi / step).ceil() * step);
        let ticks = (0..=((b - a) / step).round() as i32)
            .map(|k| a + step * k as f64)
            .collect();
        (a, b, ticks)
    }
}

fn label(v: f64, log: bool) -> String {
    if log {
        format!("1e{}", v.log10().round() as i32)
    } else if v == 0.0 {
        "0".into()
    } else if v.abs() >= 1e4 || v.abs() < 1e-2 {
        format!("{v:.1e}")
    } else {
        format!("{}", (v * 1e6).round() / 1e6)
    }
}

fn escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// A new SVG document `width` x `height` with a white background and the title centred at
/// `centre`.
fn open(width: f64, height: f64, centre: f64, title: &str) -> String {
    let mut svg = String::new();
    let _ = writeln!(
        svg,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} {height}" font-family="sans-serif" font-size="12">"#
    );
    let _ = writeln!(svg, r#"<rect width="100%" height="100%" fill="white"/>"#);
    let _ = writeln!(
        svg,
        r#"<text x="{centre}" y="28" font-size="15" text-anchor="middle">{}</text>"#,
        escape(title)
    );
    svg
}

/// Vertical grid lines with their labels below a plot area `plot_height` tall.
fn vertical_grid(
    svg: &mut String,
    ticks: &[f64],
    fx: &dyn Fn(f64) -> f64,
    plot_height: f64,
    log: bool,
) {
    for &t in ticks {
        let x = fx(t);
        let _ = writeln!(
            svg,
            r##"<line x1="{x:.1}" y1="{TOP}" x2="{x:.1}" y2="{:.1}" stroke="#e4e4e4"/><text x="{x:.1}" y="{:.1}" text-anchor="middle">{}</text>"##,
            TOP + plot_height,
            TOP + plot_height + 18.0,
            label(t, log)
        );
    }
}

impl Chart {
    /// The chart as an SVG document. Points that cannot be drawn on a log axis are skipped.
    pub fn render(&self) -> String {
        let usable = |&(x, y): &(f64, f64)| {
            x.is_finite() && y.is_finite() && (!self.log_x || x > 0.0) && (!self.log_y || y > 0.0)
        };
        let all: Vec<(f64, f64)> = self
            .series
            .iter()
            .flat_map(|s| s.points.iter().copied().filter(usable))
            .collect();
        let (xs, ys): (Vec<f64>, Vec<f64>) = all.iter().copied().unzip();
        let range = |v: &[f64]| {
            (
                v.iter().copied().fold(f64::INFINITY, f64::min),
                v.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            )
        };
        let ((x0, x1), (y0, y1)) = if all.is_empty() {
            ((1.0, 10.0), (0.0, 1.0))
        } else {
            (range(&xs), range(&ys))
        };
        let (xa, xb, xticks) = axis(x0, x1, self.log_x);
        let (ya, yb, yticks) = axis(y0, y1, self.log_y);
        let (pw, ph) = (WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM);
        let fx = |x: f64| {
            let t = if self.log_x {
                (x / xa).log10() / (xb / xa).log10()
            } else {
                (x - xa) / (xb - xa)
            };
            LEFT + t * pw
        };
        let fy = |y: f64| {
            let t = if self.log_y {
                (y / ya).log10() / (yb / ya).log10()
            } else {
                (y - ya) / (yb - ya)
            };
            TOP + (1.0 - t) * ph
        };
        // Only series with a point to draw get a line and a legend entry: a legend never names
        // a line that is not drawn (each keeps its colour, so charts stay comparable).
        let drawn: Vec<(usize, &Series)> = self
            .series
            .iter()
            .enumerate()
            .filter(|(_, s)| s.points.iter().any(usable))
            .collect();
        // The legend (sample 30 px, then the name) decides the right margin.
        let right = drawn
            .iter()
            .map(|(_, s)| 12.0 + 30.0 + text_width(&s.name, 12.0) + PAD)
            .fold(RIGHT, f64::max);
        let centre = LEFT + pw / 2.0;
        let x_label_half = text_width(&self.x_label, 12.0) / 2.0;
        let content = (LEFT + pw + right).max(centre + x_label_half + PAD);
        let (width, title_centre) = fit_title(content, centre, &self.title);
        let mut svg = open(width, HEIGHT, title_centre, &self.title);
        vertical_grid(&mut svg, &xticks, &fx, ph, self.log_x);
        for &t in &yticks {
            let y = fy(t);
            let _ = writeln!(
                svg,
                r##"<line x1="{LEFT}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" stroke="#e4e4e4"/><text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"##,
                LEFT + pw,
                LEFT - 6.0,
                y + 4.0,
                label(t, self.log_y)
            );
        }
        let _ = writeln!(
            svg,
            r##"<rect x="{LEFT}" y="{TOP}" width="{pw}" height="{ph}" fill="none" stroke="#333"/>"##
        );
        let _ = writeln!(
            svg,
            r#"<text x="{}" y="{}" text-anchor="middle">{}</text>"#,
            LEFT + pw / 2.0,
            HEIGHT - 15.0,
            escape(&self.x_label)
        );
        let _ = writeln!(
            svg,
            r#"<text transform="translate(20 {}) rotate(-90)" text-anchor="middle">{}</text>"#,
            TOP + ph / 2.0,
            escape(&self.y_label)
        );
        for (slot, &(k, s)) in drawn.iter().enumerate() {
            let colour = COLOURS[k % COLOURS.len()];
            let points: Vec<String> = s
                .points
                .iter()
                .filter(|p| usable(p))
                .map(|&(x, y)| format!("{:.1},{:.1}", fx(x), fy(y)))
                .collect();
            let dash = if s.dashed {
                r#" stroke-dasharray="6 4""#
            } else {
                ""
            };
            // A line through one point draws nothing: a lone point is a dot, and so is its
            // legend entry.
            let joined = s.joined && points.len() > 1;
            if joined {
                let _ = writeln!(
                    svg,
                    r#"<polyline data-series="{k}" fill="none" stroke="{colour}" stroke-width="2"{dash} points="{}"/>"#,
                    points.join(" ")
                );
            }
            if s.markers || !joined {
                for p in s.points.iter().filter(|p| usable(p)) {
                    let _ = writeln!(
                        svg,
                        r#"<circle data-series="{k}" cx="{:.1}" cy="{:.1}" r="3.5" fill="{colour}"/>"#,
                        fx(p.0),
                        fy(p.1)
                    );
                }
            }
            // Legend entry: a line sample for joined series, a dot otherwise.
            let (ly, kx) = (TOP + 14.0 + 20.0 * slot as f64, LEFT + pw + 12.0);
            let _ = writeln!(svg, r#"<g class="legend-entry" data-series="{k}">"#);
            if joined {
                let _ = writeln!(
                    svg,
                    r#"<line x1="{kx:.1}" y1="{ly:.1}" x2="{:.1}" y2="{ly:.1}" stroke="{colour}" stroke-width="2"{dash}/>"#,
                    kx + 24.0
                );
            } else {
                let _ = writeln!(
                    svg,
                    r#"<circle cx="{:.1}" cy="{ly:.1}" r="3.5" fill="{colour}"/>"#,
                    kx + 12.0
                );
            }
            let _ = writeln!(
                svg,
                r#"<text x="{:.1}" y="{:.1}">{}</text>"#,
                kx + 30.0,
                ly + 4.0,
                escape(&s.name)
            );
            svg.push_str("</g>\n");
        }
        svg.push_str("</svg>\n");
        svg
    }
}

/// Grouped horizontal bars: one group per category, one bar per series.
#[derive(Debug, Clone)]
pub struct Bars {
    pub title: String,
    pub value_label: String,
    pub categories: Vec<String>,
    /// `(name, one value per category)`; `None` draws no bar.
    pub series: Vec<(String, Vec<Option<f64>>)>,
}

impl Bars {
    pub fn render(&self) -> String {
        let values: Vec<f64> = self
            .series
            .iter()
            .flat_map(|(_, v)| v.iter().flatten().copied())
            .filter(|v| v.is_finite())
            .collect();
        let lo = values.iter().copied().fold(0.0, f64::min);
        let hi = values.iter().copied().fold(0.0, f64::max);
        let (xa, xb, ticks) = axis(lo, if hi > lo { hi } else { lo + 1.0 }, false);
        let bar_h = 14.0;
        let group_h = bar_h * self.series.len() as f64 + 14.0;
        // The longest category name (right-aligned 8 px before the axis) decides the left
        // margin, the longest legend entry (sample 20 px, then the name) the right one.
        let left = self
            .categories
            .iter()
            .map(|c| PAD + text_width(c, 12.0) + 8.0)
            .fold(170.0, f64::max);
        let right = self
            .series
            .iter()
            .map(|(name, _)| 12.0 + 20.0 + text_width(name, 12.0) + PAD)
            .fold(RIGHT, f64::max);
        let pw = WIDTH - 170.0 - RIGHT;
        let ph = group_h * self.categories.len() as f64;
        let height = TOP + ph + BOTTOM;
        let fx = |x: f64| left + (x - xa) / (xb - xa) * pw;
        let centre = left + pw / 2.0;
        let label_half = text_width(&self.value_label, 12.0) / 2.0;
        let content = (left + pw + right).max(centre + label_half + PAD);
        let (width, title_centre) = fit_title(content, centre, &self.title);
        let mut svg = open(width, height, title_centre, &self.title);
        vertical_grid(&mut svg, &ticks, &fx, ph, false);
        for (g, category) in self.categories.iter().enumerate() {
            let y0 = TOP + g as f64 * group_h + 7.0;
            let _ = writeln!(
                svg,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="end">{}</text>"#,
                left - 8.0,
                y0 + group_h / 2.0 - 3.0,
                escape(category)
            );
            for (s, (_, vals)) in self.series.iter().enumerate() {
                let Some(v) = vals.get(g).copied().flatten().filter(|v| v.is_finite()) else {
                    continue;
                };
                let (a, b) = (fx(v.min(0.0)), fx(v.max(0.0)));
                let _ = writeln!(
                    svg,
                    r#"<rect data-series="{s}" x="{a:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="{}"/>"#,
                    y0 + s as f64 * bar_h,
                    (b - a).max(0.5),
                    bar_h - 2.0,
                    COLOURS[s % COLOURS.len()]
                );
            }
        }
        let _ = writeln!(
            svg,
            r##"<line x1="{:.1}" y1="{TOP}" x2="{:.1}" y2="{:.1}" stroke="#333"/>"##,
            fx(0.0),
            fx(0.0),
            TOP + ph
        );
        let _ = writeln!(
            svg,
            r#"<text x="{:.1}" y="{:.1}" text-anchor="middle">{}</text>"#,
            left + pw / 2.0,
            height - 15.0,
            escape(&self.value_label)
        );
        // A legend entry only for a series with a bar drawn.
        let drawn = self
            .series
            .iter()
            .enumerate()
            .filter(|(_, (_, vals))| vals.iter().flatten().any(|v| v.is_finite()));
        for (slot, (s, (name, _))) in drawn.enumerate() {
            let (ly, kx) = (TOP + 14.0 + 20.0 * slot as f64, left + pw + 12.0);
            let _ = writeln!(
                svg,
                r#"<g class="legend-entry" data-series="{s}"><rect x="{kx:.1}" y="{:.1}" width="14" height="10" fill="{}"/><text x="{:.1}" y="{:.1}">{}</text></g>"#,
                ly - 6.0,
                COLOURS[s % COLOURS.len()],
                kx + 20.0,
                ly + 4.0,
                escape(name)
            );
        }
        svg.push_str("</svg>\n");
        svg
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_axis_spans_whole_decades_and_skips_unplottable_points() {
        let (a, b, ticks) = axis(3.0, 4.2e4, true);
        assert_eq!((a, b), (1.0, 1e5));
        assert_eq!(ticks.len(), 6);
        let chart = Chart {
            title: "t".into(),
            x_label: "x".into(),
            y_label: "y".into(),
            log_x: true,
            log_y: false,
            series: vec![Series {
                name: "s".into(),
                points: vec![(0.0, 1.0), (10.0, 0.5), (100.0, 0.9)],
                dashed: false,
                markers: true,
                joined: true,
            }],
        };
        let svg = chart.render();
        assert!(svg.starts_with("<svg") && svg.ends_with("</svg>\n"));
        assert_eq!(svg.matches("<circle").count(), 2);
        assert_eq!(svg.matches("<polyline").count(), 1);
    }

    #[test]
    fn linear_axis_uses_round_steps() {
        let (a, b, ticks) = axis(0.03, 0.97, false);
        assert_eq!((a, b), (0.0, 1.0));
        assert_eq!(ticks.len(), 6);
    }
}
