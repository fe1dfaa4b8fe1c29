//! The coupler set-up: a directional coupler in the line with a detector on its forward
//! arm and another on its reflected arm, both read as channels of one stream. Its TOML file
//! says which channel is which, the profile of each detector, each arm's coupling factor,
//! the coupler's directivity and through-loss against frequency, where the reference
//! plane is and the match the transmitter tolerates; it is loaded as a profile is, every
//! problem at its line and field (docs/profiles.md, "Coupler set-ups").

use std::path::{Path, PathBuf};

use serde::Deserialize;

use crate::calibration::Calibration;
use crate::correction::Offset;
use crate::decode::MAX_CHANNELS;
use crate::matching::{directivity_gamma, ArmPower, MatchInterval};
use crate::profile::locate::{did_you_mean, FieldPath, Schema};
use crate::profile::raw::RawOffset;
use crate::profile::validate::{db_figure, Bounds, Checker, Found, LEVEL_DBM};
use crate::profile::{
    load_profile, parse_profile, parse_setup, read_setup_file, setup_text, FileKind, Profile,
    ProfileError, PROFILE_FILE,
};
use crate::stats::{Bound, Figures};
use crate::uncertainty::Uncertainty;

/// The keys each table of a coupler set-up may hold.
const COUPLER_SCHEMA: Schema = &[
    (
        "",
        &[
            "name",
            "description",
            "reference_plane",
            "forward",
            "reflected",
            "coupler",
            "limits",
        ],
    ),
    ("forward", &["channel", "profile", "coupling"]),
    ("reflected", &["channel", "profile", "coupling"]),
    ("forward.coupling", &["db", "points"]),
    ("reflected.coupling", &["db", "points"]),
    ("forward.coupling.points", &["freq", "db"]),
    ("reflected.coupling.points", &["freq", "db"]),
    ("coupler", &["directivity", "through_loss"]),
    ("coupler.directivity", &["db", "points"]),
    ("coupler.through_loss", &["db", "points"]),
    ("coupler.directivity.points", &["freq", "db"]),
    ("coupler.through_loss.points", &["freq", "db"]),
    ("limits", &["swr_max", "reflected_max_dbm"]),
];

/// A coupler set-up file.
pub const COUPLER_FILE: FileKind = FileKind {
    noun: "coupler set-up",
    examples: "profiles/",
    docs: "docs/profiles.md (Coupler set-ups)",
    schema: COUPLER_SCHEMA,
    mistaken_for: (
        &["adc", "model"],
        "this is a detector profile, not a coupler set-up: give it with --profile FILE (to \
         `check`, as its first argument)",
    ),
};

const COUPLING_DB: Bounds = Bounds {
    lo: 0.0,
    hi: 100.0,
    what: "a coupling factor is the loss from the line to the arm, from 0 to 100 dB (30 for a \
           30 dB coupler)",
};
const DIRECTIVITY_DB: Bounds = Bounds {
    lo: 0.0,
    hi: 100.0,
    what: "a directivity lies from 0 to 100 dB (a bench coupler has 20 to 40)",
};
const THROUGH_LOSS_DB: Bounds = Bounds {
    lo: 0.0,
    hi: 20.0,
    what: "a through-loss lies from 0 to 20 dB (a few tenths for a coupler)",
};
const SWR_MAX: Bounds = Bounds {
    lo: 1.0,
    hi: 100.0,
    what: "the highest SWR tolerated lies above 1, up to 100 (often 2 or 3)",
};

/// The set-up as written.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawCoupler {
    /// A short name.
    pub name: String,
    /// Free text.
    #[serde(default)]
    pub description: Option<String>,
    /// `load` or `source`.
    pub reference_plane: String,
    /// The forward arm.
    pub forward: RawArm,
    /// The reflected arm.
    pub reflected: RawArm,
    /// The coupler's own figures.
    pub coupler: RawLine,
    /// What the transmitter tolerates.
    #[serde(default)]
    pub limits: Option<RawMatchLimits>,
}

