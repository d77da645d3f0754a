//! Network diagrams: states as discs whose area is proportional to their probability, channels
//! as arrows along their net flux (width by |flux|, colour by the work stored or spent per
//! jump along the arrow, on a diverging scale), added pathways dashed and labelled with their
//! rates; as SVG (with a legend and units) and in the DOT language of Graphviz.
//!
//! Presentation only: the caller hands over probabilities, fluxes, work labels and rates in
//! the model's units; nothing here solves, reads or writes anything. Positions come from
//! [`super::layout`] (stress majorization). Beyond [`DRAWN_LIMIT`] states the picture shows the
//! [`SUMMARY_STATES`] most probable states and says how much it left out; the DOT export always
//! holds every state and transition.

use super::layout::{self, Point};
use super::table::num;
use std::fmt::Write;

/// Largest network drawn in full.
pub const DRAWN_LIMIT: usize = 60;

/// States drawn (the most probable) when a network has more than [`DRAWN_LIMIT`].
pub const SUMMARY_STATES: usize = 40;

/// Radius in pixels below which a state also gets a dotted ring of this radius, so that it
/// stays visible while its filled disc keeps an area proportional to its probability.
pub const MIN_RADIUS: f64 = 5.0;

/// Estimated advance of one character, as a share of the font size (sans-serif, generous, so
/// that text never leaves the picture).
const CHAR_WIDTH: f64 = 0.62;

/// Margin around everything drawn, in pixels.
const MARGIN: f64 = 14.0;

/// One state of a diagram.
#[derive(Debug, Clone)]
pub struct Node {
    pub name: String,
    pub probability: f64,
}

/// One channel of a diagram, in the direction it is written (`from -> to`); the arrow is drawn
/// along the sign of `flux`.
#[derive(Debug, Clone)]
pub struct Arrow {
    /// Index of the channel in the drawn network (the model's channels, then added pathways).
    pub channel: usize,
    pub from: usize,
    pub to: usize,
    /// Net flux `from -> to`, per time unit.
    pub flux: f64,
    /// Round-off bound of `flux`: within it, no direction is drawn.
    pub roundoff: f64,
    /// Work stored per jump `from -> to`, in the model's energy unit.
    pub work: f64,
    /// The transition's label in the model file.
    pub label: Option<String>,
    /// For an added pathway: its rates `from -> to` and `to -> from`, per time unit.
    pub added: Option<(f64, f64)>,
}

impl Arrow {
    /// Whether the round-off bound leaves the flux's sign known.
    pub fn directed(&self) -> bool {
        self.flux.is_finite() && self.flux.abs() > self.roundoff
    }

    /// `(tail, head)` along the net flux.
    pub fn ends(&self) -> (usize, usize) {
        if self.flux < 0.0 && self.directed() {
            (self.to, self.from)
        } else {
            (self.from, self.to)
        }
    }

    /// Work stored per jump along the arrow.
    pub fn work_along(&self) -> f64 {
        if self.flux < 0.0 && self.directed() {
            -self.work
        } else {
            self.work
        }
    }

    /// Rates along and against the arrow, for an added pathway.
    fn rates_along(&self) -> Option<(f64, f64)> {
        let (f, b) = self.added?;
        Some(if self.flux < 0.0 && self.directed() {
            (b, f)
        } else {
            (f, b)
        })
    }
}

/// Everything a network diagram shows.
#[derive(Debug, Clone)]
pub struct Diagram {
    /// The model's title.
    pub title: String,
    /// What the picture shows, e.g. "baseline steady state".
    pub subject: String,
    pub energy_unit: String,
    pub time_unit: String,
    pub nodes: Vec<Node>,
    pub arrows: Vec<Arrow>,
    /// Lines printed under the legend (what the distribution is, what is not drawn).
    pub notes: Vec<String>,
}

/// Which states and arrows the picture shows.
struct Selection {
    /// Node indices drawn, in index order.
    shown: Vec<usize>,
    /// Position of each node in `shown`, if drawn.
    slot: Vec<Option<usize>>,
    /// Arrow indices drawn.
    arrows: Vec<usize>,
    /// The sentence saying what was left out, if anything.
    omitted: Option<String>,
}

/// A drawn arrow's geometry in pixels.
struct Curve {
    arrow: usize,
    start: Point,
    control: Point,
    end: Point,
    /// Arrowhead polygon, if the flux has a direction.
    head: Option<[Point; 3]>,
    width: f64,
    /// Where its rate label goes (added pathways).
    label_at: Point,
}

