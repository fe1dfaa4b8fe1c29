//! `dbtrail fit` weighs points by their stored noise (std_counts and samples) and says so.

mod common;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn fit(points: &str, out: &Path) -> Output {
    let mut args = vec!["fit", points, "--model", "log"];
    args.extend(common::FIT_ADC_AND_FREQ);
    args.extend(["--out", out.to_str().unwrap(), "--force"]);
    Command::new(env!("CARGO_BIN_EXE_dbtrail"))
        .args(&args)
        .output()
        .expect("the binary runs")
}

/// Points on V = 0.025·(P + 80) V (1 mV a count at 12 bits and 4.095 V), the two lowest
/// read 60 counts high; `columns` says whether the noise columns are written.
fn points_file(dir: &Path, columns: bool) -> PathBuf {
    let path = dir.join("points.csv");
    let mut csv = String::from(if columns {
        "applied,counts,std_counts,samples\n"
    } else {
        "applied,counts\n"
    });
    for dbm in [-70, -65, -60, -45, -30, -15, 0] {
        let exact = 25.0 * f64::from(dbm + 80);
        let (counts, noise) = if dbm <= -65 {
            (exact + 60.0, "60,4")
        } else {
            (exact, "0.8,100")
        };
        let extra = if columns {
            format!(",{noise}")
        } else {
            String::new()
        };
        csv.push_str(&format!("{dbm}dBm,{counts}{extra}\n"));
    }
    std::fs::write(&path, csv).unwrap();
    path
}

fn fitted_slope(out: &Path) -> f64 {
    dbtrail::profile::load_profile(out)
        .unwrap()
        .raw
        .model
        .slope
        .unwrap()
}

// Source: worked example — five points exactly on a 25 mV/dB line known to 0.08 counts,
// two 60 counts high known to 30 counts: the weighted line must keep the slope within
// 0.1 % (the two weigh 1/140 000 of the others), while the unweighted one is pulled
// over 2 % flatter, as the issue found with the demo diode's lowest points.
#[test]
fn fit_weighs_points_by_their_stored_noise_and_says_so() {
    let weighted_dir = common::scratch("weighted");
    let weighted_points = points_file(weighted_dir.path(), true);
    let out = weighted_points.with_file_name("weighted.toml");
    let run = fit(weighted_points.to_str().unwrap(), &out);
    let text = String::from_utf8_lossy(&run.stdout);
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    assert!(
        text.contains("weighted by each point's std_counts/√samples"),
        "{text}"
    );
    let weighted = fitted_slope(&out);
    assert!((weighted - 0.025).abs() < 0.025e-3, "{weighted}");

    let unweighted_dir = common::scratch("unweighted");
    let plain_points = points_file(unweighted_dir.path(), false);
    let out = plain_points.with_file_name("unweighted.toml");
    let run = fit(plain_points.to_str().unwrap(), &out);
    let text = String::from_utf8_lossy(&run.stdout);
    assert!(text.contains("Fit unweighted: the scatter"), "{text}");
    assert!(
        !text.contains("χ²"),
        "an unweighted fit states no χ²: {text}"
    );
    let unweighted = fitted_slope(&out);
    assert!(unweighted < 0.025 * 0.98, "{unweighted}");
}
