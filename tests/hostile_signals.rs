//! Outputs are written atomically: a `quarry reco -o FILE` run killed
//! mid-way leaves nothing under the final name.
//!
//! The writer streams rows into a hidden temporary file beside the target,
//! `.NAME.tmp-PID-N` (docs/csv-format.md), and renames it into place only
//! after the last row. A process killed by SIGKILL runs no code at all, so
//! **its temporary file stays behind**; it is hidden (leading dot) and its
//! name says what it is, so a cleanup job can match it. SIGTERM (what batch
//! systems send before a kill) and SIGINT are handled: the run stops within
//! about a second, removes its temporary file and exits with code 4, also
//! while one long event is being searched and while the reader waits on a
//! stalled stdin.
#![cfg(unix)]

use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_quarry");

/// A large input: `n` lepton+jets events (about 65 bytes per row, 7 rows
/// per event).
fn write_input(path: &Path, n: u64) {
    use std::io::Write;
    let f = std::fs::File::create(path).unwrap();
    let mut w = std::io::BufWriter::new(f);
    writeln!(w, "event,kind,pt,eta,phi,mass,btag,charge,truth,weight").unwrap();
    for id in 0..n {
        let s = (id % 97) as f64;
        writeln!(w, "{id},jet,{},0.41,-2.71,14.2,0.93,,,1", 150.0 + s).unwrap();
        writeln!(w, "{id},jet,96.3,-0.88,0.35,9.1,0.08,,,1").unwrap();
        writeln!(w, "{id},jet,74.9,1.62,{},7.7,0.12,,,1", (s / 40.0) - 1.2).unwrap();
        writeln!(w, "{id},jet,151.0,-0.23,1.92,11.8,0.88,,,1").unwrap();
        writeln!(w, "{id},jet,45.0,2.1,-0.4,6.0,0.2,,,1").unwrap();
        writeln!(w, "{id},muon,88.2,0.12,2.44,0.10566,,-1,,1").unwrap();
        writeln!(w, "{id},met,120.7,,-0.56,,,,,1").unwrap();
    }
    w.flush().unwrap();
}

/// Names in `dir` other than the input.
fn other_files(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n != "in.csv")
        .collect()
}

/// Whether `name` is the writer's temporary name for `out.csv` written by
/// process `pid`: `.out.csv.tmp-<pid>-<counter>`.
fn is_temp_name(name: &str, pid: u32) -> bool {
    let Some(rest) = name.strip_prefix(&format!(".out.csv.tmp-{pid}-")) else {
        return false;
    };
    !rest.is_empty() && rest.bytes().all(|b| b.is_ascii_digit())
}

fn start(dir: &Path) -> Child {
    Command::new(BIN)
        .current_dir(dir)
        .args([
            "reco",
            "in.csv",
            "-o",
            "out.csv",
            "--no-progress",
            "-q",
            "-j",
            "1",
        ])
        // Small chunks: rows reach the file after the first 64 events.
        .args(["--chunk-size", "64"])
        .args([
            "-H",
            "ttbar-ljets",
            "-H",
            "bwbw-ljets",
            "-H",
            "twtw-ljets",
            "--fit",
        ])
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("start quarry")
}