/// One text element with its estimated extent.
struct Text {
    x: f64,
    y: f64,
    size: f64,
    anchor: &'static str,
    class: &'static str,
    content: String,
}

impl Text {
    /// `(left, top, right, bottom)` by the font-metric estimate.
    fn extent(&self) -> [f64; 4] {
        let w = text_width(&self.content, self.size);
        let left = match self.anchor {
            "middle" => self.x - w / 2.0,
            "end" => self.x - w,
            _ => self.x,
        };
        [
            left,
            self.y - self.size,
            left + w,
            self.y + 0.35 * self.size,
        ]
    }
}

/// Estimated width of `text` at font size `size`.
fn text_width(text: &str, size: f64) -> f64 {
    CHAR_WIDTH * size * text.chars().count() as f64
}

/// XML escaping for text and attribute values.
pub fn xml_escape(text: &str) -> String {
    text.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
        .replace('\'', "&apos;")
}

/// A DOT quoted string (the quotes included): backslashes and quotes escaped, line breaks as
/// `\n`, so that any name is one valid ID.
pub fn dot_quoted(text: &str) -> String {
    let mut out = String::with_capacity(text.len() + 2);
    out.push('"');
    for c in text.chars() {
        match c {
            '"' => out.push_str("\\\""),
            '\\' => out.push_str("\\\\"),
            '\n' => out.push_str("\\n"),
            '\r' => {}
            c => out.push(c),
        }
    }
    out.push('"');
    out
}