/// `[forward]` or `[reflected]`.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawArm {
    /// The stream's channel, from 1.
    pub channel: i64,
    /// The detector's profile, relative to the set-up file.
    pub profile: String,
    /// Loss from the line to the arm, dB, fixed or against frequency.
    pub coupling: RawOffset,
}

/// `[coupler]`.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawLine {
    /// Directivity, dB.
    pub directivity: RawOffset,
    /// Loss from input to output port, dB (default 0).
    #[serde(default)]
    pub through_loss: Option<RawOffset>,
}

/// `[limits]`.
#[derive(Debug, Clone, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawMatchLimits {
    /// The highest SWR the transmitter tolerates.
    #[serde(default)]
    pub swr_max: Option<f64>,
    /// The most reflected power it tolerates, dBm at the reference plane.
    #[serde(default)]
    pub reflected_max_dbm: Option<f64>,
}

/// Where forward, reflected and net power are given.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReferencePlane {
    /// The coupler's output port, towards the load: the power the load is sent.
    Load,
    /// The coupler's input port, towards the transmitter.
    Source,
}

impl ReferencePlane {
    const NAMES: [&'static str; 2] = ["load", "source"];

    /// The plane's name in a set-up file.
    pub fn name(self) -> &'static str {
        match self {
            ReferencePlane::Load => "load",
            ReferencePlane::Source => "source",
        }
    }
}

/// One arm of the coupler.
#[derive(Debug, Clone, PartialEq)]
pub struct Arm {
    /// The stream's channel, from 0.
    pub channel: usize,
    /// The profile's path as written in the set-up file.
    pub profile: String,
    /// Loss from the line to the arm, dB.
    pub coupling: Offset,
}

/// What the transmitter tolerates.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct MatchLimits {
    /// The highest SWR.
    pub swr_max: Option<f64>,
    /// The most reflected power, dBm at the reference plane.
    pub reflected_max_dbm: Option<f64>,
}

/// A checked coupler set-up, its profiles not yet loaded.
#[derive(Debug, Clone, PartialEq)]
pub struct CouplerSetup {
    /// A short name.
    pub name: String,
    /// Free text.
    pub description: String,
    /// Where the powers are given.
    pub plane: ReferencePlane,
    /// The forward arm.
    pub forward: Arm,
    /// The reflected arm.
    pub reflected: Arm,
    /// Directivity, dB.
    pub directivity: Offset,
    /// Through-loss, dB.
    pub through_loss: Offset,
    /// What the transmitter tolerates.
    pub limits: MatchLimits,
}

impl CouplerSetup {
    /// What to add to the forward detector's reading at `hz` to have forward power at the
    /// reference plane, dB: the arm's coupling, less the through-loss when the plane is
    /// the load (the coupling is the loss from the input port to the arm).
    pub fn forward_offset_db(&self, hz: f64) -> f64 {
        let loss = match self.plane {
            ReferencePlane::Load => self.through_loss.at(hz).db,
            ReferencePlane::Source => 0.0,
        };
        self.forward.coupling.at(hz).db - loss
    }

    /// What to add to the reflected detector's reading at `hz` to have reflected power at
    /// the reference plane, dB: the arm's coupling (from the output port, where the
    /// reflected wave enters), less the through-loss when the plane is the source.
    pub fn reflected_offset_db(&self, hz: f64) -> f64 {
        let loss = match self.plane {
            ReferencePlane::Source => self.through_loss.at(hz).db,
            ReferencePlane::Load => 0.0,
        };
        self.reflected.coupling.at(hz).db - loss
    }
}

/// A coupler set-up with both detectors' profiles loaded.
#[derive(Debug, Clone)]
pub struct Coupler {
    /// The set-up.
    pub setup: CouplerSetup,
    /// The forward detector's profile.
    pub forward: Profile,
    /// The reflected detector's profile.
    pub reflected: Profile,
}

/// Both arms calibrated at one frequency, with the coupling added, and their budgets:
/// what turns two channels' figures into a match.
#[derive(Debug, Clone)]
pub struct CouplerCalibration {
    /// The forward arm's chain, powers at the reference plane.
    pub forward: Calibration,
    /// The reflected arm's chain.
    pub reflected: Calibration,
    /// The forward arm's uncertainty budget.
    pub forward_budget: Uncertainty,
    /// The reflected arm's.
    pub reflected_budget: Uncertainty,
    /// The coupler's leakage Γd at the frequency.
    pub leakage: f64,
}

