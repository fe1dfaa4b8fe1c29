//! `dbtrail fit`: fit a detector model to a points CSV and write the profile.

use std::io::Write;
use std::path::{Path, PathBuf};

use anyhow::{anyhow, Context};
use dbtrail::calibration::Calibration;
use dbtrail::detector::Weighting;
use dbtrail::points::{read_points, read_settings, PointRow, PointsSettings, Setting};
use dbtrail::printable::escape_controls;
use dbtrail::profile::raw::{FreqValue, RawAdc, RawModel, RawProfile};
use dbtrail::profile::{
    parse_profile, parse_profile_bytes, render_profile, too_many_points, Profile, ProfileError,
    MAX_PROFILE_POINTS,
};
use dbtrail::units::DEFAULT_OHMS;

use super::{emit, parse_frequency_arg, parse_ohms, summary, BadInput, Failure, Runtime};

/// Every setting below may be left out when the points file states it in a `# key = value`
/// line, as the points CSV that `calibrate` writes does; an option given overrides the
/// file's line (and a difference is reported).
#[derive(clap::Args)]
pub struct Args {
    /// Points file: CSV with header `applied,counts`
    points: PathBuf,
    /// Detector model to fit [default: the file's model.kind line, else table, as calibrate]
    #[arg(long, value_parser = ["table", "diode", "log"])]
    model: Option<String>,
    /// ADC resolution in bits (1 to 24) [default: the file's adc.bits line]
    #[arg(long, allow_hyphen_values = true)]
    adc_bits: Option<i64>,
    /// ADC reference voltage, volts [default: the file's adc.vref line]
    #[arg(long, allow_hyphen_values = true, value_parser = super::parse_number_arg)]
    vref: Option<f64>,
    /// Divider ratio: detector volts / ADC pin volts [default: the file's adc.divider line, else 1]
    #[arg(long, allow_hyphen_values = true, value_parser = super::parse_number_arg)]
    divider: Option<f64>,
    /// Reference impedance in ohms [default: the file's ohms line, else 50]
    #[arg(long, value_parser = parse_ohms, allow_hyphen_values = true)]
    ohms: Option<f64>,
    /// Frequency the points were measured at, e.g. 10MHz [default: the file's
    /// reference_frequency line, else 10MHz, as calibrate]
    #[arg(long, allow_hyphen_values = true, value_parser = parse_frequency_arg)]
    freq: Option<f64>,
    /// ADC counts read with no signal applied [default: the file's adc.zero_counts line, else 0]
    #[arg(long, allow_hyphen_values = true, value_parser = super::parse_counts_arg)]
    zero_counts: Option<f64>,
    /// Table model axis: log-volts (diode detectors) or volts (log-amps)
    #[arg(long, value_parser = ["log-volts", "volts"])]
    axis: Option<String>,
    /// Diode junction temperature in kelvin during the calibration
    #[arg(long, allow_hyphen_values = true, value_parser = super::parse_number_arg)]
    temperature: Option<f64>,
    /// Profile name (default: the output file's stem)
    #[arg(long)]
    name: Option<String>,
    /// Where to write the profile
    #[arg(long)]
    out: PathBuf,
    /// Overwrite the output file if it exists
    #[arg(long)]
    force: bool,
}

/// The settings the fit uses: each from its option, else the points file, else the default.
struct FitSettings {
    model: String,
    bits: i64,
    vref: f64,
    divider: f64,
    ohms: f64,
    freq: f64,
    zero_counts: f64,
    axis: Option<String>,
    temperature: Option<f64>,
}

/// The option's value if given, else the file's; reports on stderr when both are given
/// and differ, since the file records what the bench used.
fn pick<T: PartialEq + std::fmt::Display>(
    option: Option<T>,
    flag: &str,
    file: Option<Setting<T>>,
    origin: &str,
) -> Option<T> {
    match (option, file) {
        (Some(given), Some(line)) if given != line.value => {
            super::say_err!(
                "dbtrail: {flag} {given} given, the points file says {} ({origin} line {}); using {given}",
                line.value,
                line.line
            );
            Some(given)
        }
        (Some(given), _) => Some(given),
        (None, line) => line.map(|l| l.value),
    }
}