/// Waits until the run has written rows into its temporary file (so it is
/// mid-run), then sends `signal`, and checks what is left.
fn kill_mid_run(signal: &str) {
    let dir = tempfile::tempdir().unwrap();
    // Far more than the run can finish before the signal: the test
    // signals as soon as the first rows reach the temporary file.
    write_input(&dir.path().join("in.csv"), 40_000);
    let mut child = start(dir.path());
    let pid = child.id();
    let deadline = Instant::now() + Duration::from_secs(120);
    let temp = loop {
        assert!(
            child.try_wait().unwrap().is_none(),
            "quarry finished before it could be killed ({signal}); make the input larger"
        );
        let tmp = other_files(dir.path())
            .into_iter()
            .find(|n| is_temp_name(n, pid));
        if let Some(t) = tmp {
            if std::fs::metadata(dir.path().join(&t)).map_or(0, |m| m.len()) > 0 {
                break t;
            }
        }
        assert!(Instant::now() < deadline, "no rows written within 120 s");
        std::thread::sleep(Duration::from_millis(10));
    };
    assert!(
        !dir.path().join("out.csv").exists(),
        "final name exists mid-run"
    );
    if signal == "KILL" {
        child.kill().unwrap();
    } else {
        let ok = Command::new("kill")
            .args([format!("-{signal}"), pid.to_string()])
            .status()
            .unwrap()
            .success();
        assert!(ok, "kill -{signal} failed");
    }
    let status = child.wait().unwrap();
    assert!(!status.success(), "{signal}: a killed run reported success");
    if signal != "KILL" {
        // docs/cli.md, exit codes: 4 = interrupted by SIGINT or SIGTERM.
        assert_eq!(status.code(), Some(4), "{signal}: exit status {status:?}");
    }
    // Nothing under the final name; at most the temporary file, with its
    // recognisable name.
    assert!(
        !dir.path().join("out.csv").exists(),
        "{signal}: a killed run left output under the final name"
    );
    let left = other_files(dir.path());
    // SIGTERM and SIGINT are handled: the run drops its writer, which
    // removes the temporary file. Only SIGKILL can leave it behind.
    if signal != "KILL" {
        assert!(
            left.is_empty(),
            "{signal}: the handled signal left files behind: {left:?}"
        );
    }
    for name in &left {
        assert!(
            is_temp_name(name, pid),
            "{signal}: unexpected file '{name}' left (temp was '{temp}')"
        );
    }
    eprintln!("{signal}: left behind {left:?}");
}

#[test]
fn sigkill_mid_run_leaves_nothing_under_the_final_name() {
    kill_mid_run("KILL");
}

#[test]
fn sigterm_mid_run_leaves_nothing_under_the_final_name() {
    kill_mid_run("TERM");
}

#[test]
fn sigint_mid_run_leaves_nothing_under_the_final_name() {
    kill_mid_run("INT");
}

/// The counterpart: the same run, not killed, on a small input, ends with
/// the output under its final name and no temporary file.
#[test]
fn a_finished_run_renames_its_output_into_place() {
    let dir = tempfile::tempdir().unwrap();
    write_input(&dir.path().join("in.csv"), 50);
    let status = start(dir.path()).wait().unwrap();
    assert!(status.success());
    // The output and its manifest (docs/manifest.md), nothing else.
    let mut files = other_files(dir.path());
    files.sort();
    assert_eq!(files, ["out.csv", "out.csv.manifest.json"]);
    let text = std::fs::read_to_string(dir.path().join("out.csv")).unwrap();
    // Header + 50 events × 3 hypotheses.
    assert_eq!(text.lines().count(), 1 + 50 * 3);
}

/// Sends `signal` to `child` once `ready` holds, then checks that the run
/// ends within `limit` with exit code 4 and leaves only `keep` in `dir`.
fn signal_and_expect_exit_4(
    child: &mut Child,
    dir: &Path,
    signal: &str,
    ready: impl Fn() -> bool,
    limit: Duration,
    keep: &[&str],
) {
    let pid = child.id();
    let deadline = Instant::now() + Duration::from_secs(60);
    while !ready() {
        assert!(child.try_wait().unwrap().is_none(), "quarry ended early");
        assert!(Instant::now() < deadline, "quarry never got ready");
        std::thread::sleep(Duration::from_millis(10));
    }
    let sent = Instant::now();
    let ok = Command::new("kill")
        .args([format!("-{signal}"), pid.to_string()])
        .status()
        .unwrap()
        .success();
    assert!(ok);
    let status = loop {
        if let Some(s) = child.try_wait().unwrap() {
            break s;
        }
        if sent.elapsed() > Duration::from_secs(30) {
            child.kill().unwrap();
            panic!("{signal}: still running 30 s after the signal");
        }
        std::thread::sleep(Duration::from_millis(10));
    };
    let took = sent.elapsed();
    eprintln!("{signal}: ended {took:?} after the signal, {status:?}");
    assert_eq!(status.code(), Some(4), "{signal}: {status:?}");
    assert!(took < limit, "{signal}: took {took:?} to stop");
    let mut left: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    left.sort();
    assert_eq!(left, keep, "{signal}: files left behind");
}

