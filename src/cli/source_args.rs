//! The options that choose a source (`--port`, `--replay`, `--demo`), its link and how
//! its samples become readings, shared by the commands that read one; `run_plan` turns
//! them into a run.

use std::path::PathBuf;

use dbtrail::coupler::{coupler_from_texts, Coupler, CouplerError};
use dbtrail::decode::Format;
use dbtrail::sim::Scenario;

/// The bundled profile the demo runs with when no `--profile` is given.
pub const DEMO_PROFILE: &str = include_str!("../../profiles/demo-diode.toml");

/// The bundled coupler set-up the `match` demo runs with when no `--coupler` is given,
/// and the texts of the two arms' profiles it names.
pub const DEMO_COUPLER: BundledCoupler = BundledCoupler {
    setup: include_str!("../../profiles/demo-coupler.toml"),
    profiles: &[
        (
            "demo-coupler-forward.toml",
            include_str!("../../profiles/demo-coupler-forward.toml"),
        ),
        (
            "demo-coupler-reflected.toml",
            include_str!("../../profiles/demo-coupler-reflected.toml"),
        ),
    ],
};

/// A coupler set-up carried in the program: its text and its profiles' texts by name.
pub struct BundledCoupler {
    /// The set-up file's text.
    pub setup: &'static str,
    /// Each profile it names, with its text.
    pub profiles: &'static [(&'static str, &'static str)],
}

impl BundledCoupler {
    /// The set-up, validated with both profiles.
    pub fn load(&self) -> Result<Coupler, CouplerError> {
        coupler_from_texts(self.setup, "bundled demo coupler", |named| {
            self.profiles
                .iter()
                .find(|(name, _)| *name == named)
                .map(|(_, text)| *text)
        })
    }
}

#[derive(clap::Args, Debug)]
#[group(required = true, multiple = false, id = "source")]
pub struct SourceArgs {
    /// Serial port to read, e.g. /dev/ttyUSB0 (`dbtrail ports` lists them)
    #[arg(long, group = "source")]
    pub port: Option<String>,
    /// A raw capture to replay (ASCII or binary)
    #[arg(long, group = "source")]
    pub replay: Option<PathBuf>,
    /// Run the built-in simulator: soak, tune, sweep, overload or match
    #[arg(long, group = "source", num_args = 0..=1, default_missing_value = "soak", value_parser = parse_scenario)]
    pub demo: Option<Scenario>,
}

/// How the samples become readings: the profile, the frequency and an extra offset.
#[derive(clap::Args, Debug)]
pub struct ReadingArgs {
    /// Detector profile (TOML); --demo uses the bundled demo profile without one
    #[arg(long)]
    pub profile: Option<PathBuf>,
    /// Coupler set-up (TOML) instead of --profile: forward and reflected power from two
    /// channels, and the match of the two
    #[arg(long, conflicts_with = "profile")]
    pub coupler: Option<PathBuf>,
    /// Frequency in use, e.g. 145.5MHz (default: the demo scenario's, else the profile's)
    #[arg(long, allow_hyphen_values = true, value_parser = super::parse_frequency_arg)]
    pub freq: Option<f64>,
    /// Extra offset in dB added to the profile's, e.g. 10dB for another attenuator
    #[arg(long, default_value = "0dB", value_parser = super::parse_db_arg, allow_hyphen_values = true)]
    pub offset: f64,
}

#[derive(clap::Args, Debug)]
pub struct LinkArgs {
    /// Baud rate for --port
    #[arg(long, default_value_t = 115_200, allow_hyphen_values = true)]
    pub baud: u32,
    /// Wire format: auto, ascii or binary
    #[arg(long, default_value = "auto", value_parser = parse_format)]
    pub format: Format,
    /// Sample rate used to stamp --replay samples, Hz; for --demo, the simulated rate
    #[arg(long, default_value_t = 1000.0, allow_hyphen_values = true, value_parser = parse_rate)]
    pub rate: f64,
    /// Pace --replay in real time instead of as fast as possible
    #[arg(long)]
    pub realtime: bool,
    /// Run --demo as fast as possible instead of in real time
    #[arg(long)]
    pub fast: bool,
    /// Seed of the simulator's noise
    #[arg(long, default_value_t = 1, allow_hyphen_values = true)]
    pub seed: u64,
}

pub fn parse_scenario(text: &str) -> Result<Scenario, String> {
    Scenario::from_name(text).ok_or_else(|| {
        let names: Vec<&str> = Scenario::ALL.iter().map(|s| s.name()).collect();
        format!(
            "unknown scenario `{text}`; choose one of: {}",
            names.join(", ")
        )
    })
}

fn parse_format(text: &str) -> Result<Format, String> {
    Format::from_name(text)
        .ok_or_else(|| format!("unknown format `{text}`; choose auto, ascii or binary"))
}

/// The sample rates accepted: one sample in 1000 s to ten million a second, so that every
/// stamp and interval stays in a calendar's range.
pub const RATE_RANGE_HZ: (f64, f64) = (1e-3, 1e7);

pub fn parse_rate(text: &str) -> Result<f64, String> {
    let (low, high) = RATE_RANGE_HZ;
    match dbtrail::units::parse_hertz(text) {
        Ok(hz) if (low..=high).contains(&hz) => Ok(hz),
        Ok(_) | Err(dbtrail::units::UnitError::OutOfRange { .. }) => Err(format!(
            "`{text}` is out of range: a sample rate must lie between 0.001 and 10M samples/s"
        )),
        Err(e) => Err(format!("{e} (a sample rate such as 1000 or 10k)")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use dbtrail::coupler::load_coupler;

    // Source: the files in profiles/ are what the bundled set-up must be; loading them from
    // disk is the program's other way to the same coupler.
    #[test]
    fn the_bundled_coupler_is_the_one_its_files_load() {
        let path = concat!(env!("CARGO_MANIFEST_DIR"), "/profiles/demo-coupler.toml");
        let from_files = load_coupler(std::path::Path::new(path)).unwrap();
        let bundled = DEMO_COUPLER.load().unwrap();
        assert_eq!(
            format!("{:?}", bundled.setup),
            format!("{:?}", from_files.setup)
        );
        assert_eq!(
            format!("{:?}", bundled.forward),
            format!("{:?}", from_files.forward)
        );
        assert_eq!(
            format!("{:?}", bundled.reflected),
            format!("{:?}", from_files.reflected)
        );
        assert_ne!(bundled.forward.name, bundled.reflected.name);
    }
}