fn fit_settings(args: &Args, file: PointsSettings, origin: &str) -> anyhow::Result<FitSettings> {
    let bits = pick(args.adc_bits, "--adc-bits", file.bits, origin);
    let vref = pick(args.vref, "--vref", file.vref, origin);
    let (Some(bits), Some(vref)) = (bits, vref) else {
        return Err(anyhow!(
            "give the ADC with --adc-bits and --vref: {origin} has no `# adc.bits` and \
             `# adc.vref` lines (the points CSV that calibrate writes has them)"
        ));
    };
    let freq_text = |f: Option<Setting<f64>>| {
        f.map(|s| Setting {
            value: FreqText(s.value),
            line: s.line,
        })
    };
    Ok(FitSettings {
        model: pick(args.model.clone(), "--model", file.model, origin)
            .unwrap_or_else(|| "table".into()),
        bits,
        vref,
        divider: pick(args.divider, "--divider", file.divider, origin).unwrap_or(1.0),
        ohms: pick(args.ohms, "--ohms", file.ohms, origin).unwrap_or(DEFAULT_OHMS),
        freq: pick(
            args.freq.map(FreqText),
            "--freq",
            freq_text(file.reference_hz),
            origin,
        )
        .map_or(DEFAULT_FREQ_HZ, |f| f.0),
        zero_counts: pick(args.zero_counts, "--zero-counts", file.zero_counts, origin)
            .unwrap_or(0.0),
        axis: pick(args.axis.clone(), "--axis", file.axis, origin),
        temperature: pick(args.temperature, "--temperature", file.temperature, origin),
    })
}

/// A frequency shown with its unit in a conflict report.
#[derive(PartialEq)]
struct FreqText(f64);

impl std::fmt::Display for FreqText {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&dbtrail::units::format_frequency(self.0))
    }
}

/// The reference frequency when neither option nor file gives one: calibrate's default.
const DEFAULT_FREQ_HZ: f64 = 10e6;

/// The largest points file read: far more than the most points a profile holds, written
/// out with every column a points file may have.
const POINTS_MAX_BYTES: u64 = 16 << 20;

pub fn run(args: Args) -> Result<(), Failure> {
    let origin = args.points.display().to_string();
    let bytes = super::files::read_bounded(&args.points, POINTS_MAX_BYTES, "points file")?;
    let rows = read_points(&bytes, &origin).bad_input()?;
    let settings =
        fit_settings(&args, read_settings(&bytes, &origin).bad_input()?, &origin).bad_input()?;
    if rows.len() > MAX_PROFILE_POINTS {
        return Err(anyhow!("{origin}: {}", too_many_points(rows.len()))).bad_input();
    }
    let raw = raw_profile(&settings, &rows, profile_name(&args)?);
    let fitted = validate(&raw, &rows, &origin).bad_input()?;
    let raw = with_fitted_params(raw, &fitted);
    let header = format!(
        "Written by dbtrail fit from {origin}.\nApplied levels are at the detector input, measured at {}.",
        dbtrail::units::format_frequency(settings.freq)
    );
    let text = render_profile(&raw, &header)
        .context("cannot render the profile as TOML")
        .runtime()?;
    let profile = loads_as_written(&text, &args.out).bad_input()?;
    write_new(&args.out, &text, args.force)?;
    let cal = Calibration::new(&profile, None, 0.0);
    let mut report = summary::setup(&profile, &cal);
    report.push_str(&summary::residuals(&profile));
    report.push_str(&weighting_note(&profile));
    let shown = args.out.display().to_string();
    report.push_str(&format!("\nWrote {}.\n", escape_controls(&shown)));
    emit(&report)
}

/// How the fit weighed the points and what its residuals said of the stated noise.
fn weighting_note(profile: &Profile) -> String {
    let Some(fit) = profile.model.detector.covariance() else {
        return String::new();
    };
    let how = match fit.weighting {
        Weighting::Absolute => "weighted by each point's std_counts/√samples",
        Weighting::Relative => {
            "weighted by each point's std_counts only (some points lack `samples`,\n\
             so the weights are relative)"
        }
        Weighting::Unweighted => {
            return "\nFit unweighted: the scatter of the points sets the model's uncertainty\n\
                    (give std_counts and samples for every point to weight it).\n"
                .into()
        }
    };
    let verdict = match (fit.weighting, fit.residual_term) {
        (Weighting::Absolute, false) => "the scatter is what the stated noise explains",
        (Weighting::Absolute, true) => {
            "more scatter than the stated noise explains:\nthe model's uncertainty is widened \
             by the residuals (re-measure, or check that the model\nsuits the detector)"
        }
        _ => "the scatter sets the model's uncertainty",
    };
    format!(
        "\nFit {how};\nχ²/(n − 2) = {:.3} over {} degrees of freedom: {verdict}.\n",
        fit.reduced_chi2, fit.dof
    )
}

