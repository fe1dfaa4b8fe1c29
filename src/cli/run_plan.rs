//! What `record` and `watch` run from: their source, link and reading options parsed once
//! into plain checked values ([`RunPlan`]), and the run started from them ([`StartedRun`]:
//! the profile, the calibration and its budget, the running source, and the context every
//! log header is written from).

use std::path::{Path, PathBuf};
use std::time::{Duration, SystemTime};

use anyhow::{anyhow, Context};
use dbtrail::calibration::Calibration;
use dbtrail::coupler::{load_coupler, profile_path, Coupler, CouplerCalibration, CouplerSetup};
use dbtrail::decode::Format;
use dbtrail::profile::{parse_profile, parse_profile_bytes, read_profile_file, Profile};
use dbtrail::record::RunContext;
use dbtrail::sim::matching::MatchBench;
use dbtrail::sim::{Scenario, SimBench, Simulator};
use dbtrail::uncertainty::Uncertainty;
use sha2::{Digest, Sha256};

use super::source_args::{LinkArgs, ReadingArgs, SourceArgs, DEMO_COUPLER, DEMO_PROFILE};
use super::{BadInput, Failure};
use crate::source::{open_port, ReplaySpec, Running, SerialSpec, SimSpec};

const DEMO_PROFILE_NAME: &str = "bundled profiles/demo-diode.toml";
const DEMO_COUPLER_NAME: &str = "bundled profiles/demo-coupler.toml";

/// Where the samples come from, with the link settings that source uses.
#[derive(Debug, Clone, PartialEq)]
pub enum SourcePlan {
    /// A serial port.
    Port {
        path: String,
        baud: u32,
        format: Format,
    },
    /// A raw capture, stamped at `rate_hz`.
    Replay {
        path: PathBuf,
        rate_hz: f64,
        realtime: bool,
        format: Format,
    },
    /// The built-in simulator.
    Demo {
        scenario: Scenario,
        rate_hz: f64,
        fast: bool,
        seed: u64,
    },
}

/// A run as the options ask for it, checked, before anything is opened.
#[derive(Debug, Clone, PartialEq)]
pub struct RunPlan {
    /// The source.
    pub source: SourcePlan,
    /// `--profile`; None runs the demo on its bundled profile.
    pub profile: Option<PathBuf>,
    /// `--coupler`: two arms and their match instead of one profile.
    pub coupler: Option<PathBuf>,
    /// The frequency to calibrate at: `--freq`, else the demo scenario's, else None (the
    /// profile's reference).
    pub freq_hz: Option<f64>,
    /// The extra offset, dB.
    pub offset_db: f64,
    /// The rate samples are stamped at when they carry none, Hz (`--rate`).
    pub rate_hz: f64,
}

impl RunPlan {
    /// The plan the options say; clap has checked each value on its own.
    pub fn from_args(source: &SourceArgs, link: &LinkArgs, reading: &ReadingArgs) -> Self {
        let plan = if let Some(path) = &source.port {
            SourcePlan::Port {
                path: path.clone(),
                baud: link.baud,
                format: link.format,
            }
        } else if let Some(path) = &source.replay {
            SourcePlan::Replay {
                path: path.clone(),
                rate_hz: link.rate,
                realtime: link.realtime,
                format: link.format,
            }
        } else {
            SourcePlan::Demo {
                scenario: source.demo.unwrap_or(Scenario::Soak),
                rate_hz: link.rate,
                fast: link.fast,
                seed: link.seed,
            }
        };
        let demo_freq = match &plan {
            SourcePlan::Demo { scenario, .. } => Some(scenario.frequency_hz()),
            _ => None,
        };
        RunPlan {
            source: plan,
            profile: reading.profile.clone(),
            coupler: reading.coupler.clone(),
            freq_hz: reading.freq.or(demo_freq),
            offset_db: reading.offset,
            rate_hz: link.rate,
        }
    }

    /// The same run paced as the present, as a screen shows it: a capture at its own
    /// pace, the simulator in real time.
    pub fn paced_as_the_present(mut self) -> Self {
        match &mut self.source {
            SourcePlan::Replay { realtime, .. } => *realtime = true,
            SourcePlan::Demo { fast, .. } => *fast = false,
            SourcePlan::Port { .. } => {}
        }
        self
    }

