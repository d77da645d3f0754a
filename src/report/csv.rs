//! CSV tables: one writer for every `--csv` table and saved `.csv` file, so that headers, units,
//! quoting and numbers follow one rule across commands.
//!
//! - Header: one row; a dimensional column is written `name [unit]` (`power [pN nm/s]`,
//!   `flux [1/s]`), a dimensionless one `name` alone ([`with_unit`]).
//! - Numbers ([`number`]): the shortest text that reads back as the same double (Rust's
//!   round-trip formatting, at most 17 significant digits), positional for
//!   `1e-4 <= |x| < 1e15` (`0.5`, `1000`, `65.763`), else scientific (`2.2673e-18`, `1e20`);
//!   zero is `0` (also a negative zero); non-finite values are `inf`, `-inf` and `nan`, which
//!   Python's `float` and pandas read. A value that is absent (not computed, not applicable) is
//!   an empty cell; [`Cell::Missing`] and `None` numbers write it.
//! - Text cells are escaped by RFC 4180 (quoted when they hold a comma, a quote or a line
//!   break).
//!
//! Presentation only: no physics, no I/O.

/// One cell of a row.
#[derive(Debug, Clone, PartialEq)]
pub enum Cell {
    Number(f64),
    Integer(i64),
    Text(String),
    /// An absent value: an empty cell.
    Missing,
}

impl From<f64> for Cell {
    fn from(x: f64) -> Self {
        Cell::Number(x)
    }
}

impl From<Option<f64>> for Cell {
    fn from(x: Option<f64>) -> Self {
        x.map_or(Cell::Missing, Cell::Number)
    }
}

impl From<usize> for Cell {
    fn from(n: usize) -> Self {
        Cell::Integer(i64::try_from(n).unwrap_or(i64::MAX))
    }
}

impl From<u64> for Cell {
    fn from(n: u64) -> Self {
        Cell::Integer(i64::try_from(n).unwrap_or(i64::MAX))
    }
}

impl From<bool> for Cell {
    fn from(b: bool) -> Self {
        Cell::Text(b.to_string())
    }
}

impl From<&str> for Cell {
    fn from(s: &str) -> Self {
        Cell::Text(s.to_string())
    }
}

impl From<String> for Cell {
    fn from(s: String) -> Self {
        Cell::Text(s)
    }
}

impl From<&String> for Cell {
    fn from(s: &String) -> Self {
        Cell::Text(s.clone())
    }
}

impl From<Option<&str>> for Cell {
    fn from(s: Option<&str>) -> Self {
        s.map_or(Cell::Missing, |s| Cell::Text(s.to_string()))
    }
}

impl Cell {
    fn write(&self, out: &mut String) {
        match self {
            Cell::Number(x) => out.push_str(&number(*x)),
            Cell::Integer(n) => out.push_str(&n.to_string()),
            Cell::Text(s) => out.push_str(&field(s)),
            Cell::Missing => {}
        }
    }
}

/// A CSV table being written: the header, then rows of the same width.
#[derive(Debug, Clone)]
pub struct Csv {
    columns: usize,
    out: String,
}

impl Csv {
    /// A table with these header cells (see [`with_unit`]).
    pub fn new<S: AsRef<str>>(header: &[S]) -> Self {
        let mut out = String::new();
        for (i, h) in header.iter().enumerate() {
            if i > 0 {
                out.push(',');
            }
            out.push_str(&field(h.as_ref()));
        }
        out.push('\n');
        Self {
            columns: header.len(),
            out,
        }
    }

    /// Appends one row; it must have as many cells as the header.
    pub fn row(&mut self, cells: Vec<Cell>) {
        debug_assert_eq!(cells.len(), self.columns, "a CSV row of the wrong width");
        for (i, c) in cells.iter().enumerate() {
            if i > 0 {
                self.out.push(',');
            }
            c.write(&mut self.out);
        }
        self.out.push('\n');
    }

    /// The table's text.
    pub fn finish(self) -> String {
        self.out
    }
}

/// A header cell: `name [unit]`.
pub fn with_unit(name: &str, unit: &str) -> String {
    format!("{name} [{unit}]")
}

/// The unit of a rate in time unit `time` (`1/s`, `1/ms`).
pub fn per(time: &str) -> String {
    format!("1/{time}")
}

/// `x` as every CSV writes a number (module comment): shortest round-trip digits, positional
/// for `1e-4 <= |x| < 1e15`, else scientific.
pub fn number(x: f64) -> String {
    if x == 0.0 {
        return "0".into();
    }
    if x.is_nan() {
        return "nan".into();
    }
    if x.is_infinite() {
        return if x > 0.0 { "inf" } else { "-inf" }.into();
    }
    if (1e-4..1e15).contains(&x.abs()) {
        format!("{x}")
    } else {
        format!("{x:e}")
    }
}

/// Escapes one text field (RFC 4180).
pub fn field(text: &str) -> String {
    if text.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", text.replace('"', "\"\""))
    } else {
        text.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_shortest_round_trip_in_one_format() {
        assert_eq!(number(1000.0), "1000");
        assert_eq!(number(0.5), "0.5");
        assert_eq!(number(65.763), "65.763");
        assert_eq!(number(2.2673e-18), "2.2673e-18");
        assert_eq!(number(0.074_8), "0.0748");
        assert_eq!(number(1e-4), "0.0001");
        assert_eq!(number(9.9e-5), "9.9e-5");
        assert_eq!(number(1e15), "1e15");
        assert_eq!(number(999_999_999_999_999.0), "999999999999999");
        assert_eq!(number(-0.0), "0");
        assert_eq!(number(-3.5e-300), "-3.5e-300");
        assert_eq!(number(f64::INFINITY), "inf");
        assert_eq!(number(f64::NEG_INFINITY), "-inf");
        assert_eq!(number(f64::NAN), "nan");
        // Every finite double reads back bit for bit.
        for x in [
            0.1 + 0.2,
            std::f64::consts::PI,
            1.0 / 3.0 * 1e-9,
            f64::MAX,
            f64::MIN_POSITIVE,
            5e-324,
            123_456_789.123_456_78,
        ] {
            assert_eq!(number(x).parse::<f64>().unwrap(), x, "{x:e}");
            let digits = number(x)
                .split('e')
                .next()
                .unwrap()
                .chars()
                .filter(char::is_ascii_digit)
                .collect::<String>();
            assert!(digits.trim_start_matches('0').len() <= 17, "{}", number(x));
        }
    }

    #[test]
    fn tables_quote_text_and_leave_missing_cells_empty() {
        let mut t = Csv::new(&["name", &with_unit("power", "pN nm/s"), "share"]);
        t.row(vec!["a, \"b\"".into(), 1.5.into(), Cell::from(None::<f64>)]);
        t.row(vec![Cell::from("c"), Cell::Integer(3), Cell::Missing]);
        assert_eq!(
            t.finish(),
            "name,power [pN nm/s],share\n\"a, \"\"b\"\"\",1.5,\n c,3,\n".replace("\n c", "\nc")
        );
    }
}