/// `--name`, else the output file's stem; refused when it holds a control character,
/// which would break the lines of a log or drive the terminal that shows the name.
fn profile_name(args: &Args) -> Result<String, Failure> {
    let name = args.name.clone().unwrap_or_else(|| {
        args.out
            .file_stem()
            .map_or("detector".into(), |s| s.to_string_lossy().into_owned())
    });
    if !name.chars().any(char::is_control) {
        return Ok(name);
    }
    let given = if args.name.is_some() {
        "--name"
    } else {
        "the name taken from --out's file name"
    };
    Err(anyhow!(
        "{given} `{}` holds a control character (a line break, tab or escape); a profile's \
         name is written into logs and shown on screens, so give --name in plain characters",
        escape_controls(&name)
    ))
    .bad_input()
}

fn raw_profile(args: &FitSettings, rows: &[PointRow], name: String) -> RawProfile {
    RawProfile {
        name,
        description: None,
        ohms: Some(args.ohms),
        reference_frequency: FreqValue::Hz(args.freq),
        adc: RawAdc {
            bits: args.bits,
            vref: args.vref,
            divider: Some(args.divider),
            zero_counts: (args.zero_counts != 0.0).then_some(args.zero_counts),
            clip_margin: None,
        },
        model: RawModel {
            kind: args.model.clone(),
            axis: args.axis.clone(),
            temperature: args.temperature,
            n: None,
            vl: None,
            xti: None,
            eg_ev: None,
            slope: None,
            intercept: None,
            points: rows.iter().map(|r| r.point.clone()).collect(),
        },
        frequency_correction: None,
        offset: None,
        limits: None,
        uncertainty: None,
        temperature: None,
    }
}

/// Runs the profile through the same validation as a file, with point problems pointed
/// back at the CSV line they came from.
fn validate(raw: &RawProfile, rows: &[PointRow], origin: &str) -> anyhow::Result<Profile> {
    let text = render_profile(raw, "").context("cannot render the profile as TOML")?;
    match parse_profile(&text, "(fit)") {
        Ok(profile) => Ok(profile),
        Err(ProfileError::Invalid { problems, .. }) => {
            let lines: Vec<String> = problems
                .iter()
                .map(|p| match point_index(&p.field) {
                    Some(i) if i < rows.len() => {
                        let column = p.field.rsplit('.').next().filter(|c| !c.contains('['));
                        let column = column.map_or(String::new(), |c| format!("{c}: "));
                        format!("{origin}:{}: {column}{}", rows[i].line, p.message)
                    }
                    _ => format!("{}: {}", option_name(&p.field), p.message),
                })
                .collect();
            Err(anyhow!(
                "cannot fit these points:\n  {}",
                lines.join("\n  ")
            ))
        }
        Err(e) => Err(e.into()),
    }
}

/// The profile as `check` will load it from the file about to be written: a fit that
/// `check` would refuse (too large a file, parameters that miss the points) is refused
/// here, with the loader's own message, before anything is written.
fn loads_as_written(text: &str, out: &Path) -> anyhow::Result<Profile> {
    parse_profile_bytes(text.as_bytes(), &out.display().to_string()).with_context(|| {
        format!(
            "the fitted profile would not load, so {} was not written",
            out.display()
        )
    })
}

/// `model.points[3].counts` → 3.
fn point_index(field: &str) -> Option<usize> {
    let rest = field.strip_prefix("model.points[")?;
    rest[..rest.find(']')?].parse().ok()
}

/// The command-line option a profile field came from.
fn option_name(field: &str) -> String {
    match field {
        "adc.bits" => "--adc-bits".into(),
        "adc.vref" => "--vref".into(),
        "adc.divider" => "--divider".into(),
        "adc.zero_counts" => "--zero-counts".into(),
        "model.axis" => "--axis".into(),
        "model.temperature" => "--temperature".into(),
        "ohms" => "--ohms".into(),
        "reference_frequency" => "--freq".into(),
        "name" => "--name".into(),
        "model.points" => "points".into(),
        other => other.into(),
    }
}

/// The raw profile with the fitted parameters written in, so the file keeps them.
fn with_fitted_params(mut raw: RawProfile, profile: &Profile) -> RawProfile {
    let model = &profile.model;
    raw.model.slope = model.param("slope");
    raw.model.intercept = model.param("intercept");
    raw.model.n = model.param("n");
    raw.model.vl = model.param("vl");
    raw
}

/// Writes a new file, refusing to replace one unless `force`.
fn write_new(path: &Path, text: &str, force: bool) -> Result<(), Failure> {
    let mut file = super::files::create(path, force)?;
    file.write_all(text.as_bytes())
        .and_then(|()| crate::logs::sync(&file))
        .with_context(|| format!("cannot write {}", path.display()))
        .runtime()
}
