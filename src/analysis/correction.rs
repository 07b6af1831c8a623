//! Microphone correction: a plain text file of frequency (Hz) and
//! deviation (dB), optionally phase (degrees), one point a line, removed
//! from the measured response. Comments start with `#`, `;` or `*`;
//! numbers may be separated by spaces, tabs or commas. Interpolated
//! linearly on a log-frequency axis (common practice); outside the file's
//! range its end values are held, with a warning.

/// One correction file, parsed.
#[derive(Debug, Clone, PartialEq)]
pub struct Correction {
    /// (frequency Hz, deviation dB, phase degrees), frequencies increasing.
    pub points: Vec<(f64, f64, f64)>,
    /// Line number of each point in the file (for messages).
    pub lines: Vec<usize>,
}

impl Correction {
    /// Parses the text of a correction file; an error names the line.
    pub fn parse(text: &str) -> crate::Result<Correction> {
        let rows = super::curve_file::parse(
            text,
            super::curve_file::Layout {
                columns: (2, 3),
                expect: "\"frequency dB\" or \"frequency dB phase\"",
                header: false,
                same_columns: false,
            },
        )?;
        Ok(Correction {
            points: rows
                .rows
                .iter()
                .map(|v| (v[0], v[1], v.get(2).copied().unwrap_or(0.0)))
                .collect(),
            lines: rows.lines,
        })
    }

    /// (dB, degrees) at f, interpolated on log f; end values held outside.
    pub fn at(&self, f: f64) -> (f64, f64) {
        let p = &self.points;
        if f <= p[0].0 {
            return (p[0].1, p[0].2);
        }
        let last = p[p.len() - 1];
        if f >= last.0 {
            return (last.1, last.2);
        }
        let k = p.partition_point(|q| q.0 <= f);
        let (a, b) = (p[k - 1], p[k]);
        let u = super::curve_file::log_fraction(f, a.0, b.0);
        (a.1 + u * (b.1 - a.1), a.2 + u * (b.2 - a.2))
    }

    /// A warning when the file does not cover [f1, f2], naming its lines.
    pub fn coverage_warning(&self, f1: f64, f2: f64) -> Option<String> {
        let (lo, hi) = (self.points[0].0, self.points[self.points.len() - 1].0);
        if lo <= f1 * (1.0 + 1e-9) && hi >= f2 * (1.0 - 1e-9) {
            return None;
        }
        Some(format!(
            "the microphone correction covers {lo} Hz (line {}) to {hi} Hz (line {}) but the sweep runs from {f1} to {f2} Hz; outside its range its end values are held",
            self.lines[0],
            self.lines[self.lines.len() - 1]
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_comments_separators_and_phase() {
        let c =
            Correction::parse("# mic 123\n* header\n20 1.5\n1000,0, 10\n\n20000\t-2 -5\n").unwrap();
        assert_eq!(
            c.points,
            vec![(20.0, 1.5, 0.0), (1000.0, 0.0, 10.0), (20000.0, -2.0, -5.0)]
        );
        assert_eq!(c.lines, vec![3, 4, 6]);
        // log-frequency interpolation: halfway in log between 1 k and 20 k
        let mid = (1000.0f64 * 20000.0).sqrt();
        let (db, deg) = c.at(mid);
        assert!((db + 1.0).abs() < 1e-12 && (deg - 2.5).abs() < 1e-12);
        assert_eq!(c.at(5.0), (1.5, 0.0));
        assert_eq!(c.at(30000.0), (-2.0, -5.0));
    }

    #[test]
    fn malformed_files_name_the_line() {
        assert!(
            Correction::parse("# nothing here\n")
                .unwrap_err()
                .message()
                .to_string()
                .contains("fewer than two")
        );
        assert!(
            Correction::parse("20 1\nhello world\n")
                .unwrap_err()
                .message()
                .to_string()
                .contains("line 2")
        );
        let e = Correction::parse("100 1\n50 2\n")
            .unwrap_err()
            .message()
            .to_string();
        assert!(
            e.contains("line 2") && e.contains("does not increase"),
            "{e}"
        );
        assert!(
            Correction::parse("0 1\n10 2\n")
                .unwrap_err()
                .message()
                .to_string()
                .contains("line 1")
        );
        let c = Correction::parse("30 0\n16000 0\n").unwrap();
        let w = c.coverage_warning(20.0, 20000.0).unwrap();
        assert!(w.contains("line 1") && w.contains("line 2"), "{w}");
        assert!(c.coverage_warning(40.0, 10000.0).is_none());
    }
}
