//! Plain-text tables and number formatting for terminal reports (80 columns).
//!
//! Owns layout only: it receives strings and numbers, never models or solver results.

/// Column alignment.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    Left,
    Right,
}

/// A simple table: a header row, aligned columns separated by two spaces, a rule under the
/// header.
#[derive(Debug, Clone)]
pub struct Table {
    header: Vec<String>,
    align: Vec<Align>,
    rows: Vec<Vec<String>>,
}

impl Table {
    pub fn new(columns: &[(&str, Align)]) -> Self {
        Self {
            header: columns.iter().map(|(h, _)| h.to_string()).collect(),
            align: columns.iter().map(|(_, a)| *a).collect(),
            rows: Vec::new(),
        }
    }

    pub fn row(&mut self, cells: Vec<String>) {
        debug_assert_eq!(cells.len(), self.header.len());
        self.rows.push(cells);
    }

    pub fn render(&self) -> String {
        let width: Vec<usize> = (0..self.header.len())
            .map(|c| {
                self.rows
                    .iter()
                    .map(|r| r[c].chars().count())
                    .chain(std::iter::once(self.header[c].chars().count()))
                    .max()
                    .unwrap_or(0)
            })
            .collect();
        let line = |cells: &[String]| {
            let parts: Vec<String> = cells
                .iter()
                .enumerate()
                .map(|(c, text)| {
                    let pad = width[c] - text.chars().count();
                    match self.align[c] {
                        Align::Left => format!("{text}{}", " ".repeat(pad)),
                        Align::Right => format!("{}{text}", " ".repeat(pad)),
                    }
                })
                .collect();
            format!("  {}", parts.join("  ").trim_end())
        };
        let mut out = line(&self.header);
        out.push('\n');
        let total: usize = width.iter().sum::<usize>() + 2 * (width.len().saturating_sub(1));
        out.push_str(&format!("  {}\n", "-".repeat(total)));
        for r in &self.rows {
            out.push_str(&line(r));
            out.push('\n');
        }
        out
    }
}

/// A number in at most about 11 characters with 5 significant digits: fixed notation for
/// moderate magnitudes, scientific otherwise.
pub fn num(x: f64) -> String {
    if x == 0.0 {
        return "0".into();
    }
    if !x.is_finite() {
        return format!("{x}");
    }
    let a = x.abs();
    if (1e-3..1e5).contains(&a) {
        let digits = (4 - a.log10().floor() as i32).clamp(0, 7) as usize;
        format!("{x:.digits$}")
    } else {
        format!("{x:.4e}")
    }
}

/// A probability or other positive quantity: always scientific, so tiny values stay visible.
pub fn sci(x: f64) -> String {
    format!("{x:.5e}")
}

/// Share of a figure that its round-off bound may reach before it is no longer shown as a
/// plain number.
pub const DETERMINED_SHARE: f64 = 0.01;

/// Whether `roundoff` leaves `value` known to [`DETERMINED_SHARE`] of itself.
pub fn determined(value: f64, roundoff: f64) -> bool {
    value.is_finite() && roundoff.is_finite() && roundoff <= DETERMINED_SHARE * value.abs()
}

/// `value` as [`num`] when its round-off bound is within [`DETERMINED_SHARE`] of it; otherwise
/// it is marked: `< X (not determined)` when the bound covers the value itself, else
/// `V +- X (not determined to 1%)`.
pub fn bounded(value: f64, roundoff: f64) -> String {
    if determined(value, roundoff) {
        num(value)
    } else if roundoff >= value.abs() || roundoff.is_nan() {
        format!("|x| < {} (round-off)", num(roundoff))
    } else {
        format!("{} +- {} (not determined to 1%)", num(value), num(roundoff))
    }
}

/// `text` broken at spaces into lines of at most `width` characters, each starting with
/// `indent`, joined by newlines (a single word longer than the width stays whole).
pub fn wrap(text: &str, indent: &str, width: usize) -> String {
    let mut lines: Vec<String> = Vec::new();
    let mut line = String::from(indent);
    for word in text.split(' ') {
        if line.len() > indent.len() && line.len() + 1 + word.len() > width {
            lines.push(std::mem::replace(&mut line, String::from(indent)));
        }
        if line.len() > indent.len() {
            line.push(' ');
        }
        line.push_str(word);
    }
    lines.push(line);
    lines.join("\n")
}

/// A fraction as a percentage with one decimal.
pub fn percent(x: f64) -> String {
    format!("{:.1}%", 100.0 * x)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_off_marks_undetermined_figures() {
        assert_eq!(bounded(8.0077e-12, 1e-20), "8.0077e-12");
        assert_eq!(bounded(8.0e-12, 2.0e-11), "|x| < 2.0000e-11 (round-off)");
        assert_eq!(
            bounded(1.0, 0.05),
            "1.0000 +- 0.050000 (not determined to 1%)"
        );
        assert!(!determined(f64::NAN, 0.0));
    }

    #[test]
    fn numbers_keep_five_significant_digits() {
        assert_eq!(num(1.234567), "1.2346");
        assert_eq!(num(-123.4567), "-123.46");
        assert_eq!(num(1.5e-7), "1.5000e-7");
        assert_eq!(num(0.0), "0");
    }

    #[test]
    fn wrap_breaks_at_spaces_within_the_width() {
        assert_eq!(wrap("aa bb cc", "  ", 7), "  aa bb\n  cc");
        assert_eq!(wrap("abcdefghij", "  ", 5), "  abcdefghij");
    }

    #[test]
    fn table_aligns_columns() {
        let mut t = Table::new(&[("name", Align::Left), ("value", Align::Right)]);
        t.row(vec!["a".into(), "1".into()]);
        t.row(vec!["long".into(), "22".into()]);
        assert_eq!(
            t.render(),
            "  name  value\n  -----------\n  a         1\n  long     22\n"
        );
    }
}
