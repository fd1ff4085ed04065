//! The one way legwork runs an external scheduler command: a timeout, bounded
//! retries with back-off for transient failures, and the exact command line in the
//! log.

use std::io::Read;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};
use thiserror::Error;

/// What went wrong running a command.
#[derive(Debug, Error)]
pub enum RunError {
    /// The program could not be started at all (not installed, not on PATH).
    #[error("could not run `{command}`: {source}; is it installed and on PATH?")]
    Spawn {
        /// The command line.
        command: String,
        /// The OS error.
        source: std::io::Error,
    },
    /// The command did not finish in time, on every attempt.
    #[error("`{command}` did not finish within {seconds} s ({attempts} attempts); is the scheduler's controller answering?")]
    Timeout {
        /// The command line.
        command: String,
        /// The per-attempt limit.
        seconds: u64,
        /// Attempts made.
        attempts: u32,
    },
    /// The command exited non-zero (after retries, if the failure looked transient).
    #[error("`{command}` {}: {stderr}", ended(*code))]
    Failed {
        /// The command line.
        command: String,
        /// Exit code (None: killed by a signal).
        code: Option<i32>,
        /// What it printed on standard error (trimmed).
        stderr: String,
        /// What it printed on standard output.
        stdout: String,
    },
}

/// How a command ended, in words: "exited with status 1", "was killed by a signal".
fn ended(code: Option<i32>) -> String {
    match code {
        Some(c) => format!("exited with status {c}"),
        None => "was killed by a signal".into(),
    }
}

/// Output of a command that exited 0.
#[derive(Debug, Clone)]
pub struct Output {
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

/// Runs commands with a timeout and bounded retries.
#[derive(Debug, Clone)]
pub struct Runner {
    /// Limit per attempt.
    pub timeout: Duration,
    /// Attempts for a transient failure (timeout or a message that says the
    /// controller is busy or unreachable), at least 1.
    pub attempts: u32,
    /// Delay before the second attempt; doubled each time.
    pub backoff: Duration,
    /// Where the programs are (`scheduler.commands_dir`); `None`: on `PATH`.
    pub program_dir: Option<std::path::PathBuf>,
    /// Variables added to every command's environment (on top of legwork's own).
    pub env: Vec<(String, String)>,
}

impl Default for Runner {
    fn default() -> Self {
        Runner {
            timeout: Duration::from_secs(60),
            attempts: 4,
            backoff: Duration::from_millis(500),
            program_dir: None,
            env: Vec::new(),
        }
    }
}

/// Phrases in scheduler error messages that mean "try again later" rather than
/// "this request is wrong" (common practice, no source: these are what the
/// controllers print when busy, restarting or unreachable).
const TRANSIENT: &[&str] = &[
    "timed out",
    "timeout",
    "try again",
    "temporarily unavailable",
    "unable to contact",
    "connection refused",
    "socket",
    "communication",
    "not responding",
    "resource temporarily",
    "server is busy",
    "cannot connect",
    "batch server",
    "lsf is down",
    "batch system daemon",
];

fn looks_transient(stderr: &str) -> bool {
    let s = stderr.to_ascii_lowercase();
    TRANSIENT.iter().any(|t| s.contains(t))
}

impl RunError {
    /// Whether the failure may be the scheduler's passing state (a timeout, a
    /// busy or unreachable controller, a command killed by a signal) rather than
    /// a refusal of the request. For a submission this means "it may or may not
    /// have been taken".
    pub fn is_transient(&self) -> bool {
        match self {
            RunError::Timeout { .. } => true,
            RunError::Failed { stderr, code, .. } => looks_transient(stderr) || code.is_none(),
            RunError::Spawn { .. } => false,
        }
    }
}

/// Quotes one argument for the log so the line can be pasted into a shell.
fn quote(arg: &str) -> String {
    if !arg.is_empty()
        && arg
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_./=:,%+@[]".contains(c))
    {
        arg.to_string()
    } else {
        format!("'{}'", arg.replace('\'', r"'\''"))
    }
}

/// The command line as a shell would read it.
pub fn command_line(program: &str, args: &[String]) -> String {
    let mut s = quote(program);
    for a in args {
        s.push(' ');
        s.push_str(&quote(a));
    }
    s
}

impl Runner {
    /// Runs `program args…`, retrying transient failures; Ok only on exit 0.
    pub fn run(&self, program: &str, args: &[String]) -> Result<Output, RunError> {
        self.run_in(program, args, None)
    }

