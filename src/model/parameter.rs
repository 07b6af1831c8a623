//! The band parameters of ISO 3382-1 (and the impulse-to-noise ratio) as
//! one type: each knows its results.json key, its unit, how it is shown,
//! and its just-noticeable difference. The key of a parameter is written
//! once, in [`Parameter::info`]; everything else asks the parameter.

use std::fmt;

use serde::de::{self, Deserializer, MapAccess, Visitor};
use serde::ser::{SerializeMap, Serializer};
use serde::{Deserialize, Serialize};

/// A just-noticeable difference.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum Jnd {
    /// A share of the first value (0.05 = 5 %).
    Relative(f64),
    /// An absolute difference in the parameter's unit.
    Absolute(f64),
}

impl Jnd {
    /// Whether going from `before` to `after` is larger than this
    /// difference.
    pub fn exceeded(self, before: f64, after: f64) -> bool {
        match self {
            Jnd::Relative(r) => (after - before).abs() > r * before.abs(),
            Jnd::Absolute(a) => (after - before).abs() > a,
        }
    }
}

/// A parameter of one band's decay.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Parameter {
    /// Early decay time (0 to −10 dB), s.
    Edt,
    /// Reverberation time from −5 to −25 dB, s.
    T20,
    /// Reverberation time from −5 to −35 dB, s.
    T30,
    /// Clarity C50, dB.
    C50,
    /// Clarity C80, dB.
    C80,
    /// Definition D50, 0 to 1.
    D50,
    /// Centre time Ts, s.
    Ts,
    /// Impulse-to-noise ratio: the decay's starting level over the noise, dB.
    Inr,
}

/// What is known of a parameter; see [`Parameter::info`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Info {
    /// The results.json key (and CSV column), with its unit in the name.
    pub key: &'static str,
    /// The usual symbol, for tables and plots ("T30").
    pub label: &'static str,
    /// The unit as shown in tables ("s", "ms", "dB", "" for a ratio).
    pub display_unit: &'static str,
    /// Factor from the stored unit to the shown one (1000 for s → ms).
    pub display_scale: f64,
    /// Decimals shown in tables (in the shown unit).
    pub display_decimals: usize,
    /// Decimals written to CSV files (in the stored unit).
    pub file_decimals: usize,
    /// The unit and meaning, for exported tables' `units`.
    pub description: &'static str,
    /// The just-noticeable difference of ISO 3382-1:2009 Annex A, Table A.1
    /// (seen through a secondary source), where there is one.
    pub jnd: Option<Jnd>,
    /// That difference in words, for reports.
    pub jnd_words: &'static str,
}

const INFO: [Info; 8] = [
    Info {
        key: "edt_s",
        label: "EDT",
        display_unit: "s",
        display_scale: 1.0,
        display_decimals: 2,
        file_decimals: 3,
        description: "s, early decay time (0 to -10 dB)",
        jnd: Some(Jnd::Relative(0.05)),
        jnd_words: "5 %",
    },
    Info {
        key: "t20_s",
        label: "T20",
        display_unit: "s",
        display_scale: 1.0,
        display_decimals: 2,
        file_decimals: 3,
        description: "s, reverberation time from -5 to -25 dB",
        // ISO 3382-1 Annex A gives 5 % for the reverberation time T
        jnd: Some(Jnd::Relative(0.05)),
        jnd_words: "5 %",
    },
    Info {
        key: "t30_s",
        label: "T30",
        display_unit: "s",
        display_scale: 1.0,
        display_decimals: 2,
        file_decimals: 3,
        description: "s, reverberation time from -5 to -35 dB",
        jnd: Some(Jnd::Relative(0.05)),
        jnd_words: "5 %",
    },
    Info {
        key: "c50_db",
        label: "C50",
        display_unit: "dB",
        display_scale: 1.0,
        display_decimals: 1,
        file_decimals: 2,
        description: "dB, clarity C50",
        // C50 has no entry in Annex A; gliss uses C80's 1 dB for it, which
        // is our choice, not the standard's
        jnd: Some(Jnd::Absolute(1.0)),
        jnd_words: "1 dB, as for C80",
    },
    Info {
        key: "c80_db",
        label: "C80",
        display_unit: "dB",
        display_scale: 1.0,
        display_decimals: 1,
        file_decimals: 2,
        description: "dB, clarity C80",
        jnd: Some(Jnd::Absolute(1.0)),
        jnd_words: "1 dB",
    },
    Info {
        key: "d50",
        label: "D50",
        display_unit: "",
        display_scale: 1.0,
        display_decimals: 2,
        file_decimals: 3,
        description: "ratio 0 to 1, definition D50",
        jnd: Some(Jnd::Absolute(0.05)),
        jnd_words: "0.05",
    },
    Info {
        key: "ts_s",
        label: "Ts",
        display_unit: "ms",
        display_scale: 1000.0,
        display_decimals: 0,
        file_decimals: 4,
        description: "s, centre time",
        jnd: Some(Jnd::Absolute(0.010)),
        jnd_words: "10 ms",
    },
    Info {
        key: "inr_db",
        label: "INR",
        display_unit: "dB",
        display_scale: 1.0,
        display_decimals: 0,
        file_decimals: 1,
        description: "dB, impulse response to noise ratio",
        jnd: None,
        jnd_words: "",
    },
];

