//! `dbtrail check`: validate a profile and summarise what it can measure.

use std::path::PathBuf;

use dbtrail::calibration::Calibration;
use dbtrail::printable::escape_controls;
use dbtrail::profile::load_profile;

use super::{emit, parse_counts_arg, parse_frequency_arg, summary, BadInput, Failure};

#[derive(clap::Args)]
pub struct Args {
    /// The profile file (TOML)
    profile: PathBuf,
    /// Frequency in use, e.g. 145.5MHz (default: the profile's reference frequency)
    #[arg(long, allow_hyphen_values = true, value_parser = parse_frequency_arg)]
    freq: Option<f64>,
    /// Also show the reading for these ADC counts (fractional averages allowed)
    #[arg(long, num_args = 1.., value_name = "COUNTS", allow_hyphen_values = true, value_parser = parse_counts_arg)]
    counts: Vec<f64>,
}

pub fn run(args: Args) -> Result<(), Failure> {
    let profile = load_profile(&args.profile).bad_input()?;
    let cal = Calibration::new(&profile, args.freq, 0.0);
    let mut text = summary::setup(&profile, &cal);
    text.push_str(&summary::resolution(&cal));
    text.push_str(&summary::residuals(&profile));
    text.push_str(&summary::readings(&cal, &args.counts));
    let shown = args.profile.display().to_string();
    text.push_str(&format!("\n{} is valid.\n", escape_controls(&shown)));
    emit(&text)
}
