//! Text that `check` and `fit` both print: a profile's set-up, its span and resolution,
//! and the residuals of its fit.

use std::fmt::Write;

use dbtrail::calibration::Calibration;
use dbtrail::detector::thermal::{temperature_groups, ThermalModel};
use dbtrail::detector::{rms, table::leave_one_out_db, Axis, CalPoint, ModelKind};
use dbtrail::printable::escape_controls;
use dbtrail::profile::Profile;
use dbtrail::units::{format_signed_db, Si, CELSIUS_ZERO_K};

/// The model lines: which model and how it was set, then its parameters on a line of
/// their own (so the block stays inside 100 columns).
fn model_line(profile: &Profile) -> String {
    let model = &profile.model;
    let source = if model.fitted_at_load {
        "fitted at load"
    } else {
        "from the profile"
    };
    let count = profile.points.len();
    let raw = &profile.raw.model;
    let params = |kind: &str, params: String| {
        format!("{kind}, {source} over {count} points:\n             {params}")
    };
    let sets = match model.thermal.as_deref() {
        Some(ThermalModel::Curves { curves, .. }) if curves.len() > 1 => Some(curves),
        _ => None,
    };
    if let Some(curves) = sets {
        let at: Vec<String> = curves
            .iter()
            .map(|c| format!("{:.1} °C", c.kelvin - CELSIUS_ZERO_K))
            .collect();
        let kind = if model.kind == ModelKind::Log {
            "log-amp lines fitted at load"
        } else {
            "PCHIP tables"
        };
        return format!(
            "{kind} over {count} points in {} sets taken at {}",
            curves.len(),
            at.join(", ")
        );
    }
    match model.kind {
        ModelKind::Table => format!(
            "table of {count} points, PCHIP on {} axis",
            model.axis.map_or("log-volts", |a| a.name())
        ),
        ModelKind::Log => params(
            "log-amp",
            format!(
                "slope {:.3} mV/dB, intercept {:.2} dBm",
                model.param("slope").unwrap_or(f64::NAN) * 1e3,
                model.param("intercept").unwrap_or(f64::NAN)
            ),
        ),
        ModelKind::Diode => params(
            "diode peak detector",
            format!(
                "n = {:.4}, V_L = Is·RL = {}, T = {} K; Is follows XTI {}, EG {} eV",
                model.param("n").unwrap_or(f64::NAN),
                Si::new(model.param("vl").unwrap_or(f64::NAN), "V"),
                raw.temperature.unwrap_or(300.0),
                profile.diode_law().xti,
                profile.diode_law().eg_ev
            ),
        ),
    }
}

/// What the set-up says of the board's temperature: its sensor and the range readings are
/// compensated over, or that they are not.
fn board_line(cal: &Calibration) -> String {
    let Some(setup) = cal.thermal() else {
        return "no [temperature] table; readings are not compensated for the board's \
                temperature"
            .into();
    };
    let (lo, hi) = setup.model.range_k();
    let channel = &setup.channel;
    format!(
        "channel {}, {} sensor averaged over {} s (±{} °C); readings compensated from {:.2} \
         to {:.2} °C, flagged temp-outside beyond",
        channel.channel + 1,
        channel.sensor.name(),
        channel.window_s,
        channel.u_c,
        lo - CELSIUS_ZERO_K,
        hi - CELSIUS_ZERO_K
    )
}

/// The set-up block: model, ADC, frequency, offset, span and limits.
pub fn setup(profile: &Profile, cal: &Calibration) -> String {
    let mut out = String::new();
    let adc = cal.adc();
    let (lo, hi) = cal.span_dbm();
    let (dlo, dhi) = cal.detector_span_dbm();
    let _ = writeln!(
        out,
        "{}{}",
        escape_controls(&profile.name),
        if profile.description.is_empty() {
            String::new()
        } else {
            format!(": {}", escape_controls(&profile.description))
        }
    );
    let _ = writeln!(out, "  model      {}", model_line(profile));
    for note in &profile.model.notes {
        let _ = writeln!(out, "  note       {note}");
    }
    let _ = writeln!(
        out,
        "  ADC        {} bits, vref {} V, divider {}, zero {} counts; clip at {:.0} counts or more",
        adc.bits(),
        adc.vref(),
        adc.divider(),
        adc.zero_counts(),
        adc.clip_threshold()
    );
    let _ = writeln!(out, "  impedance  {} Ω", profile.ohms);
    let outside = if cal.fixed_flags().is_empty() {
        ""
    } else {
        " (outside the table: end value used)"
    };
    let _ = writeln!(
        out,
        "  frequency  {} (curve taken at {}): correction {}, offset {}{outside}",
        Si::new(cal.freq_hz(), "Hz"),
        Si::new(profile.reference_hz, "Hz"),
        format_signed_db(cal.correction_db()),
        format_signed_db(cal.offset_db())
    );
    let _ = writeln!(
        out,
        "  span       {lo:+.2} to {hi:+.2} dBm at the reference plane ({dlo:+.2} to {dhi:+.2} dBm at the detector)"
    );
    let _ = writeln!(
        out,
        "  board      {}",
        board_line(cal).replace("; ", "\n             ")
    );
    let limits = &profile.limits;
    let limit = |v: Option<f64>| v.map_or("none".to_string(), |v| format!("{v:+.1} dBm"));
    let _ = writeln!(
        out,
        "  limits     detector safe input {}; reference-plane rating {}",
        limit(limits.detector_max_dbm),
        limit(limits.reference_max_dbm)
    );
    out
}

