//! The report's plot through the binary: where it went, said on standard error, and the
//! log's frequency in its title; the drawing's geometry is checked beside the drawing
//! code (src/cli/report/plot.rs) on a report with a warm-up and an Allan deviation.

mod common;

/// A 1 h log of 10 s rows at 146 MHz, rising by 0.3 dB over the hour.
fn log_at_146_mhz() -> String {
    log_of(360, 10)
}

/// `rows` rows `step_s` apart at 146 MHz, rising by 0.3 dB from first to last.
fn log_of(rows: u32, step_s: u32) -> String {
    let mut text = format!(
        "# dbtrail 0.1.0 record\n# profile: synthetic; sha256 0\n\
         # frequency: 146MHz; frequency correction +0.60 dB\n\
         # started: 2026-12-02T10:00:00.000Z\n# source: test\n\
         # rows: every {step_s}s; power averaged over watts\n\
         time_s,utc,samples,mean_dbm,min_dbm,max_dbm,mean_w,flags\n",
    );
    for i in 0..rows {
        let m = 30.0 + 0.3 * f64::from(i) / f64::from(rows);
        text.push_str(&format!(
            "{},x,10,{m},{},{},0.001,\n",
            i * step_s,
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
    let tmp = common::scratch("report-plot");
    let dir = tmp.path();
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

/// Each horizontal `<text>` of an SVG (the rotated axis titles left out): its anchor x,
/// its anchor (start, middle, end), its font size and its text.
fn svg_texts(svg: &str) -> Vec<(f64, String, f64, String)> {
    let attribute = |tag: &str, name: &str| {
        tag.split(&format!(" {name}=\""))
            .nth(1)
            .and_then(|rest| rest.split('"').next())
            .map(str::to_string)
    };
    svg.split("<text")
        .skip(1)
        .filter(|piece| !piece.split_once('>').unwrap().0.contains("rotate"))
        .map(|piece| {
            let (tag, rest) = piece.split_once('>').unwrap();
            let text = rest.split("</text>").next().unwrap().trim().to_string();
            let x = attribute(tag, "x").unwrap().parse().unwrap();
            let anchor = attribute(tag, "text-anchor").unwrap_or_else(|| "start".into());
            let size = attribute(tag, "font-size").unwrap().parse().unwrap();
            (x, anchor, size, text)
        })
        .collect()
}

// Source: the rule in issue 16: nothing in the plot is cut at its edge (the last x tick
// once read "120.("). A label's width is taken as 0.65 em a character, a little over the
// widest digits of the common sans-serif faces (DejaVu Sans's are 0.636 em; from memory),
// so a label that fits by this count fits on the page. Runs of several lengths and steps
// put different numbers at the right-hand end of the time axis.
#[test]
fn no_label_of_the_plot_runs_past_its_edges() {
    let tmp = common::scratch("report-plot-edges");
    let dir = tmp.path();
    for (rows, step) in [
        (360, 10),
        (121, 1),
        (97, 1),
        (13, 10),
        (1000, 7),
        (500, 3600),
    ] {
        let log = dir.join(format!("soak-{rows}-{step}.csv"));
        std::fs::write(&log, log_of(rows, step)).unwrap();
        let plot = dir.join(format!("soak-{rows}-{step}.svg"));
        let (log, plot) = (log.to_str().unwrap(), plot.to_str().unwrap());
        common::succeeded(["report", log, "--plot", plot, "--size", "800x500"]);
        let svg = std::fs::read_to_string(plot).unwrap();
        let texts = svg_texts(&svg);
        assert!(texts.iter().any(|t| t.3 == "0"), "{plot}: no x ticks found");
        for (x, anchor, size, text) in texts {
            let width = 0.65 * size * text.chars().count() as f64;
            let (left, right) = match anchor.as_str() {
                "middle" => (x - width / 2.0, x + width / 2.0),
                "end" => (x - width, x),
                _ => (x, x + width),
            };
            assert!(
                left >= 0.0 && right <= 800.0,
                "{plot}: `{text}` spans {left:.0} to {right:.0} of 800"
            );
        }
    }
}
