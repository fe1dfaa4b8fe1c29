//! Helpers shared by the end-to-end tests: the real binary, scratch folders removed after
//! each test, pseudo-terminals as serial ports, and the rows of a recording.
// Each test file uses its own subset of these.
#![allow(dead_code)]

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use serialport::{SerialPort, TTYPort};

pub fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_dbtrail"));
    c.current_dir(env!("CARGO_MANIFEST_DIR"));
    c
}

/// A folder of its own for one test, removed with everything in it when the guard drops.
pub fn scratch(name: &str) -> tempfile::TempDir {
    tempfile::Builder::new()
        .prefix(&format!("dbtrail-{name}-"))
        .tempdir()
        .unwrap()
}

/// The hand-worked log-amp shared with the screen's tests (see the file for its maths).
pub const HAND_PROFILE: &str = include_str!("../profiles/good/hand-logamp.toml");

/// Source: worked example by hand — counts × 1 mV / 25 mV/dB − 80 dBm, + 1 dB correction
/// at 100 MHz (halfway from 10 MHz to 1 GHz in log-frequency), + 30 dB attenuator.
pub fn hand_dbm(counts: f64) -> f64 {
    counts * 1e-3 / 0.025 - 80.0 + 1.0 + 30.0
}

/// The ADC and frequency options `fit` takes for the hand-worked log-amp points (a 12-bit
/// ADC on 4.095 V: 1 mV a count, measured at 10 MHz).
pub const FIT_ADC_AND_FREQ: [&str; 6] = ["--adc-bits", "12", "--vref", "4.095", "--freq", "10MHz"];

pub fn write_profile(dir: &Path) -> PathBuf {
    let path = dir.join("hand.toml");
    std::fs::write(&path, HAND_PROFILE).unwrap();
    path
}

/// Data rows of a recording: the lines after the `#` context and the column header.
pub fn rows(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    parse_rows(&std::fs::read_to_string(path).unwrap())
}

/// The rows of a recording still being written: only its complete lines, and nothing
/// before the file or its header exists.
pub fn rows_so_far(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let text = std::fs::read_to_string(path).unwrap_or_default();
    parse_rows(&text[..text.rfind('\n').map_or(0, |end| end + 1)])
}

fn parse_rows(text: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .flexible(true)
        .from_reader(text.as_bytes());
    let header = reader.headers().unwrap().iter().map(String::from).collect();
    let rows = reader
        .records()
        .map(|r| r.unwrap().iter().map(String::from).collect())
        .collect();
    (header, rows)
}

/// Checks `ready` every 20 ms until it gives a value; after `limit`, fails with what it
/// last said was missing.
pub fn wait_until<T>(limit: Duration, mut ready: impl FnMut() -> Result<T, String>) -> T {
    let started = Instant::now();
    loop {
        match ready() {
            Ok(value) => return value,
            Err(missing) if started.elapsed() > limit => {
                panic!("not within {limit:?}: {missing}")
            }
            // The poll interval of this deadline wait, not a wait for the effect itself.
            Err(_) => std::thread::sleep(Duration::from_millis(20)),
        }
    }
}

pub fn column(header: &[String], name: &str) -> usize {
    header
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("no column {name} in {header:?}"))
}

