//! `dbtrail convert`: one level shown in every form at a reference impedance.

use dbtrail::units::{parse_level, Si, VoltageForm, DEFAULT_OHMS};

use super::{emit, parse_ohms, BadInput, Failure};

#[derive(clap::Args)]
pub struct Args {
    /// The level, e.g. -10dBm, 2.5mW, 350mVpp, 0.5 Vrms (number and unit may be apart)
    #[arg(allow_hyphen_values = true)]
    quantity: String,
    /// The unit, when written apart from the number (`convert -3 dBm`)
    unit: Option<String>,
    /// Reference impedance in ohms
    #[arg(long, default_value_t = DEFAULT_OHMS, value_parser = parse_ohms, allow_hyphen_values = true)]
    ohms: f64,
    /// Print one JSON object with plain SI numbers
    #[arg(long)]
    json: bool,
}

pub fn run(args: Args) -> Result<(), Failure> {
    let quantity = match &args.unit {
        Some(unit) => format!("{} {unit}", args.quantity),
        None => args.quantity.clone(),
    };
    let level = parse_level(&quantity, false).bad_input()?;
    let power = level.power(args.ohms);
    let forms = [
        ("vrms", VoltageForm::Rms),
        ("vpk", VoltageForm::Peak),
        ("vpp", VoltageForm::PeakToPeak),
    ]
    .map(|(key, form)| (key, power.volts(args.ohms, form)));
    if args.json {
        let mut object = serde_json::json!({
            "dbm": power.dbm(),
            "dbw": power.dbw(),
            "watts": power.watts(),
            "ohms": args.ohms,
        });
        for (key, volts) in forms {
            object[key] = volts.into();
        }
        return emit(&format!("{object}\n"));
    }
    let mut text = format!("{} at {} Ω\n", quantity.trim(), args.ohms);
    text.push_str(&format!("  dBm   {:>12.3}\n", power.dbm()));
    text.push_str(&format!("  dBW   {:>12.3}\n", power.dbw()));
    text.push_str(&format!(
        "  W     {:>12}\n",
        Si::new(power.watts(), "W").to_string()
    ));
    for (key, volts) in forms {
        let label = match key {
            "vrms" => "Vrms",
            "vpk" => "Vpk ",
            _ => "Vpp ",
        };
        let note = if key == "vpk" { DC_INJECTION_NOTE } else { "" };
        text.push_str(&format!(
            "  {label}  {:>12}{note}\n",
            Si::new(volts, "V").to_string()
        ));
    }
    emit(&text)
}

/// The Vpk line's note: the DC equal to the peak is only the ideal, since with DC the
/// diode conducts all the time and reads differently from RF; the docs give the bias.
const DC_INJECTION_NOTE: &str = "   (ideal DC to inject into a peak detector; for its bias see \
     \"Calibrating a peak detector by DC injection\" in docs/calibration.md)";
