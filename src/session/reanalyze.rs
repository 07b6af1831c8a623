//! `gliss reanalyze`: measurement folders analysed again from their raw
//! files with new settings, in place, many at once.
//!
//! Each folder is opened through the one reader (its raw files checked
//! against the SHA-256 its manifest recorded), and its recording, its
//! sweep, its channel, its loopback reference and, for a measurement made
//! through a device, the synchronous average of its takes are taken from
//! what the folder holds, exactly as the command that made it took them.
//! Only the analysis settings given are new: a folder keeps its own
//! smoothing and gate unless `--smooth`, `--gate` or `--profile` is
//! given. The raw files are never touched: the folder's derived files are
//! replaced as `--overwrite` replaces them (the manifest marked as being
//! replaced first, the new manifest last). Folders are independent, so they run in parallel on every core.

use std::path::{Path, PathBuf};

use rayon::prelude::*;

use crate::analysis::AnalysisConfig;
use crate::analysis::gate::Gate;
use crate::error::{Error, Result};
use crate::folder::schema::{FileEntry, FolderKind, Manifest};
use crate::folder::{self, Content};
use crate::model::Profile;
use crate::model::plot_kind::PhaseView;
use crate::session::{self, INPUT_IMPULSE, Job, Outcome, TargetJob};
use crate::signal::wav::{self, decode_wav};

/// The new settings every folder is analysed with.
#[derive(Debug, Clone)]
pub struct Settings {
    /// The analysis settings for each profile, its defaults applied and
    /// the options given over them.
    pub configs: Vec<AnalysisConfig>,
    /// The profile asked for; `None`: each folder keeps its own.
    pub profile: Option<Profile>,
    /// `--smooth` was given; otherwise each folder keeps its own smoothing
    /// (unless `profile` is given: then the profile's default).
    pub smoothing_given: bool,
    /// `--gate` was given; otherwise each folder keeps its own gate, as
    /// its results.json records it (unless `profile` is given).
    pub gate_given: bool,
    /// The microphone correction file, when given again.
    pub mic_correction: Option<FileEntry>,
    /// The calibration, when given again.
    pub calibration: Option<(crate::analysis::calibration::Calibration, FileEntry)>,
    /// The drive voltage and distance.
    pub drive: Option<crate::analysis::calibration::Drive>,
    /// A target curve.
    pub target: Option<TargetJob>,
    /// Draw the plots.
    pub plots: bool,
    /// How the phase plot shows the phase.
    pub phase_view: PhaseView,
    /// The command line, for the manifests.
    pub command_line: Vec<String>,
}