    /// A few words naming the source, for the screen's status line.
    pub fn short_label(&self) -> String {
        match &self.source {
            SourcePlan::Port { path, baud, .. } => format!("{path} @ {baud} baud"),
            SourcePlan::Replay { path, .. } => {
                let name = path.file_name().map_or(path.display().to_string(), |n| {
                    n.to_string_lossy().into_owned()
                });
                format!("replay {name}")
            }
            SourcePlan::Demo { scenario, .. } => format!("demo {}", scenario.name()),
        }
    }

    /// Loads the profile and starts the source; `until` bounds a simulator's run. A
    /// capture or a port starts first, its first samples waiting in the ring while the
    /// profile's model is fitted; the simulator needs the profile to start.
    pub fn start(&self, until: Option<f64>) -> Result<StartedRun, Failure> {
        if self.is_coupled()? {
            return self.start_coupled(until);
        }
        let (loaded, source) = match self.start_stream()? {
            Some(running) => (self.load()?, running),
            None => {
                let loaded = self.load()?;
                let running = self.start_simulator(&loaded.profile, until);
                (loaded, running)
            }
        };
        let cal = Calibration::new(&loaded.profile, self.freq_hz, self.offset_db);
        let uncertainty = Uncertainty::new(&loaded.profile, &cal);
        Ok(StartedRun {
            loaded,
            source,
            cal,
            uncertainty,
            coupled: None,
        })
    }

    /// Whether the run reads a coupler's two arms: `--coupler`, or the `match` demo
    /// (on its bundled set-up); a scenario and a set-up that do not go together refused.
    fn is_coupled(&self) -> Result<bool, Failure> {
        let scenario = match &self.source {
            SourcePlan::Demo { scenario, .. } => Some(*scenario),
            _ => None,
        };
        match (scenario, &self.coupler, &self.profile) {
            (Some(s), Some(_), _) if !s.needs_coupler() => Err(anyhow!(
                "the {} demo simulates one detector; a coupler set-up runs with --demo match",
                s.name()
            ))
            .bad_input(),
            (Some(s), _, Some(_)) if s.needs_coupler() => Err(anyhow!(
                "the match demo simulates a coupler with two detectors: give --coupler FILE \
                 instead of --profile (or neither, for the bundled demo set-up)"
            ))
            .bad_input(),
            (Some(s), _, _) => Ok(s.needs_coupler()),
            (None, coupler, _) => Ok(coupler.is_some()),
        }
    }

    /// Starts a coupler run: both arms' profiles from `--coupler`'s set-up (or the bundled
    /// one for the demo), the powers at its reference plane; the run's calibration and
    /// budget are the forward arm's.
    fn start_coupled(&self, until: Option<f64>) -> Result<StartedRun, Failure> {
        if self.offset_db != 0.0 {
            return Err(anyhow!(
                "--offset does not apply to a coupler run: the set-up file holds each arm's \
                 coupling and the through-loss; change them there"
            ))
            .bad_input();
        }
        let stream = self.start_stream()?;
        let (coupler, origin, bytes) = self.load_coupler()?;
        let source = match stream {
            Some(running) => running,
            None => self.start_bench(MatchBench::new(&coupler, self.rate_hz, self.seed()), until),
        };
        let hz = self.freq_hz.unwrap_or(coupler.forward.reference_hz);
        let coupler_cal = CouplerCalibration::new(&coupler, hz);
        Ok(StartedRun {
            loaded: LoadedProfile {
                profile: coupler.forward.clone(),
                origin,
                bytes,
            },
            source,
            cal: coupler_cal.forward.clone(),
            uncertainty: coupler_cal.forward_budget.clone(),
            coupled: Some(CoupledRun {
                coupler,
                cal: coupler_cal,
            }),
        })
    }

    /// Loads `--profile`, or the bundled demo profile for `--demo` without one.
    fn load(&self) -> Result<LoadedProfile, Failure> {
        match (&self.profile, &self.source) {
            (Some(path), _) => {
                // The bytes parsed are the bytes hashed into a recording's context.
                let origin = path.display().to_string();
                let bytes = read_profile_file(path).bad_input()?;
                let profile = parse_profile_bytes(&bytes, &origin).bad_input()?;
                Ok(LoadedProfile {
                    profile,
                    origin,
                    bytes,
                })
            }
            (None, SourcePlan::Demo { .. }) => Ok(LoadedProfile {
                profile: parse_profile(DEMO_PROFILE, DEMO_PROFILE_NAME).bad_input()?,
                origin: DEMO_PROFILE_NAME.into(),
                bytes: DEMO_PROFILE.as_bytes().to_vec(),
            }),
            (None, _) => Err(anyhow!(
                "give the detector's profile with --profile FILE (see profiles/ for examples)"
            ))
            .bad_input(),
        }
    }