impl CouplerCalibration {
    /// Both arms of `coupler` at `hz`.
    pub fn new(coupler: &Coupler, hz: f64) -> Self {
        let setup = &coupler.setup;
        let forward = Calibration::new(&coupler.forward, Some(hz), setup.forward_offset_db(hz));
        let reflected =
            Calibration::new(&coupler.reflected, Some(hz), setup.reflected_offset_db(hz));
        CouplerCalibration {
            forward_budget: Uncertainty::new(&coupler.forward, &forward),
            reflected_budget: Uncertainty::new(&coupler.reflected, &reflected),
            forward,
            reflected,
            leakage: directivity_gamma(setup.directivity.at(hz).db),
        }
    }

    /// The match of an interval from each arm's figures (their means over watts).
    pub fn interval(&self, forward: &Figures, reflected: &Figures) -> MatchInterval {
        MatchInterval::new(
            arm_power(forward, Some(&self.forward_budget)),
            arm_power(reflected, Some(&self.reflected_budget)),
            self.leakage,
        )
    }
}

/// One arm's mean power and its uncertainty (from `budget`, when there is one), as the
/// match takes them.
pub fn arm_power(figures: &Figures, budget: Option<&Uncertainty>) -> ArmPower {
    let u_db = match (figures.bound, figures.mean_dbm, figures.noise, budget) {
        (Bound::Exact, Some(mean), Some(noise), Some(budget)) => {
            Some(budget.budget(mean, Some(noise)).expanded_db())
        }
        _ => None,
    };
    ArmPower {
        watts: figures.mean_w,
        bound: figures.bound,
        u_db,
    }
}

/// Why a coupler set-up could not be used.
#[derive(Debug, thiserror::Error)]
pub enum CouplerError {
    /// The set-up file itself.
    #[error(transparent)]
    Setup(#[from] ProfileError),
    /// One arm's profile.
    #[error("the {arm} detector's profile, named in {origin} ({arm}.profile): {source}")]
    Profile {
        /// `forward` or `reflected`.
        arm: &'static str,
        /// The set-up file.
        origin: String,
        /// What is wrong with the profile.
        source: ProfileError,
    },
    /// An arm's profile reads a board temperature, which a coupler run does not
    /// compensate.
    #[error(
        "the {arm} detector's profile {profile}, named in {origin}, has a [temperature] table, \
         but a coupler run does not compensate its arms for temperature yet; remove the table \
         from that profile (its readings are then as calibrated), or record that detector on \
         its own with --profile"
    )]
    ArmTemperature {
        /// `forward` or `reflected`.
        arm: &'static str,
        /// The profile's name as the set-up gives it.
        profile: String,
        /// The set-up file.
        origin: String,
    },
}

/// Validates a coupler set-up given as text; `origin` names it in messages.
pub fn parse_coupler(text: &str, origin: &str) -> Result<CouplerSetup, ProfileError> {
    parse_setup(text, origin, &COUPLER_FILE, validate)
}

/// Reads and validates a coupler set-up file and loads both detectors' profiles, each
/// named relative to the set-up file's folder.
pub fn load_coupler(path: &Path) -> Result<Coupler, CouplerError> {
    let origin = path.display().to_string();
    let bytes = read_setup_file(path, &COUPLER_FILE)?;
    let setup = parse_coupler(setup_text(&bytes, &COUPLER_FILE, &origin)?, &origin)?;
    let folder = path.parent().unwrap_or(Path::new(""));
    with_profiles(setup, &origin, |named| {
        load_profile(&profile_path(folder, named))
    })
}

