//! An impedance folder's part of the report: the small-signal parameters
//! as a table (the values results.json stores, shown, never recomputed).

use std::fmt::Write;

use super::html::{esc, num};
use crate::folder::schema::Results;

/// One row: the parameter, its value and unit, what it is.
fn row(out: &mut String, name: &str, value: &str, unit: &str, what: &str) {
    let _ = write!(
        out,
        "<tr><th scope=\"row\">{}</th><td class=\"num\">{}</td><td>{}</td><td class=\"muted\">{}</td></tr>",
        esc(name),
        esc(value),
        esc(unit),
        esc(what)
    );
}

/// The parameters table of an impedance folder (numbered on `counters`), or the
/// reason there is none; nothing for another folder.
pub(super) fn parameters(out: &mut String, r: &Results, counters: &mut super::Counters) -> bool {
    let Some(z) = &r.impedance else {
        return false;
    };
    let wiring = match z.reference_channel {
        Some(c) => format!(
            "voltage divider: channel {c} at the amplifier side of the sense resistor, channel {} across the driver, through {} Ω",
            z.driver_channel,
            num(z.curve.sense_ohms, 3)
        ),
        None => format!(
            "constant current: channel {} across the driver, through {} Ω, the sweep as written for the amplifier's output",
            z.driver_channel,
            num(z.curve.sense_ohms, 1)
        ),
    };
    let _ = write!(
        out,
        "<h3>Small-signal parameters</h3><p class=\"muted\">Wiring: {}. The closed forms of the resonance (Thiele 1971, Small 1972) refined by a least-squares fit of the lumped model Z = Re + jωLe + Res/(1 + jQms(f/fs − fs/f)) to the complex impedance; Z at full resolution is in {}.</p>",
        esc(&wiring),
        esc(&z.impedance_file)
    );
    let Some(t) = &r.thiele_small else {
        out.push_str("<p class=\"todo\">— The small-signal parameters could not be read from this impedance; the warnings above say why.</p>");
        return true;
    };
    counters.table += 1;
    let n = counters.table;
    let _ = write!(
        out,
        "<table class=\"params\"><caption>Table {n}. Small-signal parameters</caption><thead><tr><th scope=\"col\">Parameter</th><th scope=\"col\" class=\"num\">Value</th><th scope=\"col\">Unit</th><th scope=\"col\">What it is</th></tr></thead><tbody>"
    );
    let re_note = if t.re_given {
        "voice-coil DC resistance, as given (ohmmeter)"
    } else {
        "voice-coil DC resistance, fitted"
    };
    row(out, "Re", &num(t.re_ohm, 3), "Ω", re_note);
    row(
        out,
        "fs",
        &num(t.fs_hz, 2),
        "Hz",
        "resonance in free air (or as mounted)",
    );
    row(out, "Qms", &num(t.qms, 3), "", "mechanical Q at fs");
    row(out, "Qes", &num(t.qes, 3), "", "electrical Q at fs");
    row(out, "Qts", &num(t.qts, 3), "", "total Q at fs");
    row(out, "Le", &num(t.le_mh, 3), "mH", "voice-coil inductance");
    row(
        out,
        "Res",
        &num(t.res_ohm, 2),
        "Ω",
        "motional resistance at fs",
    );
    row(
        out,
        "Fit",
        &num(t.fit_rms_percent, 2),
        "% RMS",
        &format!(
            "model against measurement over {} to {} Hz ({} Ω RMS)",
            num(t.fit_band_hz[0], 0),
            num(t.fit_band_hz[1], 0),
            num(t.fit_rms_ohm, 3)
        ),
    );
    let c = &t.closed_form;
    row(
        out,
        "Closed forms",
        &format!("fs {} Hz, Qts {}", num(c.fs_hz, 2), num(c.qts, 3)),
        "",
        &format!(
            "from the peak (Zmax {} Ω) and the points f1 {} Hz, f2 {} Hz where |Z| = √(Re·Zmax): the fit's start",
            num(c.zmax_ohm, 2),
            num(c.f1_hz, 2),
            num(c.f2_hz, 2)
        ),
    );
    if let Some(s) = &t.semi_inductance {
        row(
            out,
            "Semi-inductance",
            &format!("K {:.4e}, n {}", s.k, num(s.n, 3)),
            "Ω·sⁿ",
            &format!(
                "the voice coil as K·(jω)ⁿ in place of jωLe (Leach 2002): fit {} % RMS, Re {} Ω, fs {} Hz, Qms {}",
                num(s.fit_rms_percent, 2),
                num(s.re_ohm, 3),
                num(s.fs_hz, 2),
                num(s.qms, 3)
            ),
        );
    }
    if let Some(m) = &t.mechanics {
        let method = format!(
            "{} method; fs {} Hz in that measurement",
            m.method,
            num(m.second_fs_hz, 2)
        );
        row(
            out,
            "Vas",
            &num(m.vas_l, 2),
            "l",
            &format!("equivalent volume of the suspension ({method})"),
        );
        let opt = |v: Option<f64>, d: usize| v.map_or("—".to_string(), |v| num(v, d));
        let why = "needs --cone-diameter";
        let note = |v: Option<f64>, what: &str| {
            if v.is_some() {
                what.to_string()
            } else {
                format!("{what} — {why}")
            }
        };
        row(
            out,
            "Sd",
            &opt(m.sd_cm2, 1),
            "cm²",
            &note(m.sd_cm2, "effective radiating area"),
        );
        row(
            out,
            "Mms",
            &opt(m.mms_g, 2),
            "g",
            &note(m.mms_g, "moving mass with its air load"),
        );
        row(
            out,
            "Cms",
            &opt(m.cms_mm_per_n, 3),
            "mm/N",
            &note(m.cms_mm_per_n, "suspension compliance"),
        );
        row(
            out,
            "Bl",
            &opt(m.bl_tm, 2),
            "T·m",
            &note(m.bl_tm, "force factor"),
        );
    }
    out.push_str("</tbody></table>");
    true
}
