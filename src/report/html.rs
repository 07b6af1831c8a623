//! Small helpers for writing HTML by hand: escaping, and the number formats
//! of `model::units` as the report uses them.

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

// The number formats are the shared ones of `model::units`; the report
// has always called them from here.
pub use crate::model::units::{hz, num, signed, trim};

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
}
