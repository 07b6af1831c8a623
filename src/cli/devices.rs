//! `gliss devices`: the sound cards and what they can do.

use clap::Args as ClapArgs;

#[cfg(feature = "soundcard")]
use gliss::audio::soundcard::{self, Capabilities};
#[cfg(feature = "soundcard")]
use gliss::error::Error;
use gliss::error::Result;

/// Options of `gliss devices`.
#[derive(Debug, ClapArgs)]
#[command(
    after_help = "Use the number or part of the name with gliss measure --device \
(or --input-device / --output-device when the microphone input and the output are on \
different devices). --device virtual is the built-in simulated system."
)]
pub struct Args {
    /// Print the list as JSON, for scripts.
    #[arg(long)]
    pub json: bool,
}

#[cfg(feature = "soundcard")]
fn caps_line(c: &Capabilities) -> String {
    let rates: Vec<String> = c
        .sample_rates_hz
        .iter()
        .map(|r| format!("{}", f64::from(*r) / 1000.0))
        .collect();
    let mut s = format!(
        "{} channel{}, {} kHz, {}",
        c.max_channels,
        if c.max_channels == 1 { "" } else { "s" },
        if rates.is_empty() {
            "no usual rate".to_string()
        } else {
            rates.join("/")
        },
        c.formats.join(" ")
    );
    if let Some((lo, hi)) = c.buffer_frames {
        s.push_str(&format!(", buffer {lo}-{hi} frames"));
    }
    s
}

/// Runs `gliss devices` in a build without the sound card: refuses.
#[cfg(not(feature = "soundcard"))]
pub fn run(a: Args) -> Result<()> {
    let _ = a.json;
    Err(super::common::no_soundcard(
        "gliss devices",
        "gliss measure --device virtual works without one; to list sound cards, ",
    ))
}

/// Runs `gliss devices`.
#[cfg(feature = "soundcard")]
pub fn run(a: Args) -> Result<()> {
    let list = soundcard::list_devices()?;
    if a.json {
        let text = serde_json::to_string_pretty(&list)
            .map_err(|e| Error::input(format!("could not encode JSON: {e}")))?;
        println!("{text}");
        return Ok(());
    }
    if list.is_empty() {
        println!(
            "no sound devices found; connect a sound card and check that the sound system is running (gliss measure --device virtual works without one)"
        );
        return Ok(());
    }
    for d in &list {
        let mut tags = Vec::new();
        if d.default_input {
            tags.push("default input");
        }
        if d.default_output {
            tags.push("default output");
        }
        let tags = if tags.is_empty() {
            String::new()
        } else {
            format!("  [{}]", tags.join(", "))
        };
        println!("{:>3}  {}{tags}", d.index, d.name);
        if d.id != d.name {
            println!("     id      {}", d.id);
        }
        if let Some(c) = &d.input {
            println!("     input   {}", caps_line(c));
        }
        if let Some(c) = &d.output {
            println!("     output  {}", caps_line(c));
        }
    }
    println!(
        "virtual  the built-in simulated system: a loudspeaker in a room on output 1 and input 1, \
a loopback from output 2 to input 2, a subwoofer on output 3 heard on input 1 (--device virtual; \
for trying gliss without a sound card)"
    );
    Ok(())
}