impl Parameter {
    /// Every parameter, in the order of tables and files.
    pub const ALL: [Parameter; 8] = [
        Parameter::Edt,
        Parameter::T20,
        Parameter::T30,
        Parameter::C50,
        Parameter::C80,
        Parameter::D50,
        Parameter::Ts,
        Parameter::Inr,
    ];

    /// The parameters that count from the start of the response (the
    /// direct sound): withheld together when that start cannot be told
    /// from the noise.
    pub const FROM_THE_START: [Parameter; 5] = [
        Parameter::Edt,
        Parameter::C50,
        Parameter::C80,
        Parameter::D50,
        Parameter::Ts,
    ];

    /// The parameters compared before and after (those with a
    /// just-noticeable difference).
    pub const COMPARED: [Parameter; 7] = [
        Parameter::Edt,
        Parameter::T20,
        Parameter::T30,
        Parameter::C50,
        Parameter::C80,
        Parameter::D50,
        Parameter::Ts,
    ];

    /// Everything known of the parameter.
    pub fn info(self) -> &'static Info {
        &INFO[self as usize]
    }

    /// The results.json key, e.g. `t30_s`.
    pub fn key(self) -> &'static str {
        self.info().key
    }

    /// The usual symbol, e.g. `T30`.
    pub fn label(self) -> &'static str {
        self.info().label
    }

    /// The just-noticeable difference, where ISO 3382-1 gives one.
    pub fn jnd(self) -> Option<Jnd> {
        self.info().jnd
    }

    /// The parameter whose results.json key is `key`.
    pub fn from_key(key: &str) -> Option<Parameter> {
        Parameter::ALL.into_iter().find(|p| p.key() == key)
    }

    /// Whether this is a decay time (EDT, T20, T30).
    pub fn is_decay_time(self) -> bool {
        matches!(self, Parameter::Edt | Parameter::T20 | Parameter::T30)
    }

    /// `value` (in the stored unit) as shown in tables: scaled to the
    /// shown unit, with the shown decimals, without the unit.
    pub fn show(self, value: f64) -> String {
        let i = self.info();
        format!("{:.*}", i.display_decimals, value * i.display_scale)
    }

    /// `value` as shown with its unit ("0.56 s", "12 ms", "0.43").
    pub fn show_with_unit(self, value: f64) -> String {
        let u = self.info().display_unit;
        if u.is_empty() {
            self.show(value)
        } else {
            format!("{} {u}", self.show(value))
        }
    }
}

impl fmt::Display for Parameter {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.label())
    }
}

impl Serialize for Parameter {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.key())
    }
}

impl<'de> Deserialize<'de> for Parameter {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl Visitor<'_> for V {
            type Value = Parameter;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("a band parameter key such as \"t30_s\"")
            }
            fn visit_str<E: de::Error>(self, v: &str) -> Result<Parameter, E> {
                Parameter::from_key(v)
                    .ok_or_else(|| E::custom(format!("unknown band parameter {v:?}")))
            }
        }
        d.deserialize_str(V)
    }
}