pub fn wait(mut child: Child, limit: Duration) -> std::process::ExitStatus {
    let started = Instant::now();
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            return status;
        }
        if started.elapsed() > limit {
            let _ = child.kill();
            panic!("the recorder did not finish within {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

/// A child killed when dropped, so that a test that fails part-way leaves no recorder
/// running; `release` hands it back for a clean end.
pub struct KillOnDrop(Option<Child>);

impl KillOnDrop {
    pub fn new(child: Child) -> Self {
        KillOnDrop(Some(child))
    }

    pub fn id(&self) -> u32 {
        self.0.as_ref().map_or(0, Child::id)
    }

    pub fn release(mut self) -> Child {
        self.0.take().expect("released once")
    }
}

impl Drop for KillOnDrop {
    fn drop(&mut self) {
        if let Some(child) = &mut self.0 {
            let _ = child.kill();
            let _ = child.wait();
        }
    }
}

pub static SPAWNING: std::sync::Mutex<()> = std::sync::Mutex::new(());

/// Starts a child while no pseudo-terminal is half set up in another test thread.
pub fn spawn(command: &mut Command) -> Child {
    let _guard = SPAWNING.lock().unwrap_or_else(|e| e.into_inner());
    command.spawn().unwrap()
}

/// Runs a child to its end, like `spawn`.
pub fn output(command: &mut Command) -> std::process::Output {
    let child = spawn(command.stdout(Stdio::piped()).stderr(Stdio::piped()));
    child.wait_with_output().unwrap()
}

/// Runs the binary with `args` to its end and insists it succeeded, showing its stderr
/// when it did not.
pub fn succeeded<I, S>(args: I) -> std::process::Output
where
    I: IntoIterator<Item = S>,
    S: AsRef<std::ffi::OsStr>,
{
    let out = output(bin().args(args));
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// A pseudo-terminal pair whose fds a spawned recorder does not inherit: an inherited
/// master would keep the "device" alive after the test unplugs it.
pub fn pty_pair() -> (TTYPort, TTYPort) {
    use nix::fcntl::{fcntl, FcntlArg, FdFlag};
    use std::os::fd::AsRawFd;
    // Held so no other test thread spawns a child between opening and marking the fds.
    let _guard = SPAWNING.lock().unwrap_or_else(|e| e.into_inner());
    let (master, slave) = TTYPort::pair().unwrap();
    for fd in [master.as_raw_fd(), slave.as_raw_fd()] {
        fcntl(fd, FcntlArg::F_SETFD(FdFlag::FD_CLOEXEC)).unwrap();
    }
    let mut master = master;
    // Writes wait for a slow or late reader instead of failing at once.
    master.set_timeout(Duration::from_secs(10)).unwrap();
    (master, slave)
}

/// A terminal of `cols` × `rows` for a spawned screen: its master (what the screen draws
/// is read from it and drained on a thread; keys are written to it) and its slave, for
/// the child's standard input and output. Both close on exec, as [`pty_pair`]'s do.
pub fn screen_terminal(cols: u16, rows: u16) -> (std::fs::File, std::fs::File) {
    use nix::fcntl::{fcntl, FcntlArg, FdFlag};
    use std::os::fd::FromRawFd;
    let _guard = SPAWNING.lock().unwrap_or_else(|e| e.into_inner());
    let size = nix::pty::Winsize {
        ws_row: rows,
        ws_col: cols,
        ws_xpixel: 0,
        ws_ypixel: 0,
    };
    let pty = nix::pty::openpty(Some(&size), None).unwrap();
    for fd in [pty.master, pty.slave] {
        fcntl(fd, FcntlArg::F_SETFD(FdFlag::FD_CLOEXEC)).unwrap();
    }
    // Safety: openpty has just opened both, and nothing else owns them.
    let (master, slave) = unsafe {
        (
            std::fs::File::from_raw_fd(pty.master),
            std::fs::File::from_raw_fd(pty.slave),
        )
    };
    let mut drained = master.try_clone().unwrap();
    std::thread::spawn(move || std::io::copy(&mut drained, &mut std::io::sink()));
    (master, slave)
}

/// Writes one line per item (counts, or `a,b` lines of two channels), in batches of 50.
pub fn write_lines(master: &mut TTYPort, lines: impl Iterator<Item = impl std::fmt::Display>) {
    let mut batch = Vec::new();
    for (i, line) in lines.enumerate() {
        batch.extend_from_slice(format!("{line}\n").as_bytes());
        if i % 50 == 49 {
            master.write_all(&batch).unwrap();
            batch.clear();
            std::thread::sleep(Duration::from_millis(5));
        }
    }
    master.write_all(&batch).unwrap();
    master.flush().unwrap();
}

/// Points the "device" path `link` at `slave`: plugging a port in (again).
pub fn repoint(link: &Path, slave: &TTYPort) {
    let _ = std::fs::remove_file(link);
    std::os::unix::fs::symlink(slave.name().unwrap(), link).unwrap();
}

/// Waits until `ready` holds; after `limit`, fails naming `what`.
pub fn wait_for(limit: Duration, what: &str, mut ready: impl FnMut() -> bool) {
    wait_until(limit, || {
        if ready() {
            Ok(())
        } else {
            Err(what.to_string())
        }
    })
}

/// Complete data rows in a recording so far.
pub fn row_count(path: &Path) -> usize {
    rows_so_far(path).1.len()
}

/// Waits until `record` has written its log's context lines: by then its source is open
/// and its signal handlers are set.
pub fn wait_for_log_start(limit: Duration, out: &Path) {
    wait_for(limit, "the log's context lines", || {
        std::fs::read_to_string(out).is_ok_and(|t| t.contains("# source:"))
    });
}

/// Rows whose `flags` cell holds `word`.
pub fn flagged(rows: &[Vec<String>], flags: usize, word: &str) -> usize {
    rows.iter()
        .filter(|r| r[flags].split('|').any(|f| f == word))
        .count()
}

/// The samples the rows hold, from their `samples` column.
pub fn samples_in(rows: &[Vec<String>], samples: usize) -> usize {
    rows.iter()
        .map(|r| r[samples].parse::<usize>().unwrap())
        .sum()
}

/// Waits until the rows so far of the recording at `out` hold `want` samples or more (by
/// their `samples` column); gives how many rows there are by then.
pub fn wait_for_samples(limit: Duration, out: &Path, samples: usize, want: usize) -> usize {
    wait_until(limit, || match rows_so_far(out).1 {
        rows if samples_in(&rows, samples) >= want => Ok(rows.len()),
        rows => Err(format!("{want} samples not recorded: {rows:?}")),
    })
}

/// Waits until `count` or more rows so far of the recording at `out` are flagged `word`
/// (in their `flags` column).
pub fn wait_for_flagged(limit: Duration, out: &Path, flags: usize, word: &str, count: usize) {
    wait_until(limit, || match rows_so_far(out).1 {
        rows if flagged(&rows, flags, word) >= count => Ok(()),
        rows => Err(format!("not {count} rows flagged {word}: {rows:?}")),
    })
}

/// Waits until the recording at `out` has a data row, and gives its header: a row is
/// written only once the port is open.
pub fn wait_for_first_row(limit: Duration, out: &Path) -> Vec<String> {
    wait_until(limit, || match rows_so_far(out) {
        (header, rows) if !rows.is_empty() => Ok(header),
        _ => Err("no row yet".to_string()),
    })
}

/// Sends `signal` (a name such as INT) to a child.
pub fn signal(child: &KillOnDrop, signal: &str) {
    let sent = Command::new("kill")
        .args([format!("-{signal}"), child.id().to_string()])
        .status()
        .unwrap();
    assert!(sent.success(), "kill -{signal} failed");
}

/// A named pipe in `dir`.
pub fn fifo(dir: &Path, name: &str) -> PathBuf {
    let path = dir.join(name);
    let made = Command::new("mkfifo").arg(&path).status().unwrap();
    assert!(made.success(), "mkfifo {}", path.display());
    path
}

/// The demo diode profile with the parameters of its own fit written in and the ADC's
/// reference voltage changed to `vref`: the points' volts move, the model does not.
pub fn demo_diode_with_stale_fit(vref: f64) -> String {
    let text = include_str!("../../profiles/demo-diode.toml");
    let fitted = dbtrail::profile::parse_profile(text, "demo-diode.toml").unwrap();
    let (n, vl) = (
        fitted.model.param("n").unwrap(),
        fitted.model.param("vl").unwrap(),
    );
    text.replacen("vref = 1.2", &format!("vref = {vref}"), 1)
        .replacen(
            "temperature = 300",
            &format!("temperature = 300\nn = {n}\nvl = {vl}"),
            1,
        )
}

/// A JSON fixture from tests/reference/ (written by the scripts there).
pub fn reference_fixture(name: &str) -> serde_json::Value {
    let path = format!("{}/tests/reference/{name}", env!("CARGO_MANIFEST_DIR"));
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// A JSON array of numbers.
pub fn floats(v: &serde_json::Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

/// A GET of `path` at `addr` by hand (HTTP/1.1, the connection closed after), with an
/// `Accept` header when given: the status line, the headers (lower case) and the body.
pub fn http_get(
    addr: &str,
    path: &str,
    accept: Option<&str>,
) -> Result<(String, String, String), String> {
    use std::io::Read;
    let mut stream = std::net::TcpStream::connect(addr).map_err(|e| e.to_string())?;
    stream
        .set_read_timeout(Some(Duration::from_secs(5)))
        .map_err(|e| e.to_string())?;
    let accept = accept.map_or(String::new(), |a| format!("Accept: {a}\r\n"));
    let request =
        format!("GET {path} HTTP/1.1\r\nHost: {addr}\r\n{accept}Connection: close\r\n\r\n");
    stream
        .write_all(request.as_bytes())
        .map_err(|e| e.to_string())?;
    let mut response = String::new();
    stream
        .read_to_string(&mut response)
        .map_err(|e| e.to_string())?;
    let (head, body) = response.split_once("\r\n\r\n").ok_or("no header end")?;
    let (status, headers) = head.split_once("\r\n").unwrap_or((head, ""));
    Ok((status.to_string(), headers.to_lowercase(), body.to_string()))
}

/// The address a spawned child names on the first line of its standard error that holds
/// `lead`, up to `end`; the rest of what it says is drained on a thread, so that its
/// standard error never fills.
pub fn address_said(child: &mut Child, lead: &str, end: &str) -> String {
    use std::io::BufRead;
    let mut said = std::io::BufReader::new(child.stderr.take().expect("a piped stderr"));
    let mut line = String::new();
    loop {
        line.clear();
        assert!(
            said.read_line(&mut line).unwrap() > 0,
            "it never said {lead}"
        );
        if let Some(at) = line.find(lead) {
            let rest = &line[at + lead.len()..];
            let addr = rest.split(end).next().unwrap().trim().to_string();
            std::thread::spawn(move || std::io::copy(&mut said, &mut std::io::sink()));
            return addr;
        }
    }
}

/// A `record --demo soak --every 1s --duration 60s --metrics 0` run of `station`
/// writing `log`, and the address its metrics are served on, once they are.
pub fn serving_metrics(log: &Path, station: &str) -> (KillOnDrop, String) {
    let mut command = bin();
    command
        .args([
            "record",
            "--demo",
            "soak",
            "--every",
            "1s",
            "--duration",
            "60s",
        ])
        .args(["--metrics", "0", "--station", station, "--out"])
        .arg(log)
        .stderr(Stdio::piped());
    let mut child = spawn(&mut command);
    let addr = address_said(&mut child, "dbtrail: metrics at http://", "/metrics");
    let child = KillOnDrop::new(child);
    // Until its first batch the endpoint answers 503 (docs/lab.md): it serves once 200.
    wait_until(Duration::from_secs(20), || {
        let (status, _, _) = http_get(&addr, "/metrics", None)?;
        if status.contains(" 200 ") {
            Ok(())
        } else {
            Err(format!("not serving yet: {status}"))
        }
    });
    (child, addr)
}

/// The fenced block of `lang` on the lab page (docs/lab.md) whose first line starts with
/// `lead`: the page's own rules and queries, for the tests that check them.
pub fn lab_page_block(lang: &str, lead: &str) -> String {
    let page = include_str!("../../docs/lab.md");
    let fence = format!("```{lang}\n");
    page.split(&fence)
        .skip(1)
        .filter_map(|rest| rest.split_once("```").map(|(body, _)| body))
        .find(|body| body.starts_with(lead))
        .unwrap_or_else(|| panic!("docs/lab.md has no ```{lang} block opening with {lead}"))
        .to_string()
}
