//! Detector profiles: TOML files that describe one detector and its set-up (ADC, model and
//! calibration points, frequency correction, offset, limits), loaded in two stages: serde
//! reads the raw fields ([`raw`]), then validation checks every value and builds the model,
//! reporting each problem with its file, line, column and field ([`locate`]).

pub mod locate;
pub mod raw;
pub(crate) mod validate;

use std::fmt;
use std::io::Read;
use std::path::Path;
use std::sync::Arc;

use thiserror::Error;

use crate::adc::Adc;
use crate::correction::{FreqTable, FrequencyCorrection, Offset};
use crate::detector::thermal::ThermalModel;
use crate::detector::SaturationLaw;
use crate::detector::{residuals_db, Axis, CalPoint, Detector, ModelKind, PointU};
use crate::thermal::TemperatureChannel;
use crate::units::Level;
use crate::units::CELSIUS_ZERO_K;
use locate::{line_col, FieldPath, Located};
pub use raw::RawProfile;

/// The largest profile file read; anything bigger is not a profile.
pub const MAX_PROFILE_BYTES: usize = 1 << 20;

/// The most calibration points a profile may hold. A bench calibration has tens; a swept
/// one at 0.1 dB steps over 100 dB has a thousand. Written by `fit` (about 60 to 100 bytes
/// a point) this many stay well inside [`MAX_PROFILE_BYTES`].
pub const MAX_PROFILE_POINTS: usize = 4096;

/// One thing wrong with a profile, and where.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// 1-based line.
    pub line: usize,
    /// 1-based column.
    pub column: usize,
    /// The field, e.g. `model.points[2].counts`, or `(file)`.
    pub field: String,
    /// What is wrong and what to do.
    pub message: String,
}

/// A kind of TOML file dbtrail reads its set-up from, for the loader's messages and its
/// check of unknown keys.
#[derive(Debug)]
pub struct FileKind {
    /// What the file is called in messages, e.g. `profile`.
    pub noun: &'static str,
    /// Where examples of it are, e.g. `profiles/`.
    pub examples: &'static str,
    /// The document that describes every field.
    pub docs: &'static str,
    /// The keys each of its tables may hold.
    pub schema: locate::Schema,
    /// Top-level keys that mark a file of another kind given in its place, and what to
    /// say then.
    pub mistaken_for: (&'static [&'static str], &'static str),
}

/// A detector profile.
pub const PROFILE_FILE: FileKind = FileKind {
    noun: "profile",
    examples: "profiles/",
    docs: "docs/profiles.md",
    schema: locate::PROFILE_SCHEMA,
    mistaken_for: (
        &["forward", "reflected"],
        "this is a coupler set-up, not a detector profile: give it with --coupler FILE",
    ),
};

/// Why a profile (or another set-up file, as `kind` says) could not be used.
#[derive(Debug, Error)]
pub enum ProfileError {
    /// The file could not be read.
    #[error("cannot read {} {path}", kind.noun)]
    Io {
        /// What kind of file.
        kind: &'static FileKind,
        /// The path.
        path: String,
        /// What the OS said.
        source: std::io::Error,
    },
    /// The path names something other than a regular file (a FIFO, a device, a folder).
    #[error(
        "{noun} {path} is {what}, not a regular file; give the path of a {noun} file (TOML), \
         for example one in {examples}",
        noun = kind.noun,
        examples = kind.examples
    )]
    NotAFile {
        /// What kind of file.
        kind: &'static FileKind,
        /// The path.
        path: String,
        /// What it is instead, e.g. `a FIFO (named pipe)`.
        what: &'static str,
    },
    /// The file was read but is not a valid profile.
    #[error("{}", render_problems(kind, origin, problems))]
    Invalid {
        /// What kind of file.
        kind: &'static FileKind,
        /// The file name or other origin.
        origin: String,
        /// Every problem found.
        problems: Vec<Problem>,
    },
}

