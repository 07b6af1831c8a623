//! Numbers as people read them: frequencies, times, decimals.
//!
//! Plain text formats shared by the plots, the terminal and the report;
//! nothing here draws.

/// "20", "500", "1k", "12.5k": a frequency in Hz, short, for an axis or a
/// sentence that says "Hz" after it.
pub fn format_hz(f: f64) -> String {
    if f >= 1000.0 {
        let k = f / 1000.0;
        if (k - k.round()).abs() < 1e-6 {
            format!("{}k", k.round())
        } else {
            format!("{k:.1}k")
        }
    } else if (f - f.round()).abs() < 1e-6 {
        format!("{}", f.round())
    } else {
        format!("{f:.1}")
    }
}

/// A time in seconds as "350 ms" below one second, "1.25 s" from one
/// second on.
pub fn seconds(v: f64) -> String {
    if v < 1.0 {
        format!("{:.0} ms", v * 1e3)
    } else {
        format!("{v:.2} s")
    }
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

/// Frequencies for people, the unit said once per run: "63, 80, 125 Hz",
/// "500 Hz and 1, 2 kHz" (each as [`hz`] writes it, in the order given).
pub fn hz_list(f: &[f64]) -> String {
    let mut runs: Vec<(String, Vec<String>)> = Vec::new();
    for &v in f {
        let s = hz(v);
        let (n, unit) = s.split_once(' ').unwrap_or((s.as_str(), ""));
        match runs.last_mut() {
            Some((u, ns)) if u == unit => ns.push(n.to_string()),
            _ => runs.push((unit.to_string(), vec![n.to_string()])),
        }
    }
    runs.iter()
        .map(|(u, ns)| format!("{} {u}", ns.join(", ")))
        .collect::<Vec<_>>()
        .join(" and ")
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

/// A size in bytes for people: "812 kB", "2.4 MB", "1.25 GB" (decimal
/// units, as disks are sold and as `df -H` shows them).
pub fn bytes(n: u64) -> String {
    let v = n as f64;
    if v < 1e3 {
        format!("{n} bytes")
    } else if v < 1e6 {
        format!("{:.0} kB", v / 1e3)
    } else if v < 1e9 {
        format!("{:.1} MB", v / 1e6)
    } else {
        format!("{:.2} GB", v / 1e9)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hz_labels() {
        assert_eq!(format_hz(20.0), "20");
        assert_eq!(format_hz(1000.0), "1k");
        assert_eq!(format_hz(12_500.0), "12.5k");
        assert_eq!(format_hz(31.5), "31.5");
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
        assert_eq!(hz_list(&[63.0, 80.0, 125.0, 160.0]), "63, 80, 125, 160 Hz");
        assert_eq!(
            hz_list(&[31.5, 500.0, 1000.0, 1250.0]),
            "31.5, 500 Hz and 1, 1.25 kHz"
        );
        assert_eq!(hz_list(&[]), "");
    }

    #[test]
    fn times_in_words() {
        assert_eq!(seconds(0.35), "350 ms");
        assert_eq!(seconds(1.254), "1.25 s");
    }

    #[test]
    fn sizes_read_as_disks_are_sold() {
        assert_eq!(bytes(999), "999 bytes");
        assert_eq!(bytes(812_345), "812 kB");
        assert_eq!(bytes(2_449_000), "2.4 MB");
        assert_eq!(bytes(1_250_000_000), "1.25 GB");
    }
}
