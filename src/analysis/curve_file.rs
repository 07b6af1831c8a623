//! Plain text curve files: one point a line, numbers separated by spaces,
//! tabs or commas, frequency (Hz) first and increasing; comments start
//! with `#`, `;` or `*`. The microphone correction ([`super::correction`])
//! and the target curve ([`super::target`]) are read this way.

use crate::error::Error;

/// The numeric lines of a curve file.
#[derive(Debug, Clone, PartialEq)]
pub struct Rows {
    /// The numbers of each point line, frequency first.
    pub rows: Vec<Vec<f64>>,
    /// Line number of each row in the file, counted from 1.
    pub lines: Vec<usize>,
}

/// What a curve file holds, for [`parse`] and its messages.
#[derive(Debug, Clone, Copy)]
pub struct Layout<'a> {
    /// Fewest and most numbers a line may hold.
    pub columns: (usize, usize),
    /// The accepted line forms in words, e.g. `"frequency dB"`.
    pub expect: &'a str,
    /// Whether the first line that is not a comment may be a header of
    /// column names (a line whose first field is not a number).
    pub header: bool,
    /// Whether every point line must hold as many numbers as the first.
    pub same_columns: bool,
}

/// Parses `text` as a curve file of `layout`; an error names the line.
/// Frequencies must be above 0 and increasing, every number finite, and
/// there must be at least two points.
pub fn parse(text: &str, layout: Layout<'_>) -> crate::Result<Rows> {
    let mut rows: Vec<Vec<f64>> = Vec::new();
    let mut lines = Vec::new();
    let mut seen_line = false;
    for (i, raw) in text.lines().enumerate() {
        let n = i + 1;
        let line = raw.trim();
        if line.is_empty() || line.starts_with(['#', ';', '*']) {
            continue;
        }
        let first_line = !seen_line;
        seen_line = true;
        let fields: Vec<&str> = line
            .split(|c: char| c.is_whitespace() || c == ',')
            .filter(|s| !s.is_empty())
            .collect();
        if layout.header && first_line && fields.first().is_some_and(|f| f.parse::<f64>().is_err())
        {
            continue;
        }
        let nums: Option<Vec<f64>> = fields.iter().map(|s| s.parse::<f64>().ok()).collect();
        let (lo, hi) = layout.columns;
        let nums = match nums {
            Some(v) if (lo..=hi).contains(&v.len()) && v.iter().all(|x| x.is_finite()) => v,
            _ => {
                return Err(Error::input(format!(
                    "line {n} is not {} (read {line:?}); mark comments with #",
                    layout.expect
                )));
            }
        };
        if nums[0] <= 0.0 {
            return Err(Error::input(format!(
                "line {n}: the frequency {} Hz must be above 0",
                nums[0]
            )));
        }
        if let Some(prev) = rows.last() {
            if nums[0] <= prev[0] {
                return Err(Error::input(format!(
                    "line {n}: the frequency {} Hz does not increase (the line before has {} Hz); sort the file by frequency",
                    nums[0], prev[0]
                )));
            }
            if layout.same_columns && nums.len() != rows[0].len() {
                return Err(Error::input(format!(
                    "line {n} has {} numbers but line {} has {}; give every line the same columns",
                    nums.len(),
                    lines[0],
                    rows[0].len()
                )));
            }
        }
        rows.push(nums);
        lines.push(n);
    }
    if rows.len() < 2 {
        return Err(Error::input(
            "holds fewer than two frequency–dB lines; it needs at least two",
        ));
    }
    Ok(Rows { rows, lines })
}

/// The fraction u in [0, 1] of the way from `a` to `b` (Hz) at which `f`
/// lies on a logarithmic frequency axis.
pub fn log_fraction(f: f64, a: f64, b: f64) -> f64 {
    (f / a).ln() / (b / a).ln()
}

#[cfg(test)]
mod tests {
    use super::*;

    const LAYOUT: Layout<'static> = Layout {
        columns: (2, 4),
        expect: "\"frequency dB\"",
        header: true,
        same_columns: true,
    };

    #[test]
    fn a_header_is_skipped_only_on_the_first_line() {
        let r = parse("# c\nfrequency_hz,target_db\n20,1\n40,2\n", LAYOUT).unwrap();
        assert_eq!(r.rows, vec![vec![20.0, 1.0], vec![40.0, 2.0]]);
        assert_eq!(r.lines, vec![3, 4]);
        let e = parse("20 1\nfrequency target\n40 2\n", LAYOUT)
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.starts_with("line 2 "), "{e}");
    }

    #[test]
    fn columns_must_agree_when_asked() {
        let e = parse("20 1 3\n40 2\n", LAYOUT)
            .unwrap_err()
            .message()
            .to_string();
        assert!(e.contains("line 2") && e.contains("same columns"), "{e}");
    }
}