    /// Opens the chosen port or capture and starts its thread; None for the simulator.
    fn start_stream(&self) -> Result<Option<Running>, Failure> {
        match &self.source {
            SourcePlan::Port { path, baud, format } => {
                let port = open_port(path, *baud).bad_input()?;
                let spec = SerialSpec {
                    path: path.clone(),
                    baud: *baud,
                    format: *format,
                };
                Ok(Some(spec.start(port)))
            }
            SourcePlan::Replay {
                path,
                rate_hz,
                realtime,
                format,
            } => {
                let file = std::fs::File::open(path)
                    .with_context(|| format!("cannot open capture {}", path.display()))
                    .bad_input()?;
                let spec = ReplaySpec {
                    path: path.clone(),
                    rate_hz: *rate_hz,
                    realtime: *realtime,
                    format: *format,
                };
                Ok(Some(spec.start(file)))
            }
            SourcePlan::Demo { .. } => Ok(None),
        }
    }

    /// Loads `--coupler`'s set-up, or the bundled one; with where it came from and the
    /// bytes a log's hash covers.
    fn load_coupler(&self) -> Result<(Coupler, String, Vec<u8>), Failure> {
        match &self.coupler {
            Some(path) => {
                let coupler = load_coupler(path).bad_input()?;
                let bytes = coupler_bytes(path, &coupler.setup).bad_input()?;
                Ok((coupler, path.display().to_string(), bytes))
            }
            None => {
                let coupler = DEMO_COUPLER.load().bad_input()?;
                let mut bytes = DEMO_COUPLER.setup.as_bytes().to_vec();
                for (_, text) in DEMO_COUPLER.profiles {
                    bytes.extend(text.as_bytes());
                }
                Ok((coupler, DEMO_COUPLER_NAME.into(), bytes))
            }
        }
    }

    /// The simulator's seed (the demo's).
    fn seed(&self) -> u64 {
        match self.source {
            SourcePlan::Demo { seed, .. } => seed,
            _ => 0,
        }
    }

    /// Starts the simulator made from `profile`; `until` bounds its run.
    fn start_simulator(&self, profile: &Profile, until: Option<f64>) -> Running {
        let SourcePlan::Demo {
            scenario, rate_hz, ..
        } = self.source
        else {
            unreachable!("start_stream starts every source but the simulator")
        };
        self.start_bench(
            Simulator::new(profile, scenario, rate_hz, self.seed()),
            until,
        )
    }

    /// Starts a simulated bench; `until` bounds its run.
    fn start_bench(&self, bench: impl Into<SimBench>, until: Option<f64>) -> Running {
        let fast = matches!(self.source, SourcePlan::Demo { fast: true, .. });
        SimSpec {
            simulator: bench.into(),
            fast,
            until,
            seed: self.seed(),
        }
        .start()
    }
}

/// A profile and where it came from, with the bytes hashed for recordings.
pub struct LoadedProfile {
    pub profile: Profile,
    pub origin: String,
    pub bytes: Vec<u8>,
}

/// The set-up file's bytes and its two profiles', which a log's hash covers.
fn coupler_bytes(path: &Path, setup: &CouplerSetup) -> anyhow::Result<Vec<u8>> {
    let folder = path.parent().unwrap_or(Path::new("."));
    let mut bytes =
        std::fs::read(path).with_context(|| format!("cannot read {}", path.display()))?;
    for arm in [&setup.forward, &setup.reflected] {
        let file = profile_path(folder, &arm.profile);
        bytes.extend(
            std::fs::read(&file).with_context(|| format!("cannot read {}", file.display()))?,
        );
    }
    Ok(bytes)
}

/// A coupler run's set-up and both arms' chains.
pub struct CoupledRun {
    /// The set-up, its profiles loaded.
    pub coupler: Coupler,
    /// Both arms at the run's frequency.
    pub cal: CouplerCalibration,
}

