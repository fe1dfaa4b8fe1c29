//! `dbtrail check --coupler`: a coupler set-up at one frequency: each arm's detector with
//! what the arm adds to its reading, and what the pair can tell of a match.

use std::fmt::Write;
use std::path::Path;

use dbtrail::calibration::Calibration;
use dbtrail::coupler::{load_coupler, Arm, Coupler, ReferencePlane};
use dbtrail::matching::{directivity_gamma, gamma_from_swr, return_loss_db, swr};
use dbtrail::printable::escape_controls;
use dbtrail::profile::Profile;
use dbtrail::units::{format_signed_db, Si};

use super::super::{emit, summary, BadInput, Failure};

/// Prints the set-up in `path` at `freq_hz` (None: the forward profile's reference).
pub fn run(path: &Path, freq_hz: Option<f64>) -> Result<(), Failure> {
    let coupler = load_coupler(path).bad_input()?;
    let hz = freq_hz.unwrap_or(coupler.forward.reference_hz);
    let mut text = heading(&coupler, hz);
    let forward = arm_text(&mut text, &coupler, "forward", hz);
    let reflected = arm_text(&mut text, &coupler, "reflected", hz);
    text.push_str(&match_text(&coupler, &forward, &reflected, hz));
    let shown = path.display().to_string();
    let _ = write!(text, "\n{} is valid.\n", escape_controls(&shown));
    emit(&text)
}

fn heading(coupler: &Coupler, hz: f64) -> String {
    let setup = &coupler.setup;
    let mut out = format!("coupler set-up {}", escape_controls(&setup.name));
    if !setup.description.is_empty() {
        let _ = write!(out, ": {}", escape_controls(&setup.description));
    }
    let plane = match setup.plane {
        ReferencePlane::Load => "load: powers at the coupler's output port, towards the load",
        ReferencePlane::Source => "source: powers at the coupler's input port",
    };
    let _ = writeln!(out, "\n  plane        {plane}");
    let _ = writeln!(out, "  frequency    {}", Si::new(hz, "Hz"));
    out
}

/// One arm's block; the arm's calibration, its coupling and through-loss added.
fn arm_text(out: &mut String, coupler: &Coupler, name: &str, hz: f64) -> Calibration {
    let setup = &coupler.setup;
    let (arm, profile, added): (&Arm, &Profile, f64) = if name == "forward" {
        (
            &setup.forward,
            &coupler.forward,
            setup.forward_offset_db(hz),
        )
    } else {
        (
            &setup.reflected,
            &coupler.reflected,
            setup.reflected_offset_db(hz),
        )
    };
    let cal = Calibration::new(profile, Some(hz), added);
    let coupling = arm.coupling.at(hz).db;
    let through = if added == coupling {
        String::new()
    } else {
        format!(" less the through-loss {:.2} dB", coupling - added)
    };
    let _ = writeln!(
        out,
        "\n{name} arm: channel {}, profile {}\n  coupling   {coupling:.2} dB{through}: {} added \
         to the profile's reading",
        arm.channel + 1,
        escape_controls(&arm.profile),
        format_signed_db(added),
    );
    out.push_str(&summary::setup(profile, &cal));
    cal
}

/// What the pair can tell: the directivity's floor, the best return loss readable at
/// full forward power, and the limits.
fn match_text(
    coupler: &Coupler,
    forward: &Calibration,
    reflected: &Calibration,
    hz: f64,
) -> String {
    let setup = &coupler.setup;
    let mut out = String::from("\nmatch\n");
    let directivity = setup.directivity.at(hz).db;
    let leakage = directivity_gamma(directivity);
    let _ = writeln!(
        out,
        "  directivity  {directivity:.1} dB: the coupler's own leakage adds up to ±{leakage:.4} \
         to |Γ|,\n               so a return loss above {directivity:.1} dB (SWR below {:.3}) \
         cannot be told apart",
        swr(leakage)
    );
    let (_, forward_top) = forward.span_dbm();
    let (reflected_bottom, _) = reflected.span_dbm();
    let floor = 10f64.powf((reflected_bottom - forward_top) / 20.0).min(1.0);
    let _ = writeln!(
        out,
        "  detectors    at the forward span's top ({forward_top:+.2} dBm) the reflected one \
         reads\n               down to {reflected_bottom:+.2} dBm: a return loss up to {:.1} dB",
        return_loss_db(floor)
    );
    if let Some(most) = setup.limits.swr_max {
        let gamma = gamma_from_swr(most);
        let _ = writeln!(
            out,
            "  limit        SWR {most:.2}: |Γ| {gamma:.3}, return loss {:.2} dB, reflected {:.1} % \
             of forward",
            return_loss_db(gamma),
            100.0 * gamma * gamma
        );
    }
    if let Some(dbm) = setup.limits.reflected_max_dbm {
        let _ = writeln!(out, "  limit        reflected power at most {dbm:+.2} dBm");
    }
    out
}