/// The set-up with both arms' profiles, each got by `profile` from the name the set-up
/// gives it; a failure names the arm and the set-up.
fn with_profiles(
    setup: CouplerSetup,
    origin: &str,
    profile: impl Fn(&str) -> Result<Profile, ProfileError>,
) -> Result<Coupler, CouplerError> {
    let arm = |arm: &'static str, named: &str| {
        let loaded = profile(named).map_err(|source| CouplerError::Profile {
            arm,
            origin: origin.to_string(),
            source,
        })?;
        match loaded.temperature {
            Some(_) => Err(CouplerError::ArmTemperature {
                arm,
                profile: named.to_string(),
                origin: origin.to_string(),
            }),
            None => Ok(loaded),
        }
    };
    Ok(Coupler {
        forward: arm("forward", &setup.forward.profile)?,
        reflected: arm("reflected", &setup.reflected.profile)?,
        setup,
    })
}

/// Validates a coupler set-up given as text and both detectors' profiles, whose texts
/// `profile_text` gives for the names the set-up writes (as a bundled set-up carries them
/// in the program); `origin` names the set-up in messages.
pub fn coupler_from_texts<'t>(
    setup_text: &str,
    origin: &str,
    profile_text: impl Fn(&str) -> Option<&'t str>,
) -> Result<Coupler, CouplerError> {
    let setup = parse_coupler(setup_text, origin)?;
    with_profiles(setup, origin, |named| match profile_text(named) {
        Some(text) => parse_profile(text, named),
        None => Err(ProfileError::Io {
            kind: &PROFILE_FILE,
            path: named.to_string(),
            source: std::io::Error::new(
                std::io::ErrorKind::NotFound,
                "no such profile is given with the set-up",
            ),
        }),
    })
}

/// A profile named in a set-up file: as given when absolute, else beside the file.
pub fn profile_path(folder: &Path, named: &str) -> PathBuf {
    let named = Path::new(named);
    if named.is_absolute() {
        named.to_path_buf()
    } else {
        folder.join(named)
    }
}

fn validate(raw: RawCoupler) -> Result<CouplerSetup, Found> {
    let mut check = Checker::default();
    if raw.name.trim().is_empty() {
        check.fail(
            FieldPath::key("name"),
            "the name is empty; give the set-up a short name",
        );
    }
    let plane = reference_plane(&mut check, &raw.reference_plane);
    let forward = arm(&mut check, "forward", &raw.forward);
    let reflected = arm(&mut check, "reflected", &raw.reflected);
    if let (Some(f), Some(r)) = (&forward, &reflected) {
        if f.channel == r.channel {
            check.fail(
                FieldPath::key("reflected").then("channel"),
                format!(
                    "the reflected arm reads channel {} as the forward arm does; each detector \
                     has a channel of its own",
                    r.channel + 1
                ),
            );
        }
    }
    let line = FieldPath::key("coupler");
    let directivity = db_figure(
        &mut check,
        line.then("directivity"),
        Some(&raw.coupler.directivity),
        &DIRECTIVITY_DB,
    );
    let through_loss = db_figure(
        &mut check,
        line.then("through_loss"),
        raw.coupler.through_loss.as_ref(),
        &THROUGH_LOSS_DB,
    );
    let limits = match_limits(&mut check, raw.limits.as_ref());
    let built = (|| {
        Some(CouplerSetup {
            name: raw.name.trim().to_string(),
            description: raw.description.clone().unwrap_or_default(),
            plane: plane?,
            forward: forward?,
            reflected: reflected?,
            directivity: directivity?,
            through_loss: through_loss?,
            limits,
        })
    })();
    check.outcome(built)
}

fn reference_plane(check: &mut Checker, written: &str) -> Option<ReferencePlane> {
    match written.trim() {
        "load" => Some(ReferencePlane::Load),
        "source" => Some(ReferencePlane::Source),
        other => {
            let hint = did_you_mean(other, &ReferencePlane::NAMES)
                .map(|name| format!("did you mean `{name}`? "))
                .unwrap_or_default();
            check.fail(
                FieldPath::key("reference_plane"),
                format!(
                    "`{other}` is not a reference plane; {hint}give `load` (powers at the \
                     coupler's output, towards the load) or `source` (at its input)"
                ),
            );
            None
        }
    }
}