fn render_problems(kind: &FileKind, origin: &str, problems: &[Problem]) -> String {
    let mut out = format!(
        "{} {origin} is not valid ({} problem{}):",
        kind.noun,
        problems.len(),
        if problems.len() == 1 { "" } else { "s" }
    );
    for p in problems {
        out.push_str(&format!(
            "\n  {origin}:{}:{}: {}: {}",
            p.line, p.column, p.field, p.message
        ));
    }
    out.push_str(&format!("\n  (every field is described in {})", kind.docs));
    out
}

/// The detector model a profile built.
#[derive(Debug, Clone)]
pub struct Model {
    /// Which model.
    pub kind: ModelKind,
    /// The model itself.
    pub detector: Arc<dyn Detector>,
    /// The table axis, for the table model.
    pub axis: Option<Axis>,
    /// True when the parameters were fitted at load because the profile did not give them.
    pub fitted_at_load: bool,
    /// Remarks about the fit worth showing (a parameter on its bound, for instance).
    pub notes: Vec<String>,
    /// The model's parameters by their profile field names (`slope`, `intercept`, `n`, `vl`).
    pub params: Vec<(&'static str, f64)>,
    /// The model across board temperature, when the profile reads one; `detector` is then
    /// the model at its reference temperature.
    pub thermal: Option<Arc<ThermalModel>>,
}

impl Model {
    /// The detector-input dBm the model reads for `volts` with the board at `kelvin` (at
    /// its reference temperature without a model across temperature).
    pub fn reads_at(&self, volts: f64, kelvin: f64) -> f64 {
        match &self.thermal {
            Some(thermal) => thermal.at_kelvin(kelvin).detector.dbm_at(volts),
            None => self.detector.dbm_at(volts),
        }
    }

    /// A parameter by its profile field name.
    pub fn param(&self, name: &str) -> Option<f64> {
        self.params
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, v)| *v)
    }
}

/// One calibration point of a profile.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfilePoint {
    /// The applied level as written.
    pub applied: String,
    /// The applied level, parsed.
    pub level: Level,
    /// The applied level at the detector input, dBm.
    pub dbm: f64,
    /// Mean ADC counts.
    pub counts: f64,
    /// The board temperature when the point was taken, °C (on every point or on none).
    pub temp_c: Option<f64>,
    /// Detector output volts for those counts.
    pub volts: f64,
    /// How well those volts are known (from `std_counts` and `samples`).
    pub u_volts: PointU,
}

impl ProfilePoint {
    /// The point as the models take it.
    pub fn cal_point(&self) -> CalPoint {
        CalPoint {
            dbm: self.dbm,
            volts: self.volts,
            u_volts: self.u_volts,
        }
    }
}

/// Safe levels from the profile.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Limits {
    /// The detector's safe maximum input, dBm at the detector.
    pub detector_max_dbm: Option<f64>,
    /// The rated maximum at the reference plane, dBm.
    pub reference_max_dbm: Option<f64>,
}

/// A validated profile, ready to build a [`crate::calibration::Calibration`].
#[derive(Debug, Clone)]
pub struct Profile {
    /// Short name.
    pub name: String,
    /// What it is for.
    pub description: String,
    /// Reference impedance, ohms.
    pub ohms: f64,
    /// The frequency the detector curve was measured at, Hz.
    pub reference_hz: f64,
    /// The ADC front end.
    pub adc: Adc,
    /// The detector model.
    pub model: Model,
    /// The calibration points.
    pub points: Vec<ProfilePoint>,
    /// Frequency correction (true minus indicated), if any: the table, or the roll-off
    /// fitted to it.
    pub frequency_correction: Option<FrequencyCorrection>,
    /// Offset of what sits in front of the detector.
    pub offset: Offset,
    /// Safe levels.
    pub limits: Limits,
    /// The inputs of the uncertainty budget (the `[uncertainty]` table).
    pub uncertainty: UncertaintyInputs,
    /// The stream's board temperature channel (the `[temperature]` table), if any.
    pub temperature: Option<TemperatureChannel>,
    /// The fields as written.
    pub raw: RawProfile,
}

