//! dbtrail's measurement domain: from raw ADC counts of a diode or log-amp RF detector to
//! calibrated power at the reference plane, with the profiles that describe a detector.
//!
//! The pipeline stages, each in its own module:
//! - [`units`]: quantities with units (power, RF voltage, frequency, duration, dB);
//! - [`decode`]: the wire protocol (ASCII lines, binary frames) from bytes to counts;
//! - [`adc`]: counts to volts at the detector output, and the clip test;
//! - [`detector`]: detector models (table, log-amp, diode) and their fits;
//! - [`correction`]: frequency correction and the offset of what sits in front;
//! - [`calibration`]: the chain that turns one count into a flagged reading;
//! - [`stats`]: power-domain statistics that merge;
//! - [`thermal`]: the board temperature channel: sensor counts to °C, faults at the rails,
//!   the averaging window;
//! - [`sim`]: the built-in simulator, from a scenario's true power to ADC counts;
//! - [`events`]: what a source sends down the ring: samples in source time, link events;
//! - [`link`]: link-health counters shared with reader threads;
//! - [`record`]: CSV recording of readings, per interval or per sample;
//! - [`procedure`]: the calibration procedure: settle, average, fit, save a profile;
//! - [`uncertainty`]: the uncertainty budget of a reading or a mean (GUM, k = 2);
//! - [`report`]: the soak report: drift, settling, gaps, and decimation for plots;
//! - [`profile`]: TOML profiles, validated with file, line and field in every message;
//! - [`points`]: the calibration points CSV that `fit` reads;
//! - [`printable`]: names and paths with their control characters escaped, for logs and
//!   screens;
//! - [`maths`]: the numerical tools, interpolation and special functions the stages share.
//!
//! Nothing here touches a terminal or a serial port.
#![forbid(unsafe_code)]

pub mod adc;
pub mod calibration;
pub mod correction;
pub mod coupler;
pub mod decode;
pub mod detector;
pub mod events;
pub mod link;
pub mod matching;
pub mod maths;
pub mod metrics;
pub mod points;
pub mod printable;
pub mod procedure;
pub mod profile;
pub mod record;
pub mod report;
pub mod resume;
pub mod sim;
pub mod stats;
pub mod thermal;
pub mod uncertainty;
pub mod units;