    /// Runs `program args…` exactly once, whatever the failure: for a command
    /// that changes the scheduler (a submission), where a retry after an
    /// ambiguous failure could do it twice. The caller resolves the ambiguity
    /// (see `state::submit_once`).
    pub fn run_once(&self, program: &str, args: &[String]) -> Result<Output, RunError> {
        Runner {
            attempts: 1,
            ..self.clone()
        }
        .run_in(program, args, None)
    }

    /// As [`Runner::run_once`] with standard input read from a file.
    pub fn run_once_stdin(
        &self,
        program: &str,
        args: &[String],
        stdin: &std::path::Path,
    ) -> Result<Output, RunError> {
        Runner {
            attempts: 1,
            ..self.clone()
        }
        .run_in(program, args, Some(stdin))
    }

    /// As [`Runner::run`] with standard input read from a file (`bsub < script`).
    pub fn run_stdin(
        &self,
        program: &str,
        args: &[String],
        stdin: &std::path::Path,
    ) -> Result<Output, RunError> {
        self.run_in(program, args, Some(stdin))
    }

    fn run_in(
        &self,
        program: &str,
        args: &[String],
        stdin: Option<&std::path::Path>,
    ) -> Result<Output, RunError> {
        let mut line = command_line(program, args);
        if let Some(p) = stdin {
            line.push_str(&format!(" < {}", quote(&p.display().to_string())));
        }
        let attempts = self.attempts.max(1);
        let mut delay = self.backoff;
        let mut last = None;
        for attempt in 1..=attempts {
            tracing::debug!(command = %line, attempt, "running");
            match self.once(program, args, stdin, &line) {
                Ok(out) => return Ok(out),
                Err(e) => {
                    let transient = e.is_transient();
                    if !transient || attempt == attempts {
                        if let RunError::Timeout { .. } = e {
                            return Err(RunError::Timeout {
                                command: line,
                                seconds: self.timeout.as_secs(),
                                attempts: attempt,
                            });
                        }
                        return Err(e);
                    }
                    tracing::warn!(command = %line, error = %e, "transient failure; retrying in {:?}", delay);
                    std::thread::sleep(delay);
                    delay *= 2;
                    last = Some(e);
                }
            }
        }
        Err(last.expect("at least one attempt"))
    }