/// The profile's `[uncertainty]` inputs, every one optional. Standard uncertainties are
/// held at k = 1 whatever the profile wrote them as; reflections as |Γ| against frequency
/// (a table of (Hz, |Γ|) rows, interpolated as the correction tables are).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct UncertaintyInputs {
    /// Standard uncertainty of the calibration source's level, dB.
    pub source_u_db: Option<f64>,
    /// |Γ| of the calibration source's output.
    pub source_gamma: Option<FreqTable>,
    /// |Γ| of the detector's input.
    pub detector_gamma: Option<FreqTable>,
    /// Standard uncertainty of the offset (attenuator or coupler), dB.
    pub offset_u_db: Option<f64>,
    /// |Γ| at the input of what sits in front of the detector, when known.
    pub front_gamma: Option<FreqTable>,
    /// True when what sits in front is an attenuator, so the detector's reflection seen
    /// through it improves by twice its loss in return loss.
    pub front_is_attenuator: bool,
    /// |Γ| of the device under test's output.
    pub dut_gamma: Option<FreqTable>,
}

impl Profile {
    /// The saturation law of the profile's diode: its `xti` and `eg_ev`, a Schottky
    /// diode's where not given (the loader has checked them).
    pub fn diode_law(&self) -> SaturationLaw {
        let default = SaturationLaw::default();
        SaturationLaw {
            xti: self.raw.model.xti.unwrap_or(default.xti),
            eg_ev: self.raw.model.eg_ev.unwrap_or(default.eg_ev),
        }
    }

    /// The points as the models take them.
    pub fn cal_points(&self) -> Vec<CalPoint> {
        self.points.iter().map(ProfilePoint::cal_point).collect()
    }

    /// Each point's error in dB under the model, at the point's board temperature.
    pub fn residuals_db(&self) -> Vec<f64> {
        if self.model.thermal.is_none() {
            return residuals_db(self.model.detector.as_ref(), &self.cal_points());
        }
        self.points
            .iter()
            .map(|p| self.model.reads_at(p.volts, self.point_kelvin(p)) - p.dbm)
            .collect()
    }

    /// The board temperature a point was taken at, K: its `temp_c`, else the model's
    /// (a diode's `temperature`, 300 K by default).
    pub fn point_kelvin(&self, point: &ProfilePoint) -> f64 {
        let untagged = self.raw.model.temperature.unwrap_or(300.0);
        point.temp_c.map_or(untagged, |c| c + CELSIUS_ZERO_K)
    }
}

/// Reads and validates a profile file.
pub fn load_profile(path: &Path) -> Result<Profile, ProfileError> {
    let bytes = read_profile_file(path)?;
    parse_profile_bytes(&bytes, &path.display().to_string())
}

/// The bytes of a profile file, read once and never more than [`MAX_PROFILE_BYTES`]: a
/// FIFO, a device or a folder is refused before it is opened (and the file is opened so
/// that a FIFO put in its place meanwhile cannot block), a longer file after the limit.
pub fn read_profile_file(path: &Path) -> Result<Vec<u8>, ProfileError> {
    read_setup_file(path, &PROFILE_FILE)
}

/// The bytes of a set-up file of `kind`, read as [`read_profile_file`] reads a profile.
pub fn read_setup_file(path: &Path, kind: &'static FileKind) -> Result<Vec<u8>, ProfileError> {
    let origin = path.display().to_string();
    let io_error = |source| ProfileError::Io {
        kind,
        path: origin.clone(),
        source,
    };
    refuse_unless_regular(&std::fs::metadata(path).map_err(io_error)?, kind, &origin)?;
    let file = open_without_blocking(path).map_err(io_error)?;
    let metadata = file.metadata().map_err(io_error)?;
    refuse_unless_regular(&metadata, kind, &origin)?;
    let limit = MAX_PROFILE_BYTES as u64 + 1;
    let mut bytes = Vec::with_capacity(metadata.len().min(limit) as usize);
    file.take(limit).read_to_end(&mut bytes).map_err(io_error)?;
    if bytes.len() > MAX_PROFILE_BYTES {
        let len = metadata.len().max(bytes.len() as u64);
        return Err(whole_file_problem(kind, &origin, too_long(kind, len)));
    }
    Ok(bytes)
}