/// The analysis job that makes `dir` again from its raw files with `s`.
pub fn job(dir: &Path, s: &Settings) -> Result<Job> {
    let opened = folder::open(dir)?;
    let (manifest, results): (Manifest, crate::folder::schema::Results) = match opened.content {
        Content::Measurement { manifest, results } => (*manifest, *results),
        Content::Comparison { .. } => {
            return Err(Error::input(format!(
                "{} is a comparison, not a measurement; run gliss compare again to make it with new settings",
                dir.display()
            )));
        }
        Content::Align { .. } => {
            return Err(Error::input(format!(
                "{} is an alignment, not a measurement; run gliss align again to make it with new settings",
                dir.display()
            )));
        }
        Content::Directivity { .. } => {
            return Err(Error::input(format!(
                "{} is a directivity folder, not a measurement; analyse its measurement folders again and run gliss directivity again",
                dir.display()
            )));
        }
        Content::Tuning { .. } => {
            return Err(Error::input(format!(
                "{} is a tuning, not a measurement; run gliss tune again to design it with new settings",
                dir.display()
            )));
        }
    };
    if manifest.kind == Some(FolderKind::Impedance) {
        return Err(Error::input(format!(
            "{} is an impedance measurement; run gliss impedance again on its recording.wav and stimulus.wav to analyse it with new settings",
            dir.display()
        )));
    }
    if manifest.kind == Some(FolderKind::Average) {
        return Err(Error::input(format!(
            "{} is an average, which has no recording of its own; reanalyze its positions, then run gliss average again",
            dir.display()
        )));
    }
    let read = |name: &str| -> Result<(Vec<u8>, wav::WavData)> {
        let path = dir.join(name);
        let bytes = std::fs::read(&path).map_err(|e| Error::io("read", &path, &e))?;
        let data =
            decode_wav(&bytes).map_err(|m| Error::input(format!("{} {m}", path.display())))?;
        Ok((bytes, data))
    };
    let impulse = manifest
        .files
        .iter()
        .any(|f| f.name == INPUT_IMPULSE && f.role == crate::folder::schema::FileRole::Raw);
    let (recording_bytes, mut recording) = read(if impulse {
        INPUT_IMPULSE
    } else {
        "recording.wav"
    })?;
    let (stimulus_bytes, stimulus) = if impulse {
        (
            Vec::new(),
            wav::WavData {
                sample_rate_hz: manifest.sample_rate_hz,
                encoding: wav::SampleEncoding::Float,
                channels: Vec::new(),
            },
        )
    } else {
        read("stimulus.wav")?
    };
    // a device measurement analysed the synchronous average of its takes
    if let Some(m) = &manifest.measurement {
        if !m.takes.is_empty() {
            recording.channels =
                session::measure::synchronous_average(&recording.channels, &m.takes);
            recording.encoding = wav::SampleEncoding::Float;
        }
    }
    let reference = manifest
        .settings
        .reference_channel
        .or_else(|| {
            manifest
                .measurement
                .as_ref()
                .and_then(|m| m.reference_channel)
        })
        .map(|r| r - 1);
    let profile = s
        .profile
        .or(manifest.settings.profile)
        .unwrap_or(Profile::Room);
    let Some(mut config) = s.configs.iter().find(|c| c.profile == profile).cloned() else {
        return Err(Error::parameter(format!(
            "no analysis settings for the profile {} of {}",
            profile.code(),
            dir.display()
        )));
    };
    // what the folder was analysed with is kept where nothing new was
    // asked for: new smoothing must not drop a gate (a directivity series
    // analysed again would take in the room's reflections unannounced)
    if s.profile.is_none() {
        if !s.smoothing_given {
            config.smoothing = manifest.settings.smoothing;
        }
        if !s.gate_given {
            config.gate = results.response.gate.as_ref().map(Gate::of);
        }
    }
    let title = dir.file_name().map_or_else(
        || dir.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    );
    Ok(Job {
        out: dir.to_path_buf(),
        overwrite: true,
        plots: s.plots,
        phase_view: s.phase_view,
        recording_bytes,
        recording,
        channel: manifest.channel.saturating_sub(1),
        stimulus_bytes,
        stimulus,
        design: manifest.sweep.clone(),
        config,
        source: manifest.source.clone(),
        title: format!("{title}, channel {}", manifest.channel),
        command_line: s.command_line.clone(),
        mic_correction: s.mic_correction.clone(),
        calibration: s.calibration.clone(),
        reference,
        measurement: manifest.measurement.clone(),
        drive: s.drive,
        target: s.target.clone(),
        impulse,
        recovered_sweep: None,
        sweep_binding: None,
        impedance: None,
        position: manifest.settings.position,
    })
}

/// Analyses every folder of `dirs` again with `s`, in parallel on every
/// core (the pool rayon sizes to the machine), calling `done` as each
/// finishes. The results are in the order of `dirs`; one folder's
/// failure does not stop the others.
pub fn reanalyze_all(
    dirs: &[PathBuf],
    s: &Settings,
    done: &(dyn Fn(&Path, &Result<Outcome>) + Sync),
) -> Vec<Result<Outcome>> {
    dirs.par_iter()
        .map(|d| {
            let r = job(d, s).and_then(session::run);
            done(d, &r);
            r
        })
        .collect()
}