    fn once(
        &self,
        program: &str,
        args: &[String],
        stdin: Option<&std::path::Path>,
        line: &str,
    ) -> Result<Output, RunError> {
        let mut cmd = match &self.program_dir {
            Some(dir) => Command::new(dir.join(program)),
            None => Command::new(program),
        };
        cmd.args(args)
            .envs(self.env.iter().map(|(k, v)| (k, v)))
            .stdout(Stdio::piped())
            .stderr(Stdio::piped());
        // A command in flight dies with legwork rather than finishing behind the
        // back of the next legwork (which reconciles by job name instead). The
        // death signal only covers a parent that dies after it is set: one killed
        // between fork and prctl has already handed the child to init, which the
        // parent id shows, and the child then never execs.
        {
            use std::os::unix::process::CommandExt;
            let parent = nix::unistd::getpid();
            unsafe {
                cmd.pre_exec(move || {
                    nix::sys::prctl::set_pdeathsig(nix::sys::signal::Signal::SIGKILL)?;
                    if nix::unistd::getppid() != parent {
                        return Err(std::io::Error::other(
                            "legwork ended before the command started",
                        ));
                    }
                    Ok(())
                });
            }
        }
        match stdin {
            Some(p) => {
                let f = std::fs::File::open(p).map_err(|source| RunError::Spawn {
                    command: line.to_string(),
                    source,
                })?;
                cmd.stdin(f);
            }
            None => {
                cmd.stdin(Stdio::null());
            }
        }
        let mut child = cmd.spawn().map_err(|source| RunError::Spawn {
            command: line.to_string(),
            source,
        })?;
        // Read both pipes on their own threads so a chatty command cannot block on
        // a full pipe while we wait for it.
        let mut so = child.stdout.take().expect("piped");
        let mut se = child.stderr.take().expect("piped");
        let to = std::thread::spawn(move || {
            let mut b = Vec::new();
            let _ = so.read_to_end(&mut b);
            b
        });
        let te = std::thread::spawn(move || {
            let mut b = Vec::new();
            let _ = se.read_to_end(&mut b);
            b
        });
        let start = Instant::now();
        let status = loop {
            match child.try_wait() {
                Ok(Some(st)) => break st,
                Ok(None) => {
                    if start.elapsed() > self.timeout {
                        let _ = child.kill();
                        let _ = child.wait();
                        return Err(RunError::Timeout {
                            command: line.to_string(),
                            seconds: self.timeout.as_secs(),
                            attempts: 1,
                        });
                    }
                    std::thread::sleep(Duration::from_millis(5));
                }
                Err(source) => {
                    return Err(RunError::Spawn {
                        command: line.to_string(),
                        source,
                    })
                }
            }
        };
        let stdout = String::from_utf8_lossy(&to.join().unwrap_or_default()).into_owned();
        let stderr = String::from_utf8_lossy(&te.join().unwrap_or_default()).into_owned();
        if status.success() {
            tracing::trace!(command = %line, "ok");
            Ok(Output { stdout, stderr })
        } else {
            Err(RunError::Failed {
                command: line.to_string(),
                code: status.code(),
                stderr: stderr.trim().to_string(),
                stdout,
            })
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quotes_what_a_shell_would_split() {
        assert_eq!(
            command_line("sbatch", &["--job-name=a b".into(), "x.sh".into()]),
            "sbatch '--job-name=a b' x.sh"
        );
    }

    #[test]
    fn a_hard_failure_is_not_retried_and_keeps_stderr() {
        let r = Runner {
            timeout: Duration::from_secs(5),
            attempts: 3,
            backoff: Duration::from_millis(1),
            program_dir: None,
            env: Vec::new(),
        };
        let err = r
            .run("sh", &["-c".into(), "echo nope >&2; exit 3".into()])
            .unwrap_err();
        match err {
            RunError::Failed {
                ref code,
                ref stderr,
                ..
            } => {
                assert_eq!(*code, Some(3));
                assert_eq!(stderr, "nope");
                let text = err.to_string();
                assert!(text.contains("exited with status 3: nope"), "{text}");
                assert!(!text.contains("Some("), "{text}");
            }
            other => panic!("unexpected {other}"),
        }
    }

    #[test]
    fn a_transient_failure_is_retried_until_it_succeeds() {
        let dir = tempfile::tempdir().unwrap();
        let count = dir.path().join("n");
        // Fails with a "try again" message twice, then succeeds.
        let script = format!(
            "n=$(cat {c} 2>/dev/null || echo 0); n=$((n+1)); echo $n > {c}; \
             if [ $n -lt 3 ]; then echo 'Socket timed out, try again' >&2; exit 1; fi; echo ok",
            c = count.display()
        );
        let r = Runner {
            timeout: Duration::from_secs(5),
            attempts: 4,
            backoff: Duration::from_millis(1),
            program_dir: None,
            env: Vec::new(),
        };
        let out = r.run("sh", &["-c".into(), script]).unwrap();
        assert_eq!(out.stdout.trim(), "ok");
        assert_eq!(std::fs::read_to_string(&count).unwrap().trim(), "3");
    }

    #[test]
    fn a_hung_command_times_out() {
        let r = Runner {
            timeout: Duration::from_millis(200),
            attempts: 2,
            backoff: Duration::from_millis(1),
            program_dir: None,
            env: Vec::new(),
        };
        let err = r.run("sleep", &["5".into()]).unwrap_err();
        assert!(
            matches!(err, RunError::Timeout { attempts: 2, .. }),
            "{err}"
        );
    }
}