fn open_without_blocking(path: &Path) -> std::io::Result<std::fs::File> {
    let mut options = std::fs::OpenOptions::new();
    options.read(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(libc::O_NONBLOCK);
    }
    options.open(path)
}

fn refuse_unless_regular(
    metadata: &std::fs::Metadata,
    kind: &'static FileKind,
    origin: &str,
) -> Result<(), ProfileError> {
    let file_type = metadata.file_type();
    if file_type.is_file() {
        return Ok(());
    }
    let mut what = if file_type.is_dir() {
        "a folder"
    } else {
        "something else"
    };
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if file_type.is_fifo() {
            what = "a FIFO (named pipe)";
        } else if file_type.is_char_device() {
            what = "a character device";
        } else if file_type.is_block_device() {
            what = "a block device";
        } else if file_type.is_socket() {
            what = "a socket";
        }
    }
    Err(ProfileError::NotAFile {
        kind,
        path: origin.to_string(),
        what,
    })
}

fn whole_file_problem(kind: &'static FileKind, origin: &str, message: String) -> ProfileError {
    ProfileError::Invalid {
        kind,
        origin: origin.to_string(),
        problems: vec![Problem::whole_file(message)],
    }
}

/// Why `count` calibration points are too many, and what to do.
pub fn too_many_points(count: usize) -> String {
    format!(
        "{count} calibration points; a profile holds at most {MAX_PROFILE_POINTS}: keep every \
         few tenths of a dB of a sweep (the curve between points is interpolated) or split it"
    )
}

fn too_long(kind: &FileKind, bytes: u64) -> String {
    format!(
        "the file is {bytes} bytes; a {} is at most {MAX_PROFILE_BYTES} bytes: is this the \
         right file?",
        kind.noun
    )
}

/// Validates a profile given as bytes; `origin` names it in messages.
pub fn parse_profile_bytes(bytes: &[u8], origin: &str) -> Result<Profile, ProfileError> {
    let text = setup_text(bytes, &PROFILE_FILE, origin)?;
    parse_profile(text, origin)
}

/// Validates a profile given as text; `origin` names it in messages.
pub fn parse_profile(text: &str, origin: &str) -> Result<Profile, ProfileError> {
    parse_setup(text, origin, &PROFILE_FILE, validate::validate)
}

/// The text of a set-up file given as bytes: within the size limit, and UTF-8.
pub fn setup_text<'b>(
    bytes: &'b [u8],
    kind: &'static FileKind,
    origin: &str,
) -> Result<&'b str, ProfileError> {
    if bytes.len() > MAX_PROFILE_BYTES {
        return Err(whole_file_problem(
            kind,
            origin,
            too_long(kind, bytes.len() as u64),
        ));
    }
    std::str::from_utf8(bytes).map_err(|e| {
        let (line, column) = line_col(&String::from_utf8_lossy(bytes), e.valid_up_to());
        ProfileError::Invalid {
            kind,
            origin: origin.to_string(),
            problems: vec![Problem {
                line,
                column,
                field: "(file)".into(),
                message: format!(
                    "bytes that are not UTF-8 text: a {} is a TOML text file",
                    kind.noun
                ),
            }],
        }
    })
}