/// How long a stop may take: "about a second" (docs/cli.md) plus room for
/// a loaded 2-core test machine.
const STOP_LIMIT: Duration = Duration::from_secs(4);

/// One event with 200 jets in two identical back-to-back groups, searched
/// with b-tags ignored: every assignment has the same χ², so the search
/// cannot prune (9 s at `--max-jets 20` on the 2-core development machine
/// when this was written; 24 jets take far longer). The search budget is
/// raised far above what the event needs (`--max-assignments`), so the
/// search is still running when the signal arrives 1.5 s in.
///
/// The signal must reach the search itself: the run then stops on its own
/// path (the writing loop's message, "interrupted by a signal (SIGINT or
/// SIGTERM)"), not through the signal thread's fallback, which ends the
/// process 0.8 s after the signal with a message of its own ("… while
/// waiting for input …"). Before the search watched the flag, only the
/// fallback could end this run.
#[test]
fn a_signal_stops_a_run_inside_one_long_event() {
    use std::io::Write;
    for signal in ["INT", "TERM"] {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("in.csv");
        let mut w = std::io::BufWriter::new(std::fs::File::create(&path).unwrap());
        writeln!(w, "event,kind,pt,eta,phi,mass,btag,charge").unwrap();
        for j in 0..200 {
            let phi = if j % 2 == 0 { 0.0 } else { 3.0 };
            writeln!(w, "1,jet,100,0.0,{phi},10.0,0.5,").unwrap();
        }
        writeln!(w, "1,muon,80.0,0.3,1.0,0.10566,,-1").unwrap();
        writeln!(w, "1,met,60.0,,-2.0,,,").unwrap();
        drop(w);
        let mut child = Command::new(BIN)
            .current_dir(dir.path())
            .args(["reco", "in.csv", "-o", "out.csv", "--no-progress", "-q"])
            .args(["-H", "twtw-ljets", "--max-jets", "24", "-j", "1"])
            .args(["--btag-mode", "ignore"])
            .args(["--max-assignments", "1000000000000000"])
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap();
        let pid = child.id();
        let started = Instant::now();
        let d = dir.path().to_path_buf();
        // The temporary file exists once the run has started; the read of
        // one event takes milliseconds, so after 1.5 s the run is searching.
        let ready = move || {
            started.elapsed() > Duration::from_millis(1500)
                && other_files(&d).iter().any(|n| is_temp_name(n, pid))
        };
        signal_and_expect_exit_4(
            &mut child,
            dir.path(),
            signal,
            ready,
            STOP_LIMIT,
            &["in.csv"],
        );
        let mut stderr = String::new();
        std::io::Read::read_to_string(&mut child.stderr.take().unwrap(), &mut stderr).unwrap();
        assert!(
            stderr.contains("quarry: error: interrupted by a signal (SIGINT or SIGTERM)\n"),
            "{signal}: the run did not stop on its own path: {stderr}"
        );
        assert!(
            !stderr.contains("waiting for input"),
            "{signal}: the signal thread's fallback ended the run (the search did not see the signal): {stderr}"
        );
    }
}

/// `(sleep 10) | quarry reco -`: the reader waits on a stdin that sends
/// nothing. A signal must still end the run promptly, with no temporary
/// file left.
#[test]
fn a_signal_stops_a_run_waiting_on_a_stalled_stdin() {
    for signal in ["TERM", "INT"] {
        let dir = tempfile::tempdir().unwrap();
        let mut child = Command::new(BIN)
            .current_dir(dir.path())
            .args(["reco", "-", "-o", "out.csv", "--no-progress", "-q"])
            .stdin(Stdio::piped())
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        // Keep the pipe open and silent, like `sleep 10 |`.
        let stdin = child.stdin.take();
        let pid = child.id();
        let d = dir.path().to_path_buf();
        let ready = move || other_files(&d).iter().any(|n| is_temp_name(n, pid));
        signal_and_expect_exit_4(&mut child, dir.path(), signal, ready, STOP_LIMIT, &[]);
        drop(stdin);
    }
}