/// A run under way: what both commands build their logs and their screen from.
pub struct StartedRun {
    /// The profile.
    pub loaded: LoadedProfile,
    /// The running source.
    pub source: Running,
    /// The calibration at the plan's frequency and offset.
    pub cal: Calibration,
    /// Its uncertainty budget.
    pub uncertainty: Uncertainty,
    /// A coupler run's set-up and arms (the calibration above is its forward arm's).
    pub coupled: Option<CoupledRun>,
}

impl StartedRun {
    /// The name the metrics' `profile` label carries: the coupler set-up's, or the
    /// profile's.
    pub fn profile_name(&self) -> String {
        match &self.coupled {
            Some(run) => run.coupler.setup.name.clone(),
            None => self.loaded.profile.name.clone(),
        }
    }

    /// The context a log's header is written from, for rows every `every` (zero: one row
    /// per sample), for a run that starts now.
    pub fn context(&self, every: Duration) -> RunContext {
        let profile = match &self.coupled {
            Some(run) => format!(
                "coupler set-up {} ({}): forward {}, reflected {}",
                run.coupler.setup.name,
                self.loaded.origin,
                run.coupler.forward.name,
                run.coupler.reflected.name
            ),
            None => format!("{} ({})", self.loaded.profile.name, self.loaded.origin),
        };
        RunContext {
            tool: format!("dbtrail {}", env!("CARGO_PKG_VERSION")),
            profile,
            profile_hash: hex_digest(&self.loaded.bytes),
            started: SystemTime::now(),
            source: self.source.description.clone(),
            every,
        }
    }
}

/// The first 8 bytes of the SHA-256 of `bytes`, in hex: short enough for a header line,
/// enough to tell two profiles apart.
fn hex_digest(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .take(8)
        .map(|b| format!("{b:02x}"))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Options {
        #[command(flatten)]
        source: SourceArgs,
        #[command(flatten)]
        link: LinkArgs,
        #[command(flatten)]
        reading: ReadingArgs,
    }

    fn plan(args: &[&str]) -> RunPlan {
        let o = Options::try_parse_from(std::iter::once("t").chain(args.iter().copied())).unwrap();
        RunPlan::from_args(&o.source, &o.link, &o.reading)
    }

    #[test]
    fn a_demo_runs_at_its_scenario_frequency_unless_told_otherwise() {
        let tune = plan(&["--demo", "tune"]);
        assert_eq!(tune.freq_hz, Some(Scenario::Tune.frequency_hz()));
        assert_eq!(tune.short_label(), "demo tune");
        let told = plan(&["--demo", "tune", "--freq", "10MHz"]);
        assert_eq!(told.freq_hz, Some(10e6));
        let port = plan(&["--port", "/dev/ttyUSB0", "--baud", "9600", "--profile", "p"]);
        assert_eq!(
            port.freq_hz, None,
            "a port is read at the profile's reference"
        );
        assert_eq!(port.short_label(), "/dev/ttyUSB0 @ 9600 baud");
    }

    #[test]
    fn the_screen_paces_files_and_the_simulator_as_the_present() {
        let replay = plan(&["--replay", "dir/cap.txt", "--profile", "p"]).paced_as_the_present();
        assert!(matches!(
            replay.source,
            SourcePlan::Replay { realtime: true, .. }
        ));
        assert_eq!(replay.short_label(), "replay cap.txt");
        let demo = plan(&["--demo", "--fast"]).paced_as_the_present();
        assert!(matches!(demo.source, SourcePlan::Demo { fast: false, .. }));
        let port = plan(&["--port", "/dev/ttyACM0", "--profile", "p"]);
        assert_eq!(port.clone().paced_as_the_present(), port);
    }

    #[test]
    fn a_port_without_a_profile_is_refused_before_the_port_is_read() {
        let SourcePlan::Replay { .. } = plan(&["--replay", "x", "--profile", "p"]).source else {
            panic!("a replay plan");
        };
        let mut no_profile = plan(&["--demo"]);
        no_profile.source = SourcePlan::Replay {
            path: "missing.txt".into(),
            rate_hz: 1000.0,
            realtime: false,
            format: Format::Auto,
        };
        let Err(Failure::BadInput(e)) = no_profile.load() else {
            panic!("refused as bad input");
        };
        assert!(e.to_string().contains("--profile FILE"), "{e}");
    }
}