/// A set-up file of `kind` in its two stages: serde reads the raw fields (after a check
/// for keys the kind does not have), then `validate` checks every value; each problem is
/// tied to its line, column and field.
pub fn parse_setup<R: serde::de::DeserializeOwned, T>(
    text: &str,
    origin: &str,
    kind: &'static FileKind,
    validate: impl FnOnce(R) -> Result<T, Vec<(FieldPath, String)>>,
) -> Result<T, ProfileError> {
    let invalid = |problems: Vec<Problem>| ProfileError::Invalid {
        kind,
        origin: origin.to_string(),
        problems,
    };
    let whole = |message: String| invalid(vec![Problem::whole_file(message)]);
    if text.trim().is_empty() {
        return Err(whole(format!(
            "the {} is empty; start from one in {}",
            kind.noun, kind.examples
        )));
    }
    let doc = Located::parse(text).map_err(|e| {
        let (line, column) = line_col(text, e.span().map_or(0, |s| s.start));
        invalid(vec![Problem {
            line,
            column,
            field: "(syntax)".into(),
            message: format!("not valid TOML: {}", e.message().trim()),
        }])
    })?;
    if doc.is_blank() {
        return Err(whole(format!(
            "the {} holds only comments or blank lines; start from one in {}",
            kind.noun, kind.examples
        )));
    }
    let unknown = doc.unknown_keys(kind.schema);
    let (marks, mistaken) = kind.mistaken_for;
    let top_level_unknown = |key: &str| {
        unknown
            .iter()
            .any(|(path, ..)| *path == FieldPath::key(key))
    };
    if marks.iter().all(|key| top_level_unknown(key)) {
        return Err(whole(mistaken.to_string()));
    }
    if !unknown.is_empty() {
        let problems = unknown
            .into_iter()
            .map(|(path, span, message)| Problem::at(&doc, span.start, &path, message))
            .collect();
        return Err(invalid(problems));
    }
    let raw: R = toml::from_str(text).map_err(|e| {
        let at = e.span().map_or(0, |s| s.start);
        let field = match missing_field(e.message()) {
            Some(name) => doc.table_at(at).then(name),
            None => doc.path_at(at),
        };
        invalid(vec![Problem::at(
            &doc,
            at,
            &field,
            friendly_serde_message(e.message()),
        )])
    })?;
    validate(raw).map_err(|found| {
        let mut problems: Vec<Problem> = found
            .into_iter()
            .map(|(path, message)| Problem::at(&doc, doc.span_of(&path).start, &path, message))
            .collect();
        problems.sort_by_key(|p| (p.line, p.column));
        invalid(problems)
    })
}

/// The field named by serde's "missing field `x`" message.
fn missing_field(message: &str) -> Option<&str> {
    let rest = message.trim().strip_prefix("missing field `")?;
    rest.split('`').next()
}

/// serde's wording, with the type names a person writing TOML knows.
fn friendly_serde_message(message: &str) -> String {
    let message = message
        .trim()
        .replace("expected f64", "expected a number")
        .replace("expected i64", "expected a whole number")
        .replace("expected u64", "expected a whole number, 0 or more")
        .replace("expected a string", "expected text in quotes")
        .replace("expected a sequence", "expected a list [ … ]");
    if let Some(field) = message.strip_prefix("missing field ") {
        return format!("{field} is required and missing; add it");
    }
    message
}

/// A profile as TOML text, with `header` lines written as comments above it.
pub fn render_profile(raw: &RawProfile, header: &str) -> Result<String, toml::ser::Error> {
    let mut out = String::new();
    for line in header.lines() {
        out.push_str("# ");
        out.push_str(line);
        out.push('\n');
    }
    out.push('\n');
    out.push_str(&toml::to_string(raw)?);
    Ok(out)
}

impl Problem {
    /// A problem with `field` at byte `offset` of the profile's text.
    fn at(doc: &Located, offset: usize, field: &locate::FieldPath, message: String) -> Self {
        let (line, column) = doc.line_col(offset);
        Problem {
            line,
            column,
            field: field.to_string(),
            message,
        }
    }

    /// A problem with the file as a whole.
    fn whole_file(message: String) -> Self {
        Problem {
            line: 1,
            column: 1,
            field: "(file)".into(),
            message,
        }
    }
}

impl fmt::Display for Problem {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{}:{}: {}: {}",
            self.line, self.column, self.field, self.message
        )
    }
}