/// dB per ADC count at evenly spaced levels across the span.
pub fn resolution(cal: &Calibration) -> String {
    let (lo, hi) = cal.span_dbm();
    let mut out =
        String::from("\nResolution across the span\n  reference dBm     counts   dB per count\n");
    for i in 0..6 {
        let level = lo + (hi - lo) * f64::from(i) / 5.0;
        let _ = writeln!(
            out,
            "  {level:>13.2} {:>10.1} {:>14.3}",
            cal.counts_for(level),
            cal.db_per_count(level)
        );
    }
    out
}

/// The reading for each of `counts`, with its flags.
pub fn readings(cal: &Calibration, counts: &[f64]) -> String {
    if counts.is_empty() {
        return String::new();
    }
    let mut out = String::from(
        "\nReadings\n  counts       detector volts   detector dBm   reference plane\n",
    );
    for &c in counts {
        let r = cal.reading(c);
        let flags = r.flags.joined();
        let _ = writeln!(
            out,
            "  {c:<12} {:>14.6} {:>14.3}   {r}{}",
            r.volts,
            r.detector_dbm,
            if flags.is_empty() {
                String::new()
            } else {
                format!("  [{flags}]")
            }
        );
    }
    out
}

/// Each point's leave-one-out error within its own calibration set (a table of several
/// temperatures is a table per set).
fn left_out_by_set(profile: &Profile, axis: Axis) -> Vec<Option<f64>> {
    let cal = profile.cal_points();
    let kelvins: Vec<f64> = profile
        .points
        .iter()
        .map(|p| profile.point_kelvin(p))
        .collect();
    let mut out = vec![None; cal.len()];
    for (_, members) in temperature_groups(&kelvins) {
        let set: Vec<CalPoint> = members.iter().map(|&i| cal[i]).collect();
        for (&i, e) in members.iter().zip(leave_one_out_db(&set, axis)) {
            out[i] = e;
        }
    }
    out
}

/// Each point's error under the model, and the RMS; for a table, the leave-one-out error.
pub fn residuals(profile: &Profile) -> String {
    let errors = profile.residuals_db();
    let table = profile.model.kind == ModelKind::Table;
    let loo = profile
        .model
        .axis
        .map(|axis| left_out_by_set(profile, axis));
    let mut out =
        String::from("\nCalibration points (at the detector; error = model minus applied)\n");
    out.push_str("  applied          counts    model dBm   error dB");
    out.push_str(if table { "   if left out\n" } else { "\n" });
    for (i, point) in profile.points.iter().enumerate() {
        let _ = write!(
            out,
            "  {:<14} {:>8.2} {:>12.3} {:>+10.3}",
            escape_controls(&point.applied),
            point.counts,
            point.dbm + errors[i],
            errors[i]
        );
        if let Some(loo) = &loo {
            let _ = write!(
                out,
                "   {}",
                loo[i].map_or("(end)".to_string(), |e| format!("{e:+.3}"))
            );
        }
        out.push('\n');
    }
    if table {
        let interior: Vec<f64> = loo.iter().flatten().flatten().copied().collect();
        let _ = writeln!(
            out,
            "  The table passes through every point; leaving each interior point out gives an RMS of {:.3} dB,\n  an estimate of the error between points.",
            rms(&interior)
        );
    } else {
        let _ = writeln!(
            out,
            "  RMS error {:.3} dB over {} points",
            rms(&errors),
            errors.len()
        );
    }
    out
}
