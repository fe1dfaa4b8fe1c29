//! The lab page's alerting rules and example queries (docs/lab.md), checked with the
//! engine's own tools from the distribution's `prometheus` package: `promtool check
//! rules` on the rules block cut from the page, and `promtool test rules` running
//! tests/lab/rules_test.yml against it. Every query the page shows must be one the test
//! file evaluates. Without promtool this fails in CI (CI=true), where .ci/run installs the
//! package, and says so loudly elsewhere.

mod common;

use std::path::Path;

use common::lab_page_block as block;
use std::process::Command;

const UNIT_TESTS: &str = include_str!("lab/rules_test.yml");

/// promtool, when installed.
fn promtool() -> Option<&'static str> {
    if Command::new("promtool").arg("--version").output().is_ok() {
        return Some("promtool");
    }
    assert!(
        std::env::var("CI").is_err(),
        "promtool is not installed: it comes with the distribution's `prometheus` package, \
         which .ci/run installs, so in CI this test fails rather than pass unchecked"
    );
    eprintln!("SKIPPED, NOT CHECKED: install the distribution's `prometheus` package");
    None
}

/// Runs promtool with `args` in `dir`; its output when it succeeded.
fn run(program: &str, dir: &Path, args: &[&str]) -> String {
    let out = Command::new(program)
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    let said = format!(
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(out.status.success(), "promtool {args:?}:\n{said}");
    said
}

// Source: the engine's own rule checker and rule unit tester (promtool, from the
// distribution's prometheus package): the page's rules are valid, and each alert fires on
// the invented series it is meant for, when its `for` allows, with its summary, and stays
// quiet on the others; the page's queries give the values worked out beside each series
// in tests/lab/rules_test.yml (0.001 dB a 10 s scrape is 0.36 dB/h; 6 of 12 scrapes is
// 0.5; the lowest of 20, 14 and 26 dB is 14).
#[test]
fn the_pages_rules_and_queries_do_what_it_says() {
    let Some(program) = promtool() else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("lab-alerts.yml"),
        block("yaml", "# lab-alerts.yml"),
    )
    .unwrap();
    std::fs::write(dir.path().join("rules_test.yml"), UNIT_TESTS).unwrap();
    let checked = run(program, dir.path(), &["check", "rules", "lab-alerts.yml"]);
    assert!(checked.contains("SUCCESS: 4 rules found"), "{checked}");
    let tested = run(program, dir.path(), &["test", "rules", "rules_test.yml"]);
    assert!(tested.contains("SUCCESS"), "{tested}");
}

// Source: the page's promise that each query it shows is checked: each is evaluated in
// tests/lab/rules_test.yml, as it stands or inside a comparison.
#[test]
fn every_query_on_the_page_is_evaluated_by_the_unit_tests() {
    let queries = block("promql", "#");
    let queries: Vec<&str> = queries
        .lines()
        .filter(|l| !l.is_empty() && !l.starts_with('#'))
        .collect();
    assert_eq!(queries.len(), 5, "{queries:?}");
    let evaluated: Vec<&str> = UNIT_TESTS
        .lines()
        .filter_map(|l| l.trim().strip_prefix("- expr: "))
        .collect();
    for query in queries {
        assert!(
            evaluated.iter().any(|e| e.contains(query)),
            "the page's query `{query}` is not evaluated in tests/lab/rules_test.yml"
        );
    }
}