/// The colour of work `t` in `-1..1` of the scale: red (spent) through grey to blue (stored).
pub fn diverging(t: f64) -> String {
    let t = if t.is_finite() {
        t.clamp(-1.0, 1.0)
    } else {
        0.0
    };
    let grey = [150.0, 150.0, 150.0];
    let end = if t < 0.0 {
        [194.0, 50.0, 29.0]
    } else {
        [31.0, 95.0, 190.0]
    };
    let a = t.abs();
    let c: Vec<u8> = (0..3)
        .map(|k| (grey[k] + a * (end[k] - grey[k])).round().clamp(0.0, 255.0) as u8)
        .collect();
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

impl Diagram {
    /// The diagram of `network` (the model's own channels first, then any added pathways) at
    /// the distribution `p`, with the net flux and its round-off bound of every channel
    /// (`fluxes`, `roundoff`, per time unit), converted to the model's units.
    #[allow(clippy::too_many_arguments)]
    pub fn of_network(
        model: &crate::model::Model,
        network: &crate::model::Network,
        p: &[f64],
        fluxes: &[f64],
        roundoff: &[f64],
        subject: String,
        notes: Vec<String>,
    ) -> Diagram {
        let own = model.network.channels.len();
        let nodes = model
            .state_names
            .iter()
            .zip(p)
            .map(|(name, &probability)| Node {
                name: name.clone(),
                probability,
            })
            .collect();
        let arrows = network
            .channels
            .iter()
            .enumerate()
            .map(|(c, ch)| Arrow {
                channel: c,
                from: ch.from,
                to: ch.to,
                flux: fluxes.get(c).copied().unwrap_or(0.0),
                roundoff: roundoff.get(c).copied().unwrap_or(0.0),
                work: model.units.from_kt(ch.work),
                label: model.transitions.get(c).and_then(|t| t.label.clone()),
                added: (c >= own).then_some((ch.forward, ch.backward)),
            })
            .collect();
        Diagram {
            title: model.title.clone(),
            subject,
            energy_unit: model.units.energy.name().to_string(),
            time_unit: model.units.time.name().to_string(),
            nodes,
            arrows,
            notes,
        }
    }

    /// The states and arrows the picture shows: all up to [`DRAWN_LIMIT`] states, else the
    /// [`SUMMARY_STATES`] most probable ones and the arrows between them.
    fn selection(&self) -> Selection {
        let n = self.nodes.len();
        let mut shown: Vec<usize> = (0..n).collect();
        if n > DRAWN_LIMIT {
            shown.sort_by(|&a, &b| {
                let (pa, pb) = (self.nodes[a].probability, self.nodes[b].probability);
                pb.total_cmp(&pa).then(a.cmp(&b))
            });
            shown.truncate(SUMMARY_STATES);
            shown.sort_unstable();
        }
        let mut slot = vec![None; n];
        for (k, &i) in shown.iter().enumerate() {
            slot[i] = Some(k);
        }
        let arrows: Vec<usize> = (0..self.arrows.len())
            .filter(|&a| {
                let r = &self.arrows[a];
                slot.get(r.from).copied().flatten().is_some()
                    && slot.get(r.to).copied().flatten().is_some()
            })
            .collect();
        let omitted = (shown.len() < n).then(|| {
            let left: f64 = (0..n)
                .filter(|&i| slot[i].is_none())
                .map(|i| self.nodes[i].probability)
                .sum();
            format!(
                "Summary: only the {} most probable of {n} states are drawn; {} states (total probability {}) and {} of {} arrows are left out (the DOT file holds them all).",
                shown.len(),
                n - shown.len(),
                super::table::sci(left),
                self.arrows.len() - arrows.len(),
                self.arrows.len()
            )
        });
        Selection {
            shown,
            slot,
            arrows,
            omitted,
        }
    }

    /// Largest probability of a drawn state.
    fn top_probability(&self, sel: &Selection) -> f64 {
        sel.shown
            .iter()
            .map(|&i| self.nodes[i].probability)
            .filter(|p| p.is_finite())
            .fold(0.0, f64::max)
    }

    /// Largest |net flux| of a drawn arrow with a direction.
    fn top_flux(&self, sel: &Selection) -> f64 {
        sel.arrows
            .iter()
            .map(|&a| &self.arrows[a])
            .filter(|r| r.directed())
            .map(|r| r.flux.abs())
            .fold(0.0, f64::max)
    }

    /// Largest |work per jump| of a drawn arrow.
    fn top_work(&self, sel: &Selection) -> f64 {
        sel.arrows
            .iter()
            .map(|&a| self.arrows[a].work.abs())
            .filter(|w| w.is_finite())
            .fold(0.0, f64::max)
    }

    /// Pixel positions of the drawn states, their disc radii (area proportional to
    /// probability) and visible radii (at least [`MIN_RADIUS`]), without overlaps.
    ///
    /// The layout follows the model's own channels only, so that a design's picture keeps the
    /// baseline's shape (its cycles stay cycles) and its added pathways show as chords.
    /// A summary measures the distances between its states in the whole network.
    fn positions(&self, sel: &Selection) -> (Vec<Point>, Vec<f64>, Vec<f64>) {
        let edges: Vec<(usize, usize)> = self
            .arrows
            .iter()
            .filter(|r| r.added.is_none())
            .map(|r| (r.from, r.to))
            .collect();
        let placed = layout::place_by(layout::distances_among(
            self.nodes.len(),
            &edges,
            &sel.shown,
        ));
        let span = placed
            .majorized
            .iter()
            .flat_map(|p| p.iter().map(|v| v.abs()))
            .fold(0.0, f64::max)
            * 2.0;
        // About 160 pixels per graph step; large layouts are scaled down to about 1000
        // pixels, but not below 45 pixels a step.
        let scale = if span * 160.0 > 1000.0 {
            (1000.0 / span).max(45.0)
        } else {
            160.0
        };
        let top = self.top_probability(sel);
        let largest = (0.36 * scale).min(40.0);
        let radius: Vec<f64> = sel
            .shown
            .iter()
            .map(|&i| {
                let p = self.nodes[i].probability;
                if top > 0.0 && p.is_finite() && p > 0.0 {
                    largest * (p / top).sqrt()
                } else {
                    0.0
                }
            })
            .collect();
        let visible: Vec<f64> = radius.iter().map(|r| r.max(MIN_RADIUS)).collect();
        let units: Vec<f64> = visible.iter().map(|r| r / scale).collect();
        let spread = layout::separate(&placed.majorized, &units, 30.0 / scale);
        let pixels = spread
            .iter()
            .map(|p| [p[0] * scale, p[1] * scale])
            .collect();
        (pixels, radius, visible)
    }

    /// Geometry of every drawn arrow: parallel channels between one pair bend apart; each
    /// starts and ends at the rims of its states.
    fn curves(&self, sel: &Selection, pos: &[Point], visible: &[f64]) -> Vec<Curve> {
        let top_flux = self.top_flux(sel);
        let mut groups: std::collections::BTreeMap<(usize, usize), Vec<usize>> =
            std::collections::BTreeMap::new();
        for &a in &sel.arrows {
            let r = &self.arrows[a];
            groups
                .entry((r.from.min(r.to), r.from.max(r.to)))
                .or_default()
                .push(a);
        }
        let mut curves = Vec::new();
        for ((lo, hi), members) in groups {
            let (Some(i), Some(j)) = (sel.slot[lo], sel.slot[hi]) else {
                continue;
            };
            let (a, b) = (pos[i], pos[j]);
            let length = layout::distance(a, b).max(1e-9);
            let normal = [-(b[1] - a[1]) / length, (b[0] - a[0]) / length];
            let m = members.len() as f64;
            for (k, &arrow) in members.iter().enumerate() {
                let offset = (k as f64 - (m - 1.0) / 2.0) * 30.0;
                let mid = [(a[0] + b[0]) / 2.0, (a[1] + b[1]) / 2.0];
                let control = [
                    mid[0] + 2.0 * offset * normal[0],
                    mid[1] + 2.0 * offset * normal[1],
                ];
                let apex = [mid[0] + offset * normal[0], mid[1] + offset * normal[1]];
                let side = if offset < 0.0 { -1.0 } else { 1.0 };
                let r = &self.arrows[arrow];
                let width = if r.directed() && top_flux > 0.0 {
                    1.0 + 7.0 * (r.flux.abs() / top_flux).sqrt()
                } else {
                    1.0
                };
                let (tail, head) = r.ends();
                let (Some(t), Some(h)) = (sel.slot[tail], sel.slot[head]) else {
                    continue;
                };
                let (p, q) = (pos[t], pos[h]);
                let toward = |from: Point, to: Point, by: f64| {
                    let d = layout::distance(from, to).max(1e-9);
                    [
                        from[0] + (to[0] - from[0]) * by / d,
                        from[1] + (to[1] - from[1]) * by / d,
                    ]
                };
                let start = toward(p, control, visible[t] + 2.0);
                let tip = toward(q, control, visible[h] + 2.0);
                let (end, head_shape) = if r.directed() {
                    let length = 6.0 + 1.5 * width;
                    let base = toward(tip, control, length);
                    let d = layout::distance(tip, base).max(1e-9);
                    let u = [(tip[0] - base[0]) / d, (tip[1] - base[1]) / d];
                    let half = 2.5 + width;
                    let left = [base[0] - u[1] * half, base[1] + u[0] * half];
                    let right = [base[0] + u[1] * half, base[1] - u[0] * half];
                    (base, Some([tip, left, right]))
                } else {
                    (tip, None)
                };
                curves.push(Curve {
                    arrow,
                    start,
                    control,
                    end,
                    head: head_shape,
                    width,
                    label_at: [
                        apex[0] + side * 12.0 * normal[0],
                        apex[1] + side * 12.0 * normal[1] + 4.0,
                    ],
                });
            }
        }
        curves
    }

    /// The rate label of an added pathway: its rates along and against the arrow.
    fn rate_label(&self, arrow: &Arrow) -> Option<String> {
        let (along, against) = arrow.rates_along()?;
        Some(format!(
            "k+ {} k- {} /{}",
            short(along),
            short(against),
            self.time_unit
        ))
    }

    /// The legend lines (after the swatches are placed): text only.
    fn legend_lines(&self, sel: &Selection) -> Vec<String> {
        let t = &self.time_unit;
        let largest = sel
            .shown
            .iter()
            .copied()
            .max_by(|&a, &b| {
                self.nodes[a]
                    .probability
                    .total_cmp(&self.nodes[b].probability)
                    .then(b.cmp(&a))
            })
            .map(|i| {
                format!(
                    " (largest: {} {})",
                    self.nodes[i].name,
                    num(self.nodes[i].probability)
                )
            })
            .unwrap_or_default();
        let mut lines = vec![
            format!("disc area proportional to probability{largest}; a dotted ring marks a state too small to see"),
            format!(
                "arrow: net flux, width 1 + 7 sqrt(|flux| / largest), largest {} per {t}",
                num(self.top_flux(sel))
            ),
        ];
        let w = self.top_work(sel);
        lines.push(if w > 0.0 {
            format!(
                "colour: work stored per jump along the arrow, -{0} (spent, red) to +{0} (stored, blue) {1}",
                num(w),
                self.energy_unit
            )
        } else {
            "colour: no arrow stores or spends work (grey)".to_string()
        });
        if sel.arrows.iter().any(|&a| self.arrows[a].added.is_some()) {
            lines.push(format!(
                "dashed: added pathway; k+ and k- are its rates along and against the arrow, per {t}"
            ));
        }
        if sel.arrows.iter().any(|&a| !self.arrows[a].directed()) {
            lines.push("line without a head: net flux zero within round-off".to_string());
        }
        lines
    }

    /// The diagram as an SVG document. Every element lies inside the view box: the picture is
    /// sized from the estimated extents of everything it draws.
    pub fn svg(&self) -> String {
        let sel = self.selection();
        let (pos, radius, visible) = self.positions(&sel);
        let curves = self.curves(&sel, &pos, &visible);
        let mut texts = Vec::new();
        // Graph-local extents: discs, their name labels, curve apexes and rate labels.
        let mut bounds = [
            f64::INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::NEG_INFINITY,
        ];
        let mut grow = |b: [f64; 4]| {
            bounds[0] = bounds[0].min(b[0]);
            bounds[1] = bounds[1].min(b[1]);
            bounds[2] = bounds[2].max(b[2]);
            bounds[3] = bounds[3].max(b[3]);
        };
        for (k, &i) in sel.shown.iter().enumerate() {
            let (p, r) = (pos[k], visible[k]);
            grow([p[0] - r, p[1] - r, p[0] + r, p[1] + r]);
            // Inside the disc when it holds the name, else below it.
            let inside = text_width(&self.nodes[i].name, 11.0) + 6.0 <= 2.0 * r;
            let label = Text {
                x: p[0],
                y: if inside { p[1] + 4.0 } else { p[1] + r + 13.0 },
                size: 11.0,
                anchor: "middle",
                class: "name",
                content: self.nodes[i].name.clone(),
            };
            grow(label.extent());
            texts.push(label);
        }
        for c in &curves {
            for p in [c.start, c.end, c.control] {
                // The control point bounds the curve (convex hull).
                grow([
                    p[0] - c.width,
                    p[1] - c.width,
                    p[0] + c.width,
                    p[1] + c.width,
                ]);
            }
            if let Some(label) = self.rate_label(&self.arrows[c.arrow]) {
                let t = Text {
                    x: c.label_at[0],
                    y: c.label_at[1],
                    size: 10.0,
                    anchor: "middle",
                    class: "rate",
                    content: label,
                };
                grow(t.extent());
                texts.push(t);
            }
        }
        if !bounds[0].is_finite() {
            bounds = [0.0, 0.0, 1.0, 1.0];
        }
        let header = self.header_lines();
        let mut notes: Vec<String> = self.notes.clone();
        notes.extend(sel.omitted.clone());
        let notes: Vec<String> = notes.iter().flat_map(|n| wrapped(n, 110)).collect();
        let legend = self.legend_lines(&sel);
        let header_height = 22.0 * header.len() as f64 + 10.0;
        let graph_width = bounds[2] - bounds[0];
        let legend_width = legend
            .iter()
            .map(|l| 70.0 + text_width(l, 11.0))
            .chain(notes.iter().map(|l| text_width(l, 11.0)))
            .chain(header.iter().map(|(l, size)| text_width(l, *size)))
            .fold(0.0, f64::max);
        let width = (graph_width.max(legend_width) + 2.0 * MARGIN)
            .max(360.0)
            .ceil();
        // Shift the graph so that its extent is centred below the header.
        let dx = (width - graph_width) / 2.0 - bounds[0];
        let dy = MARGIN + header_height - bounds[1];
        let legend_top = dy + bounds[3] + 24.0;
        let height = (legend_top + 18.0 * (legend.len() + notes.len()) as f64 + MARGIN).ceil();
        let shift = |p: Point| [p[0] + dx, p[1] + dy];

        let mut svg = String::new();
        let _ = writeln!(
            svg,
            r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} {height}" font-family="sans-serif" font-size="12">"#
        );
        let _ = writeln!(svg, r#"<rect width="100%" height="100%" fill="white"/>"#);
        for (k, (line, size)) in header.iter().enumerate() {
            write_text(
                &mut svg,
                &Text {
                    x: MARGIN,
                    y: MARGIN + 14.0 + 22.0 * k as f64,
                    size: *size,
                    anchor: "start",
                    class: if k == 0 { "title" } else { "subject" },
                    content: line.clone(),
                },
            );
        }
        let top_work = self.top_work(&sel);
        for c in &curves {
            self.write_curve(&mut svg, c, top_work, &shift);
        }
        for (k, &i) in sel.shown.iter().enumerate() {
            let p = shift(pos[k]);
            let node = &self.nodes[i];
            let name = xml_escape(&node.name);
            let _ = writeln!(
                svg,
                r##"<circle class="state" data-name="{name}" data-probability="{:e}" cx="{:.2}" cy="{:.2}" r="{:.6e}" fill="#cfe0f3" stroke="#1f5fa8" stroke-width="1"><title>{name}: probability {}</title></circle>"##,
                node.probability,
                p[0],
                p[1],
                radius[k],
                num(node.probability)
            );
            if radius[k] < MIN_RADIUS {
                let _ = writeln!(
                    svg,
                    r##"<circle class="ring" cx="{:.2}" cy="{:.2}" r="{MIN_RADIUS}" fill="none" stroke="#1f5fa8" stroke-width="1" stroke-dasharray="1.5 1.5"/>"##,
                    p[0], p[1]
                );
            }
        }
        for t in &texts {
            let p = shift([t.x, t.y]);
            write_text(
                &mut svg,
                &Text {
                    x: p[0],
                    y: p[1],
                    size: t.size,
                    anchor: t.anchor,
                    class: t.class,
                    content: t.content.clone(),
                },
            );
        }
        self.write_legend(&mut svg, &sel, &legend, &notes, legend_top);
        svg.push_str("</svg>\n");
        svg
    }

    /// Title and subject lines with their font sizes (long titles wrapped).
    fn header_lines(&self) -> Vec<(String, f64)> {
        let mut lines: Vec<(String, f64)> = wrapped(&self.title, 80)
            .into_iter()
            .map(|l| (l, 15.0))
            .collect();
        lines.extend(wrapped(&self.subject, 100).into_iter().map(|l| (l, 12.0)));
        lines
    }

    /// One arrow: the curve, its head and its tooltip.
    fn write_curve(
        &self,
        svg: &mut String,
        c: &Curve,
        top_work: f64,
        shift: &dyn Fn(Point) -> Point,
    ) {
        let r = &self.arrows[c.arrow];
        let colour = if top_work > 0.0 {
            diverging(r.work_along() / top_work)
        } else {
            diverging(0.0)
        };
        let (tail, head) = r.ends();
        let (s, k, e) = (shift(c.start), shift(c.control), shift(c.end));
        let mut class = String::from("arrow");
        if r.added.is_some() {
            class.push_str(" added");
        }
        if !r.directed() {
            class.push_str(" undirected");
        }
        let dash = if r.added.is_some() {
            r#" stroke-dasharray="7 4""#
        } else {
            ""
        };
        let tip = format!(
            "{} -> {}{}: net flux {} per {}, work {} {} per jump",
            self.nodes[tail].name,
            self.nodes[head].name,
            r.label
                .as_ref()
                .map(|l| format!(" ({l})"))
                .unwrap_or_default(),
            num(r.flux.abs()),
            self.time_unit,
            num(r.work_along()),
            self.energy_unit
        );
        let _ = writeln!(
            svg,
            r#"<path class="{class}" data-channel="{}" data-from="{}" data-to="{}" data-flux="{:e}" data-work="{:e}" d="M {:.2} {:.2} Q {:.2} {:.2} {:.2} {:.2}" fill="none" stroke="{colour}" stroke-width="{:.4}"{dash}><title>{}</title></path>"#,
            r.channel,
            xml_escape(&self.nodes[tail].name),
            xml_escape(&self.nodes[head].name),
            r.flux.abs(),
            r.work_along(),
            s[0],
            s[1],
            k[0],
            k[1],
            e[0],
            e[1],
            c.width,
            xml_escape(&tip)
        );
        if let Some(h) = c.head {
            let points: Vec<String> = h
                .iter()
                .map(|&p| {
                    let p = shift(p);
                    format!("{:.2},{:.2}", p[0], p[1])
                })
                .collect();
            let _ = writeln!(
                svg,
                r#"<polygon class="head" data-channel="{}" points="{}" fill="{colour}"/>"#,
                r.channel,
                points.join(" ")
            );
        }
    }

    /// The legend below the graph: a swatch beside each line, then the notes.
    fn write_legend(
        &self,
        svg: &mut String,
        sel: &Selection,
        legend: &[String],
        notes: &[String],
        top: f64,
    ) {
        let x = MARGIN;
        for (k, line) in legend.iter().enumerate() {
            let y = top + 18.0 * k as f64;
            let mid = y - 4.0;
            match k {
                0 => {
                    let _ = writeln!(
                        svg,
                        r##"<circle cx="{:.1}" cy="{mid:.1}" r="6" fill="#cfe0f3" stroke="#1f5fa8"/>"##,
                        x + 20.0
                    );
                }
                1 => {
                    let _ = writeln!(
                        svg,
                        r##"<line x1="{x:.1}" y1="{mid:.1}" x2="{:.1}" y2="{mid:.1}" stroke="#777" stroke-width="4"/>"##,
                        x + 50.0
                    );
                }
                2 => {
                    for s in 0..7 {
                        let t = (s as f64 - 3.0) / 3.0;
                        let colour = if self.top_work(sel) > 0.0 {
                            diverging(t)
                        } else {
                            diverging(0.0)
                        };
                        let _ = writeln!(
                            svg,
                            r#"<rect x="{:.1}" y="{:.1}" width="8" height="10" fill="{colour}"/>"#,
                            x + 8.0 * s as f64,
                            mid - 5.0
                        );
                    }
                }
                _ if line.starts_with("dashed") => {
                    let _ = writeln!(
                        svg,
                        r##"<line x1="{x:.1}" y1="{mid:.1}" x2="{:.1}" y2="{mid:.1}" stroke="#777" stroke-width="2" stroke-dasharray="7 4"/>"##,
                        x + 50.0
                    );
                }
                _ => {
                    let _ = writeln!(
                        svg,
                        r##"<line x1="{x:.1}" y1="{mid:.1}" x2="{:.1}" y2="{mid:.1}" stroke="#999" stroke-width="1"/>"##,
                        x + 50.0
                    );
                }
            }
            write_text(
                svg,
                &Text {
                    x: x + 70.0,
                    y,
                    size: 11.0,
                    anchor: "start",
                    class: "legend",
                    content: line.clone(),
                },
            );
        }
        for (k, line) in notes.iter().enumerate() {
            write_text(
                svg,
                &Text {
                    x,
                    y: top + 18.0 * (legend.len() + k) as f64,
                    size: 11.0,
                    anchor: "start",
                    class: "note",
                    content: line.clone(),
                },
            );
        }
    }

    /// The whole network in the DOT language: every state and every transition (also beyond
    /// [`DRAWN_LIMIT`]), arrows along the net flux, with the diagram's positions (points) for
    /// the states it draws, so that `neato -n2` reproduces the layout.
    pub fn dot(&self) -> String {
        let sel = self.selection();
        let (pos, _, visible) = self.positions(&sel);
        let top_flux = self.top_flux(&sel);
        let top_work = self.top_work(&sel);
        let mut out = String::new();
        let _ = writeln!(
            out,
            "// {}: {}. Written by ergopath; render with `neato -n2 -Tsvg` to keep its layout.",
            self.title.replace(['\n', '\r'], " "),
            self.subject.replace(['\n', '\r'], " ")
        );
        out.push_str("digraph network {\n");
        let _ = writeln!(
            out,
            "  graph [label={}, labelloc=t, fontname=\"sans-serif\"];",
            dot_quoted(&format!("{}: {}", self.title, self.subject))
        );
        out.push_str("  node [shape=circle, fixedsize=true, style=filled, fillcolor=\"#cfe0f3\", color=\"#1f5fa8\", fontname=\"sans-serif\", fontsize=10];\n");
        out.push_str("  edge [fontname=\"sans-serif\", fontsize=9];\n");
        for (i, node) in self.nodes.iter().enumerate() {
            let place = sel.slot[i].map_or(String::new(), |k| {
                format!(
                    ", pos=\"{:.1},{:.1}\", width={:.3}",
                    pos[k][0],
                    -pos[k][1],
                    2.0 * visible[k] / 72.0
                )
            });
            let _ = writeln!(
                out,
                "  {} [tooltip={}{place}];",
                dot_quoted(&node.name),
                dot_quoted(&format!("probability {}", num(node.probability)))
            );
        }
        for r in &self.arrows {
            let (tail, head) = r.ends();
            let width = if r.directed() && top_flux > 0.0 {
                1.0 + 7.0 * (r.flux.abs() / top_flux).sqrt()
            } else {
                1.0
            };
            let colour = if top_work > 0.0 {
                diverging(r.work_along() / top_work)
            } else {
                diverging(0.0)
            };
            let mut attrs = vec![
                format!("penwidth={width:.3}"),
                format!("color=\"{colour}\""),
                format!(
                    "tooltip={}",
                    dot_quoted(&format!(
                        "net flux {} per {}, work {} {} per jump",
                        num(r.flux.abs()),
                        self.time_unit,
                        num(r.work_along()),
                        self.energy_unit
                    ))
                ),
            ];
            if let Some(label) = self.rate_label(r) {
                attrs.push("style=dashed".into());
                attrs.push(format!("label={}", dot_quoted(&label)));
            } else if let Some(label) = &r.label {
                attrs.push(format!("label={}", dot_quoted(label)));
            }
            if !r.directed() {
                attrs.push("dir=none".into());
            }
            let _ = writeln!(
                out,
                "  {} -> {} [{}];",
                dot_quoted(&self.nodes[tail].name),
                dot_quoted(&self.nodes[head].name),
                attrs.join(", ")
            );
        }
        out.push_str("}\n");
        out
    }

    /// A short text form: what the picture shows, the legend, the notes, and every drawn arrow
    /// with its net flux and work per jump.
    pub fn text(&self) -> String {
        let sel = self.selection();
        let mut out = format!("Network diagram: {}\n  {}\n\n", self.title, self.subject);
        let added = sel
            .arrows
            .iter()
            .filter(|&&a| self.arrows[a].added.is_some())
            .count();
        let _ = writeln!(
            out,
            "  {} states and {} arrows drawn ({added} added pathways)",
            sel.shown.len(),
            sel.arrows.len()
        );
        for line in self
            .legend_lines(&sel)
            .iter()
            .chain(&self.notes)
            .chain(&sel.omitted)
        {
            let _ = writeln!(out, "{}", super::table::wrap(line, "  ", 80));
        }
        out.push('\n');
        let mut table = super::table::Table::new(&[
            ("arrow (along net flux)", super::table::Align::Left),
            ("net flux", super::table::Align::Right),
            ("work per jump", super::table::Align::Right),
            ("added rates k+ / k-", super::table::Align::Right),
        ]);
        for &a in &sel.arrows {
            let r = &self.arrows[a];
            let (tail, head) = r.ends();
            let arrow = if r.directed() { "->" } else { "--" };
            table.row(vec![
                format!(
                    "{} {arrow} {}{}",
                    self.nodes[tail].name,
                    self.nodes[head].name,
                    r.label
                        .as_ref()
                        .map(|l| format!(" ({l})"))
                        .unwrap_or_default()
                ),
                super::table::bounded(r.flux.abs(), r.roundoff),
                num(r.work_along()),
                r.rates_along()
                    .map(|(f, b)| format!("{} / {}", num(f), num(b)))
                    .unwrap_or_else(|| "-".into()),
            ]);
        }
        let _ = writeln!(
            out,
            "  net flux per {}, work in {}\n",
            self.time_unit, self.energy_unit
        );
        out.push_str(&table.render());
        out
    }
}

/// A rate in three significant digits (labels on the picture; the text form has five).
pub fn short(x: f64) -> String {
    let a = x.abs();
    if x == 0.0 || !x.is_finite() {
        num(x)
    } else if (0.01..1e4).contains(&a) {
        let digits = (2 - a.log10().floor() as i32).clamp(0, 4) as usize;
        format!("{x:.digits$}")
    } else {
        format!("{x:.2e}")
    }
}

/// `text` broken into lines of at most about `width` characters (at least one line).
fn wrapped(text: &str, width: usize) -> Vec<String> {
    super::table::wrap(text, "", width)
        .lines()
        .map(str::to_string)
        .collect()
}

/// Writes one text element (escaped).
fn write_text(svg: &mut String, t: &Text) {
    let halo = if t.class == "rate" || t.class == "name" {
        r#" paint-order="stroke" stroke="white" stroke-width="3""#
    } else {
        ""
    };
    let _ = writeln!(
        svg,
        r#"<text class="{}" x="{:.2}" y="{:.2}" font-size="{}" text-anchor="{}"{halo}>{}</text>"#,
        t.class,
        t.x,
        t.y,
        t.size,
        t.anchor,
        xml_escape(&t.content)
    );
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escapes_names_for_xml_and_dot() {
        assert_eq!(xml_escape(r#"a"b<&>'"#), "a&quot;b&lt;&amp;&gt;&apos;");
        assert_eq!(dot_quoted("a\"b\\c\nd"), r#""a\"b\\c\nd""#);
    }

    #[test]
    fn diverging_scale_ends_and_middle() {
        assert_eq!(diverging(0.0), "#969696");
        assert_eq!(diverging(1.0), "#1f5fbe");
        assert_eq!(diverging(-1.0), "#c2321d");
    }
}
