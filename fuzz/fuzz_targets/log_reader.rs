//! Any bytes as a recorded log for `report`: either a clear error, or a log whose report
//! (text and JSON) is computed without panicking.
#![no_main]

use dbtrail::report::{analyse, read_log, ReportOptions};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let Ok(log) = read_log(data, "fuzz.csv", 0) else {
        return;
    };
    for run in &log.runs {
        if let Ok(report) = analyse(run, "fuzz.csv", &ReportOptions::default()) {
            let _ = serde_json::to_string(&report);
        }
    }
});
