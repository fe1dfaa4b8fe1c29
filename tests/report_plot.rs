//! The report's plot through the binary: where it went, said on standard error, and the
//! log's frequency in its title; the drawing's geometry is checked beside the drawing
//! code (src/cli/report/plot.rs) on a report with a warm-up and an Allan deviation.

mod common;

/// A 1 h log of 10 s rows at 146 MHz, rising by 0.3 dB over the hour.
fn log_at_146_mhz() -> String {
    let mut text = String::from(
        "# dbtrail 0.1.0 record\n# profile: synthetic; sha256 0\n\
         # frequency: 146MHz; frequency correction +0.60 dB\n\
         # started: 2026-12-02T10:00:00.000Z\n# source: test\n\
         # rows: every 10s; power averaged over watts\n\
         time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags\n",
    );
    for i in 0..360 {
        let m = 30.0 + 0.3 * f64::from(i) / 360.0;
        text.push_str(&format!(
            "{},x,10,{m},{},{},0.001,\n",
            i * 10,
            m - 0.01,
            m + 0.01
        ));
    }
    text
}

// Source: the rules in issue 15 item 6: a line on standard error saying where the plot
// went (`dbtrail: plot written to PATH`), and the frequency in the title.
#[test]
fn the_report_says_where_the_plot_went_and_titles_it_with_the_frequency() {
    let dir = common::scratch("report-plot");
    let log = dir.join("soak.csv");
    std::fs::write(&log, log_at_146_mhz()).unwrap();
    for name in ["soak.svg", "soak.png"] {
        let plot = dir.join(name);
        let out = common::bin()
            .args([
                "report",
                log.to_str().unwrap(),
                "--plot",
                plot.to_str().unwrap(),
            ])
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert!(out.status.success(), "{stderr}");
        assert_eq!(
            stderr,
            format!("dbtrail: plot written to {}\n", plot.display())
        );
        assert!(plot.exists());
    }
    let svg = std::fs::read_to_string(dir.join("soak.svg")).unwrap();
    let title = svg
        .split("<text")
        .nth(1)
        .and_then(|t| t.split_once('>'))
        .map(|(_, rest)| rest.split("</text>").next().unwrap().trim().to_string())
        .unwrap();
    assert_eq!(
        title,
        "Power at 146MHz · synthetic · started 2026-12-02 10:00:00 UTC"
    );
    // No plot asked for: nothing on standard error.
    let quiet = common::bin()
        .args(["report", log.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(quiet.status.success() && quiet.stderr.is_empty());
}
