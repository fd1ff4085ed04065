//! The command line itself: a closed pipe, the manual pages, help text, plain
//! error output in a log file.

use std::path::PathBuf;
use std::process::{Command, Stdio};

fn legwork() -> Command {
    Command::new(env!("CARGO_BIN_EXE_legwork"))
}

/// Runs `cmd` with its standard output closed before it writes (as in
/// `legwork … | head -0`) and asserts it ends with status 0 and no panic,
/// backtrace or error on stderr.
pub(crate) fn assert_quiet_into_a_closed_pipe(mut cmd: Command) {
    let mut child = cmd
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let out = child.wait_with_output().unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(
        out.status.success(),
        "status {:?}, stderr: {stderr}",
        out.status
    );
    assert!(
        !stderr.contains("panicked")
            && !stderr.contains("backtrace")
            && !stderr.contains("error")
            && !stderr.contains("Broken pipe"),
        "stderr: {stderr}"
    );
}

#[test]
fn a_closed_pipe_ends_quietly_with_status_0() {
    let mut cmd = legwork();
    cmd.arg("man");
    assert_quiet_into_a_closed_pipe(cmd);
}

#[test]
fn every_page_the_main_man_page_refers_to_is_shipped() {
    let main = legwork().arg("man").output().unwrap();
    assert!(main.status.success());
    let text = String::from_utf8(main.stdout).unwrap();
    // clap_mangen lists the verbs as `legwork\-<verb>(1)`.
    let referred: Vec<String> = text
        .lines()
        .filter_map(|l| l.strip_prefix("legwork\\-"))
        .filter_map(|l| l.strip_suffix("(1)"))
        .map(|v| v.replace("\\-", "-"))
        .collect();
    assert!(referred.len() >= 12, "verbs referred to: {referred:?}");
    let dir = tempfile::tempdir().unwrap();
    let all = legwork()
        .args(["man", "--out-dir"])
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(
        all.status.success(),
        "{}",
        String::from_utf8_lossy(&all.stderr)
    );
    for verb in &referred {
        let page: PathBuf = dir.path().join(format!("legwork-{verb}.1"));
        let body = std::fs::read_to_string(&page)
            .unwrap_or_else(|e| panic!("{} is referred to but not written: {e}", page.display()));
        assert!(body.contains(".TH"), "{} is not a man page", page.display());
        let one = legwork().args(["man", verb]).output().unwrap();
        assert!(one.status.success(), "legwork man {verb} failed");
        // roff escapes every hyphen of the page's name.
        let title = format!("legwork\\-{}", verb.replace('-', "\\-"));
        assert!(
            String::from_utf8_lossy(&one.stdout).contains(&title),
            "{title}"
        );
    }
    let bad = legwork().args(["man", "nosuchverb"]).output().unwrap();
    assert_eq!(bad.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad.stderr).contains("hint:"));
}

#[test]
fn help_shows_the_campaign_file_as_required_for_every_verb_that_needs_it() {
    for verb in [
        "check", "expand", "submit", "status", "watch", "resume", "cancel", "collect", "report",
        "run",
    ] {
        let out = legwork().args([verb, "--help"]).output().unwrap();
        let text = String::from_utf8_lossy(&out.stdout);
        let usage = text.lines().find(|l| l.starts_with("Usage:")).unwrap_or("");
        assert!(
            usage.contains("<FILE>"),
            "`legwork {verb} --help` does not show FILE as required: {usage}"
        );
    }
}

#[test]
fn errors_written_to_a_file_carry_no_colour_codes() {
    let dir = tempfile::tempdir().unwrap();
    let log = std::fs::File::create(dir.path().join("log")).unwrap();
    let status = legwork()
        .args(["-v", "check"])
        .arg(dir.path().join("missing.yaml"))
        .stderr(log)
        .status()
        .unwrap();
    assert!(!status.success());
    let text = std::fs::read_to_string(dir.path().join("log")).unwrap();
    assert!(!text.is_empty());
    assert!(
        !text.contains('\u{1b}'),
        "ANSI escape in a log file: {text:?}"
    );
}
