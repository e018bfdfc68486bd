//! Plain-text tables for people: columns padded to their widest cell, numbers right-aligned.
//!
//! In: a header row and rows of cells (strings). Out: text with one line per row and a rule
//! under the header. No colours, no box drawing: the output pastes cleanly into notes and mail.

/// A table under construction.
#[derive(Clone, Debug, Default)]
pub struct Table {
    headers: Vec<String>,
    rows: Vec<Vec<String>>,
    /// Rows after which a rule is drawn (e.g. before a total line).
    rules_after: Vec<usize>,
}

impl Table {
    pub fn new<S: Into<String>>(headers: impl IntoIterator<Item = S>) -> Table {
        Table {
            headers: headers.into_iter().map(Into::into).collect(),
            ..Table::default()
        }
    }

    pub fn row<S: Into<String>>(&mut self, cells: impl IntoIterator<Item = S>) {
        self.rows.push(cells.into_iter().map(Into::into).collect());
    }

    /// Draws a rule under the rows added so far.
    pub fn rule(&mut self) {
        self.rules_after.push(self.rows.len());
    }

    pub fn render(&self) -> String {
        let ncol = self.headers.len();
        let mut width: Vec<usize> = self.headers.iter().map(|h| h.chars().count()).collect();
        for r in &self.rows {
            for (i, c) in r.iter().enumerate().take(ncol) {
                width[i] = width[i].max(c.chars().count());
            }
        }
        let numeric = |s: &str| {
            s.parse::<f64>().is_ok()
                || s.ends_with('%') && s.trim_end_matches('%').parse::<f64>().is_ok()
        };
        let line = |cells: &[String]| {
            let mut out = String::new();
            for (i, w) in width.iter().enumerate() {
                let c = cells.get(i).map(String::as_str).unwrap_or("");
                let pad = w - c.chars().count();
                if i > 0 {
                    out.push_str("  ");
                }
                if numeric(c) {
                    out.push_str(&" ".repeat(pad));
                    out.push_str(c);
                } else {
                    out.push_str(c);
                    out.push_str(&" ".repeat(pad));
                }
            }
            out.trim_end().to_string() + "\n"
        };
        let rule = width
            .iter()
            .map(|w| "-".repeat(*w))
            .collect::<Vec<_>>()
            .join("  ")
            + "\n";
        let mut out = line(&self.headers);
        out.push_str(&rule);
        for (i, r) in self.rows.iter().enumerate() {
            if self.rules_after.contains(&i) && i > 0 {
                out.push_str(&rule);
            }
            out.push_str(&line(r));
        }
        out
    }
}

/// Formats a small error for a table: `0` stays `0`, else three significant digits in
/// scientific notation.
pub fn sci(x: f64) -> String {
    if x == 0.0 {
        "0".to_string()
    } else {
        format!("{x:.2e}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_align_and_numbers_go_right() {
        let mut t = Table::new(["id", "depth"]);
        t.row(["k01-re", "12"]);
        t.row(["k10-im", "1234"]);
        t.rule();
        t.row(["total", "1246"]);
        assert_eq!(t.render(), "id      depth\n------  -----\nk01-re     12\nk10-im   1234\n------  -----\ntotal    1246\n");
    }
}
