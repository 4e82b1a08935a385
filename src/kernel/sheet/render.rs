//! Plain-text rendering of a sheet for a terminal or a log: aligned
//! columns, numbers to a few significant digits lined up on the decimal
//! point, long sheets cut to their first and last rows. Pure string work —
//! the kernel prints nothing itself.

use std::fmt;

use super::{CellRef, Column, Sheet};

/// How [`Sheet::render`] lays a sheet out.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RenderOptions {
    /// Rows shown from the top when the sheet is cut.
    pub head: usize,
    /// Rows shown from the bottom when the sheet is cut.
    pub tail: usize,
    /// Significant digits of numbers (at least 1).
    pub significant: usize,
    /// Longest text shown in a cell, in characters; longer texts end in `…`.
    pub max_text_width: usize,
    /// Show a leading column of row numbers, counted from 1.
    pub row_numbers: bool,
}

impl Default for RenderOptions {
    fn default() -> Self {
        RenderOptions {
            head: 10,
            tail: 5,
            significant: 6,
            max_text_width: 24,
            row_numbers: true,
        }
    }
}

impl Sheet {
    /// The sheet as aligned text, one line per row, ending in a newline.
    ///
    /// Layout: a header line, a rule line, then the rows; columns are two
    /// spaces apart. Numbers are right-aligned on their decimal point,
    /// texts left-aligned, empty cells blank; line breaks and tabs inside
    /// texts are shown as `\n`, `\t`. A sheet longer than
    /// `head + tail + 1` rows shows its first `head` and last `tail` rows
    /// around a line `… N more rows …`.
    pub fn render(&self, options: &RenderOptions) -> String {
        render(self, options)
    }
}

impl fmt::Display for Sheet {
    /// [`Sheet::render`] with the default options.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.render(&RenderOptions::default()))
    }
}

/// A formatted cell: numbers split at the decimal point for alignment.
enum Shown {
    Number { int: String, frac: String },
    Text(String),
    Blank,
}

fn width(s: &str) -> usize {
    s.chars().count()
}

/// `x` to `sig` significant digits: fixed notation for magnitudes from
/// 1e-4 to below 10^sig, otherwise `1.5e-7`; trailing zeros dropped.
pub(crate) fn format_number(x: f64, sig: usize) -> String {
    if x == 0.0 {
        return "0".to_string();
    }
    let sig = sig.max(1);
    let sci = format!("{:.*e}", sig - 1, x);
    let (mant, exp) = sci.split_once('e').unwrap_or((&sci, "0"));
    let exp: i32 = exp.parse().unwrap_or(0);
    if exp < -4 || exp >= sig as i32 {
        format!("{}e{exp}", trim_zeros(mant))
    } else {
        let decimals = (sig as i32 - 1 - exp).max(0) as usize;
        trim_zeros(&format!("{x:.decimals$}")).to_string()
    }
}

fn trim_zeros(s: &str) -> &str {
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        s
    }
}

fn show_text(s: &str, max: usize) -> String {
    let mut out = String::new();
    for ch in s.chars() {
        match ch {
            '\n' => out.push_str("\\n"),
            '\r' => out.push_str("\\r"),
            '\t' => out.push_str("\\t"),
            c if c.is_control() => out.push('\u{FFFD}'),
            c => out.push(c),
        }
    }
    let max = max.max(1);
    if width(&out) > max {
        let mut cut: String = out.chars().take(max - 1).collect();
        cut.push('…');
        cut
    } else {
        out
    }
}

fn show(cell: CellRef<'_>, o: &RenderOptions) -> Shown {
    match cell {
        CellRef::Number(x) => {
            let s = format_number(x, o.significant);
            match s.find('.') {
                Some(dot) => Shown::Number {
                    int: s[..dot].to_string(),
                    frac: s[dot..].to_string(),
                },
                None => Shown::Number {
                    int: s,
                    frac: String::new(),
                },
            }
        }
        CellRef::Text(t) => Shown::Text(show_text(t, o.max_text_width)),
        CellRef::Empty => Shown::Blank,
    }
}

/// One rendered column: header, cells of the shown rows, and alignment.
struct Laid {
    header: String,
    cells: Vec<Shown>,
    int_w: usize,
    frac_w: usize,
    width: usize,
    numeric: bool,
}

impl Laid {
    fn new(header: String, cells: Vec<Shown>) -> Laid {
        let (mut int_w, mut frac_w, mut text_w) = (0, 0, 0);
        let mut numeric = true;
        for c in &cells {
            match c {
                Shown::Number { int, frac } => {
                    int_w = int_w.max(width(int));
                    frac_w = frac_w.max(width(frac));
                }
                Shown::Text(t) => {
                    text_w = text_w.max(width(t));
                    numeric = false;
                }
                Shown::Blank => {}
            }
        }
        let width = width(&header).max(int_w + frac_w).max(text_w);
        Laid {
            header,
            cells,
            int_w,
            frac_w,
            width,
            numeric,
        }
    }

    fn header(&self, out: &mut String) {
        pad(out, &self.header, self.width, self.numeric);
    }

    fn cell(&self, i: usize, out: &mut String) {
        match &self.cells[i] {
            Shown::Number { int, frac } => {
                let block = format!("{int:>iw$}{frac:<fw$}", iw = self.int_w, fw = self.frac_w);
                pad(out, &block, self.width, true);
            }
            Shown::Text(t) => pad(out, t, self.width, false),
            Shown::Blank => pad(out, "", self.width, false),
        }
    }
}

fn pad(out: &mut String, s: &str, w: usize, right: bool) {
    let fill = w.saturating_sub(width(s));
    if right {
        out.push_str(&" ".repeat(fill));
        out.push_str(s);
    } else {
        out.push_str(s);
        out.push_str(&" ".repeat(fill));
    }
}

fn render(sheet: &Sheet, o: &RenderOptions) -> String {
    let cols: &[Column] = sheet.columns();
    if cols.is_empty() {
        return "(a sheet with no columns)\n".to_string();
    }
    let n = sheet.nrows();
    let cut = n > o.head + o.tail + 1;
    let rows: Vec<usize> = if cut {
        (0..o.head).chain(n - o.tail..n).collect()
    } else {
        (0..n).collect()
    };
    let mut laid: Vec<Laid> = Vec::new();
    if o.row_numbers {
        let cells = rows
            .iter()
            .map(|r| Shown::Number {
                int: (r + 1).to_string(),
                frac: String::new(),
            })
            .collect();
        laid.push(Laid::new("row".to_string(), cells));
    }
    for c in cols {
        let cells = rows.iter().map(|&r| show(c.store.cell(r), o)).collect();
        laid.push(Laid::new(show_text(&c.name, o.max_text_width), cells));
    }

    let mut out = String::new();
    let line = |out: &mut String, f: &dyn Fn(&Laid, &mut String)| {
        for (k, l) in laid.iter().enumerate() {
            if k > 0 {
                out.push_str("  ");
            }
            f(l, out);
        }
        let trimmed = out.trim_end_matches(' ').len();
        out.truncate(trimmed);
        out.push('\n');
    };
    line(&mut out, &|l, out| l.header(out));
    line(&mut out, &|l, out| {
        out.push_str(&"─".repeat(l.width));
    });
    let more = format!("… {} more rows …\n", n.saturating_sub(o.head + o.tail));
    for i in 0..rows.len() {
        if cut && i == o.head {
            out.push_str(&more);
        }
        line(&mut out, &|l, out| l.cell(i, out));
    }
    if cut && o.head == rows.len() {
        out.push_str(&more);
    }
    if n == 0 {
        out.push_str("(no rows)\n");
    }
    out
}