/// One value (or none) per [`Parameter`]: the values of a band. In JSON
/// each parameter is its own key (its [`Info::key`] with the value, `null`
/// where not measured), so a band reads as it always has.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Values([Option<f64>; 8]);

impl Values {
    /// No value measured.
    pub fn none() -> Self {
        Values::default()
    }

    /// The value of `p`.
    pub fn get(&self, p: Parameter) -> Option<f64> {
        self.0[p as usize]
    }

    /// Sets the value of `p`.
    pub fn set(&mut self, p: Parameter, v: Option<f64>) {
        self.0[p as usize] = v;
    }

    /// Every parameter with its value, in table order.
    pub fn iter(&self) -> impl Iterator<Item = (Parameter, Option<f64>)> + '_ {
        Parameter::ALL.into_iter().map(|p| (p, self.get(p)))
    }
}

impl std::ops::Index<Parameter> for Values {
    type Output = Option<f64>;
    fn index(&self, p: Parameter) -> &Option<f64> {
        &self.0[p as usize]
    }
}

impl std::ops::IndexMut<Parameter> for Values {
    fn index_mut(&mut self, p: Parameter) -> &mut Option<f64> {
        &mut self.0[p as usize]
    }
}

impl Serialize for Values {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        let mut m = s.serialize_map(Some(Parameter::ALL.len()))?;
        for (p, v) in self.iter() {
            m.serialize_entry(p.key(), &v)?;
        }
        m.end()
    }
}

impl<'de> Deserialize<'de> for Values {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> Visitor<'de> for V {
            type Value = Values;
            fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
                f.write_str("band parameters by key")
            }
            fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Values, A::Error> {
                let mut out = Values::none();
                // other keys belong to the band around the values
                while let Some(k) = map.next_key::<String>()? {
                    match Parameter::from_key(&k) {
                        Some(p) => out.set(p, map.next_value::<Option<f64>>()?),
                        None => {
                            map.next_value::<de::IgnoredAny>()?;
                        }
                    }
                }
                Ok(out)
            }
        }
        d.deserialize_map(V)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_are_unique_and_round_trip() {
        for p in Parameter::ALL {
            assert_eq!(Parameter::from_key(p.key()), Some(p));
            let j = serde_json::to_string(&p).unwrap();
            assert_eq!(serde_json::from_str::<Parameter>(&j).unwrap(), p);
        }
        let mut keys: Vec<&str> = Parameter::ALL.iter().map(|p| p.key()).collect();
        keys.sort_unstable();
        keys.dedup();
        assert_eq!(keys.len(), Parameter::ALL.len());
    }

    #[test]
    fn values_serialise_as_one_key_each_with_nulls() {
        let mut v = Values::none();
        v[Parameter::T30] = Some(0.61);
        let j = serde_json::to_value(v).unwrap();
        assert_eq!(j["t30_s"], 0.61);
        assert!(j["edt_s"].is_null());
        assert_eq!(j.as_object().unwrap().len(), 8);
        let back: Values = serde_json::from_value(j).unwrap();
        assert_eq!(back, v);
    }

    #[test]
    fn jnds_of_iso_3382_1_annex_a() {
        // ISO 3382-1:2009 Annex A, Table A.1 (secondary source): T 5 %,
        // C80 1 dB, D50 0.05, Ts 10 ms
        let t = Parameter::T30.jnd().unwrap();
        assert!(!t.exceeded(1.0, 1.03));
        assert!(t.exceeded(1.0, 1.10));
        assert!(Parameter::C80.jnd().unwrap().exceeded(0.0, 1.2));
        assert!(!Parameter::D50.jnd().unwrap().exceeded(0.4, 0.44));
        assert!(Parameter::Ts.jnd().unwrap().exceeded(0.05, 0.065));
        assert!(Parameter::Inr.jnd().is_none());
    }

    #[test]
    fn shown_in_the_table_unit() {
        assert_eq!(Parameter::Ts.show_with_unit(0.0456), "46 ms");
        assert_eq!(Parameter::D50.show_with_unit(0.434), "0.43");
        assert_eq!(Parameter::T30.show_with_unit(1.234), "1.23 s");
    }
}