fn arm(check: &mut Checker, name: &str, raw: &RawArm) -> Option<Arm> {
    let path = FieldPath::key(name);
    let channel = check.number(
        path.then("channel"),
        raw.channel as f64,
        |c| (1.0..=MAX_CHANNELS as f64).contains(&c),
        &format!("a channel is counted from 1, up to {MAX_CHANNELS}"),
    );
    if raw.profile.trim().is_empty() {
        check.fail(
            path.then("profile"),
            "no profile named; give the detector's profile file, relative to this file",
        );
    }
    let coupling = db_figure(
        check,
        path.then("coupling"),
        Some(&raw.coupling),
        &COUPLING_DB,
    );
    Some(Arm {
        channel: channel? as usize - 1,
        profile: raw.profile.trim().to_string(),
        coupling: coupling?,
    })
    .filter(|arm| !arm.profile.is_empty())
}

fn match_limits(check: &mut Checker, raw: Option<&RawMatchLimits>) -> MatchLimits {
    let Some(raw) = raw else {
        return MatchLimits::default();
    };
    let path = FieldPath::key("limits");
    MatchLimits {
        swr_max: raw
            .swr_max
            .and_then(|swr| check.within(path.then("swr_max"), swr, &SWR_MAX)),
        reflected_max_dbm: raw
            .reflected_max_dbm
            .and_then(|dbm| check.within(path.then("reflected_max_dbm"), dbm, &LEVEL_DBM)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const SETUP: &str = r#"
name = "bench coupler"
reference_plane = "load"

[forward]
channel = 1
profile = "forward.toml"
coupling = { db = 30.0 }

[reflected]
channel = 2
profile = "reflected.toml"
[reflected.coupling]
points = [{ freq = "1MHz", db = 30.4 }, { freq = "100MHz", db = 29.6 }]

[coupler]
directivity = { db = 25.0 }
through_loss = { db = 0.3 }

[limits]
swr_max = 2.0
"#;

    fn problems(text: &str) -> Vec<String> {
        match parse_coupler(text, "c.toml") {
            Err(ProfileError::Invalid { problems, .. }) => problems
                .iter()
                .map(|p| format!("{}:{} {}: {}", p.line, p.column, p.field, p.message))
                .collect(),
            other => panic!("refused as invalid, not {other:?}"),
        }
    }

    #[test]
    fn a_set_up_reads_as_written_and_the_plane_decides_where_the_through_loss_goes() {
        let setup = parse_coupler(SETUP, "c.toml").unwrap();
        assert_eq!(setup.plane, ReferencePlane::Load);
        assert_eq!((setup.forward.channel, setup.reflected.channel), (0, 1));
        assert_eq!(setup.limits.swr_max, Some(2.0));
        // At the load the forward wave has passed the line's loss; the reflected wave is
        // sampled where it enters, at the output port.
        assert!((setup.forward_offset_db(10e6) - 29.7).abs() < 1e-12);
        let reflected = setup.reflected.coupling.at(10e6).db;
        assert!((setup.reflected_offset_db(10e6) - reflected).abs() < 1e-12);
        let at_source = parse_coupler(
            &SETUP.replace(
                r#"reference_plane = "load""#,
                r#"reference_plane = "source""#,
            ),
            "c.toml",
        )
        .unwrap();
        assert!((at_source.forward_offset_db(10e6) - 30.0).abs() < 1e-12);
        assert!((at_source.reflected_offset_db(10e6) - (reflected - 0.3)).abs() < 1e-12);
    }

    #[test]
    fn each_problem_is_named_at_its_line_and_field() {
        let text = SETUP
            .replace("channel = 2", "channel = 1")
            .replace(r#"reference_plane = "load""#, r#"reference_plane = "lod""#)
            .replace("directivity = { db = 25.0 }", "directivity = { db = -3.0 }")
            .replace("swr_max = 2.0", "swr_max = 0.5");
        let found = problems(&text);
        assert_eq!(found.len(), 4, "{found:#?}");
        assert!(
            found[0].starts_with(
                "3:19 reference_plane: `lod` is not a reference plane; did you mean `load`?"
            ),
            "{found:#?}"
        );
        assert!(
            found[1].starts_with("11:11 reflected.channel: the reflected arm reads channel 1"),
            "{found:#?}"
        );
        assert!(
            found[2].contains("coupler.directivity.db: -3 is out of range; a directivity"),
            "{found:#?}"
        );
        assert!(
            found[3].contains("limits.swr_max: 0.5 is out of range"),
            "{found:#?}"
        );
    }

    #[test]
    fn a_key_the_set_up_does_not_have_is_refused_with_a_near_name() {
        let found = problems(&SETUP.replace("swr_max = 2.0", "swr_mx = 2.0"));
        assert_eq!(found.len(), 1, "{found:#?}");
        assert!(
            found[0].contains("limits.swr_mx: unknown key `swr_mx`; did you mean `swr_max`?"),
            "{found:#?}"
        );
    }

    #[test]
    fn a_coupling_table_out_of_range_is_named_at_its_row() {
        let found = problems(&SETUP.replace("db = 29.6", "db = 129.6"));
        assert_eq!(found.len(), 1, "{found:#?}");
        assert!(
            found[0].contains(
                "reflected.coupling.points[1].db: 129.6 is out of range; a coupling factor"
            ),
            "{found:#?}"
        );
    }

    #[test]
    fn a_profile_is_named_beside_the_set_up_unless_its_path_is_absolute() {
        let folder = Path::new("/bench/setups");
        assert_eq!(
            profile_path(folder, "fwd.toml"),
            Path::new("/bench/setups/fwd.toml")
        );
        assert_eq!(
            profile_path(folder, "/lib/fwd.toml"),
            Path::new("/lib/fwd.toml")
        );
    }

    #[test]
    fn both_profiles_load_from_beside_the_set_up_and_a_bad_one_names_its_arm() {
        let dir = tempfile::tempdir().unwrap();
        let with_board = include_str!("../profiles/demo-diode.toml");
        let demo = with_board.split("\n[temperature]").next().unwrap();
        std::fs::write(dir.path().join("forward.toml"), demo).unwrap();
        std::fs::write(dir.path().join("reflected.toml"), demo).unwrap();
        let path = dir.path().join("coupler.toml");
        std::fs::write(&path, SETUP).unwrap();
        let coupler = load_coupler(&path).unwrap();
        assert_eq!(coupler.forward.name, coupler.reflected.name);
        // An arm that reads its board's temperature is refused: a coupler run would not
        // compensate it.
        std::fs::write(dir.path().join("forward.toml"), with_board).unwrap();
        let err = load_coupler(&path).unwrap_err();
        assert!(
            matches!(err, CouplerError::ArmTemperature { arm: "forward", .. }),
            "{err}"
        );
        assert!(err.to_string().contains("remove the table"), "{err}");
        std::fs::write(dir.path().join("forward.toml"), demo).unwrap();
        std::fs::write(dir.path().join("reflected.toml"), "name = 3\n").unwrap();
        let said = load_coupler(&path).unwrap_err().to_string();
        assert!(
            said.starts_with("the reflected detector's profile, named in ")
                && said.contains("(reflected.profile): profile ")
                && said.contains("reflected.toml is not valid"),
            "{said}"
        );
    }

    #[test]
    fn a_profile_given_for_a_set_up_and_the_other_way_round_is_named_for_what_it_is() {
        let profile = include_str!("../profiles/demo-diode.toml");
        let found = problems(profile);
        assert_eq!(found.len(), 1, "{found:#?}");
        assert!(found[0].contains("(file): this is a detector profile, not a coupler set-up"));
        let Err(ProfileError::Invalid { problems, .. }) =
            crate::profile::parse_profile(SETUP, "c.toml")
        else {
            panic!("a set-up is not a profile");
        };
        assert_eq!(problems.len(), 1, "{problems:#?}");
        assert!(problems[0]
            .message
            .starts_with("this is a coupler set-up, not a detector"));
    }

    #[test]
    fn a_set_up_from_texts_names_the_arm_whose_profile_is_missing() {
        let err = coupler_from_texts(SETUP, "bundled", |_| None).unwrap_err();
        let message = err.to_string();
        assert!(
            matches!(err, CouplerError::Profile { arm: "forward", .. }),
            "{message}"
        );
        assert!(message.contains("forward.toml"), "{message}");
    }
}
