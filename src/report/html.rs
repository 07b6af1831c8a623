//! Small helpers for writing HTML by hand: escaping and number formats.

/// Escapes text for HTML element content and for attribute values in
/// double or single quotes: `&`, `<`, `>`, `"` and `'`.
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            c => out.push(c),
        }
    }
    out
}

/// `v` with `decimals` decimals, never "-0".
pub fn num(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    if s.starts_with('-') && s[1..].chars().all(|c| c == '0' || c == '.') {
        s[1..].to_string()
    } else {
        s
    }
}

/// `v` with `decimals` decimals and an explicit sign ("+0.12", "-0.30", "0.00").
pub fn signed(v: f64, decimals: usize) -> String {
    let s = num(v, decimals);
    if s.starts_with('-') || s.chars().all(|c| c == '0' || c == '.') {
        s
    } else {
        format!("+{s}")
    }
}

/// A frequency for people: "31.5 Hz", "125 Hz", "1 kHz", "12.5 kHz".
pub fn hz(f: f64) -> String {
    if f >= 1000.0 {
        format!("{} kHz", trim(f / 1000.0, 2))
    } else if f >= 100.0 {
        format!("{} Hz", num(f, 0))
    } else {
        format!("{} Hz", trim(f, 1))
    }
}

/// `v` with at most `decimals` decimals, trailing zeros dropped.
pub fn trim(v: f64, decimals: usize) -> String {
    let s = num(v, decimals);
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaping_leaves_no_markup() {
        assert_eq!(
            esc(r#"<script>alert("x") & 'y'</script>"#),
            "&lt;script&gt;alert(&quot;x&quot;) &amp; &#39;y&#39;&lt;/script&gt;"
        );
        assert_eq!(esc("Kestrel 5 · 4.6 × 3.8 m"), "Kestrel 5 · 4.6 × 3.8 m");
    }

    #[test]
    fn numbers_read_as_people_write_them() {
        assert_eq!(num(-0.0004, 3), "0.000");
        assert_eq!(num(-0.4, 0), "0");
        assert_eq!(num(-1.26, 1), "-1.3");
        assert_eq!(signed(0.123, 2), "+0.12");
        assert_eq!(signed(-0.001, 2), "0.00");
        assert_eq!(hz(31.5), "31.5 Hz");
        assert_eq!(hz(125.0), "125 Hz");
        assert_eq!(hz(1000.0), "1 kHz");
        assert_eq!(hz(1250.0), "1.25 kHz");
        assert_eq!(hz(12_500.0), "12.5 kHz");
        assert_eq!(hz(18_129.38), "18.13 kHz");
    }
}
