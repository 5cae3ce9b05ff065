//! Aligned plain-text tables and number formatting for the text report.

/// Column alignment.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Align {
    /// Left-aligned (labels).
    Left,
    /// Right-aligned (numbers).
    Right,
}

/// A table of strings rendered with padded columns.
#[derive(Debug, Clone)]
pub struct Table {
    headers: Vec<String>,
    align: Vec<Align>,
    rows: Vec<Vec<String>>,
}

impl Table {
    /// A table with these column headers and alignments.
    pub fn new(columns: &[(&str, Align)]) -> Table {
        Table {
            headers: columns.iter().map(|(h, _)| h.to_string()).collect(),
            align: columns.iter().map(|(_, a)| *a).collect(),
            rows: Vec::new(),
        }
    }

    /// Appends a row (missing cells are blank).
    pub fn row(&mut self, cells: Vec<String>) {
        self.rows.push(cells);
    }

    /// The table as lines joined by newlines, indented by `indent` spaces.
    pub fn render(&self, indent: usize) -> String {
        let ncol = self.headers.len();
        let width = |s: &str| s.chars().count();
        let mut widths: Vec<usize> = self.headers.iter().map(|h| width(h)).collect();
        for r in &self.rows {
            for (i, c) in r.iter().enumerate().take(ncol) {
                widths[i] = widths[i].max(width(c));
            }
        }
        let pad = " ".repeat(indent);
        let line = |cells: &[String]| {
            let parts: Vec<String> = (0..ncol)
                .map(|i| {
                    let c = cells.get(i).map(String::as_str).unwrap_or("");
                    let fill = " ".repeat(widths[i] - width(c));
                    match self.align[i] {
                        Align::Left => format!("{c}{fill}"),
                        Align::Right => format!("{fill}{c}"),
                    }
                })
                .collect();
            format!("{pad}{}", parts.join("  ").trim_end())
        };
        let mut out = vec![line(&self.headers)];
        out.extend(self.rows.iter().map(|r| line(r)));
        out.join("\n")
    }
}

/// A number with `sig` significant digits: fixed notation for magnitudes in
/// [1e-4, 1e7), scientific outside; `—` for a missing value.
pub fn num(x: Option<f64>, sig: usize) -> String {
    let Some(x) = x else { return "—".into() };
    if x == 0.0 {
        return "0".into();
    }
    let mag = x.abs().log10().floor() as i32;
    if !(-4..7).contains(&mag) {
        return format!("{:.*e}", sig.saturating_sub(1), x);
    }
    let decimals = (sig as i32 - 1 - mag).max(0) as usize;
    format!("{x:.decimals$}")
}

/// A p-value: 4 significant digits, scientific below 1e-4, `—` when missing.
pub fn p_value(p: Option<f64>) -> String {
    match p {
        Some(p) if p > 0.0 && p < 1e-4 => format!("{p:.2e}"),
        other => num(other, 4),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_formatted_by_significant_digits() {
        assert_eq!(num(Some(12.345678), 4), "12.35");
        assert_eq!(num(Some(0.0080096), 3), "0.00801");
        assert_eq!(num(Some(123456789.0), 4), "1.235e8");
        assert_eq!(num(None, 4), "—");
        assert_eq!(p_value(Some(2.79e-7)), "2.79e-7");
        assert_eq!(p_value(Some(0.3658775)), "0.3659");
    }

    #[test]
    fn tables_align_columns() {
        let mut t = Table::new(&[("term", Align::Left), ("F", Align::Right)]);
        t.row(vec!["A".into(), "7.97".into()]);
        t.row(vec!["A:B".into(), "1.04".into()]);
        assert_eq!(t.render(0), "term     F\nA     7.97\nA:B   1.04");
    }
}
