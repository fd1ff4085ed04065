//! The local executor process (`legwork submit --local-executor ROOT`): runs the
//! job files under `<root>/.legwork/local/jobs/` on this machine, at most
//! `max_parallel` cores at once, each element in its own process group with its
//! walltime enforced (SIGTERM, then SIGKILL after a grace period), and exits when
//! idle. SIGINT or SIGTERM stops every running element cleanly (their wrappers
//! record the signal) and records them as interrupted.

use super::local::{ElementState, JobStatusFile, LocalJob, Paths};
use super::{write_file, SchedulerError};
use fs4::fs_std::FileExt;
use nix::sys::signal::Signal;
use std::collections::{BTreeMap, HashMap, HashSet};
use std::os::unix::process::CommandExt;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::sync::mpsc::{self, Receiver, RecvTimeoutError};
use std::time::{Duration, Instant};

/// Seconds between SIGTERM and SIGKILL at walltime, cancellation or interrupt.
const GRACE: Duration = Duration::from_secs(10);
/// How long the executor waits with nothing to do before it exits.
const IDLE: Duration = Duration::from_secs(2);

/// The longest the loop sleeps: new job files and cancel requests are noticed
/// within this; an element's end wakes it at once (SIGCHLD).
const TICK: Duration = Duration::from_millis(50);

/// What wakes the executor's loop.
enum Wake {
    /// A child ended (SIGCHLD).
    Child,
    /// SIGINT, SIGTERM or SIGHUP: stop everything.
    Stop,
}

/// Turns the signals the executor handles into messages on a channel, from a
/// thread of `signal-hook`'s (the handlers themselves only write to a pipe).
fn wake_channel() -> Result<Receiver<Wake>, SchedulerError> {
    use signal_hook::consts::{SIGCHLD, SIGHUP, SIGINT, SIGTERM};
    let mut signals = signal_hook::iterator::Signals::new([SIGCHLD, SIGINT, SIGTERM, SIGHUP])
        .map_err(|e| SchedulerError::io(Path::new("signal handlers"), e))?;
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        for sig in signals.forever() {
            let wake = if sig == SIGCHLD {
                Wake::Child
            } else {
                Wake::Stop
            };
            if tx.send(wake).is_err() {
                return;
            }
        }
    });
    Ok(rx)
}

/// Waits up to `timeout` for a wake-up; sets `stop` when asked to stop. Every
/// message already queued is taken (several children may have ended).
fn wait_for_wake(rx: &Receiver<Wake>, timeout: Duration, stop: &mut bool) {
    let mut take = |w: Wake| {
        if matches!(w, Wake::Stop) {
            *stop = true;
        }
    };
    match rx.recv_timeout(timeout) {
        Ok(w) => take(w),
        Err(RecvTimeoutError::Timeout) => return,
        Err(RecvTimeoutError::Disconnected) => {
            // No signal thread: fall back to sleeping.
            std::thread::sleep(timeout);
            return;
        }
    }
    while let Ok(w) = rx.try_recv() {
        take(w);
    }
}

struct Running {
    child: Child,
    started: Instant,
    walltime: Duration,
    term_sent: Option<Instant>,
    timeout: bool,
    cancelled: bool,
    cpus: usize,
}

struct Executor {
    paths: Paths,
    slots: usize,
    jobs: BTreeMap<u64, LocalJob>,
    states: HashMap<u64, JobStatusFile>,
    running: HashMap<(u64, usize), Running>,
    dirty: HashSet<u64>,
}

/// Runs the executor for the campaign at `root` until it is idle or stopped.
/// Returns at once when another executor already runs there.
pub fn run(root: &Path, max_parallel: usize) -> Result<(), SchedulerError> {
    let paths = Paths::new(root);
    std::fs::create_dir_all(&paths.base).map_err(|e| SchedulerError::io(&paths.base, e))?;
    let lockf = std::fs::OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(paths.lock())
        .map_err(|e| SchedulerError::io(&paths.lock(), e))?;
    if !matches!(lockf.try_lock_exclusive(), Ok(true)) {
        return Ok(());
    }
    let wake = wake_channel()?;
    let mut stop = false;
    let mut ex = Executor {
        paths,
        slots: max_parallel.max(1),
        jobs: BTreeMap::new(),
        states: HashMap::new(),
        running: HashMap::new(),
        dirty: HashSet::new(),
    };
    ex.scan()?;
    // Whatever a previous executor was running when it died is no longer ours.
    for (id, st) in ex.states.iter_mut() {
        for e in st.values_mut() {
            if matches!(e, ElementState::Running { .. }) {
                *e = ElementState::Ended {
                    code: None,
                    signal: None,
                    timeout: false,
                    cancelled: false,
                    interrupted: true,
                };
                ex.dirty.insert(*id);
            }
        }
    }
    ex.flush()?;
    write_file(&ex.paths.ready(), std::process::id().to_string().as_bytes())?;
    tracing::info!(
        "local executor {} running with {} slots",
        std::process::id(),
        ex.slots
    );
    let mut idle_since: Option<Instant> = None;
    loop {
        if stop {
            ex.stop_all(&wake);
            ex.flush()?;
            return Ok(());
        }
        ex.scan()?;
        ex.cancels();
        ex.reap();
        ex.enforce();
        ex.start()?;
        ex.flush()?;
        let busy = !ex.running.is_empty() || ex.has_pending();
        if busy {
            idle_since = None;
        } else {
            let since = *idle_since.get_or_insert_with(Instant::now);
            if since.elapsed() > IDLE {
                // Release, then look once more: a job written just before the
                // release saw the lock held and started no executor.
                let _ = FileExt::unlock(&lockf);
                ex.scan()?;
                if !ex.has_pending() {
                    return Ok(());
                }
                if !matches!(lockf.try_lock_exclusive(), Ok(true)) {
                    return Ok(());
                }
                write_file(&ex.paths.ready(), std::process::id().to_string().as_bytes())?;
                idle_since = None;
            }
        }
        wait_for_wake(&wake, TICK, &mut stop);
    }
}

impl Executor {
    fn scan(&mut self) -> Result<(), SchedulerError> {
        let dir = self.paths.jobs();
        let Ok(rd) = std::fs::read_dir(&dir) else {
            return Ok(());
        };
        for e in rd.flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            let Some(id) = name
                .strip_suffix(".json")
                .and_then(|s| s.parse::<u64>().ok())
            else {
                continue;
            };
            if self.jobs.contains_key(&id) {
                continue;
            }
            let Ok(bytes) = std::fs::read(e.path()) else {
                continue;
            };
            let Ok(job) = serde_json::from_slice::<LocalJob>(&bytes) else {
                continue;
            };
            let st: JobStatusFile = std::fs::read(self.paths.status_of(&job.id))
                .ok()
                .and_then(|b| serde_json::from_slice(&b).ok())
                .unwrap_or_else(|| {
                    self.dirty.insert(id);
                    job.indices
                        .iter()
                        .map(|i| (*i, ElementState::Pending))
                        .collect()
                });
            self.states.insert(id, st);
            self.jobs.insert(id, job);
        }
        Ok(())
    }

    fn has_pending(&self) -> bool {
        self.states
            .values()
            .any(|s| s.values().any(|e| *e == ElementState::Pending))
    }

    fn cancels(&mut self) {
        let dir = self.paths.cancel();
        let Ok(rd) = std::fs::read_dir(&dir) else {
            return;
        };
        for e in rd.flatten() {
            let name = e.file_name().to_string_lossy().into_owned();
            let Some((job, idx)) = name.split_once('_') else {
                continue;
            };
            let (Ok(job), Ok(idx)) = (job.parse::<u64>(), idx.parse::<usize>()) else {
                continue;
            };
            if !self.jobs.contains_key(&job) {
                // Not read yet (or never existed): keep the request for later.
                if !self.paths.job(&job.to_string()).exists() {
                    let _ = std::fs::remove_file(e.path());
                }
                continue;
            }
            if let Some(r) = self.running.get_mut(&(job, idx)) {
                r.cancelled = true;
                if r.term_sent.is_none() {
                    signal_group(r.child.id() as i32, Signal::SIGTERM);
                    r.term_sent = Some(Instant::now());
                }
            } else if let Some(st) = self.states.get_mut(&job) {
                if let Some(s) = st.get_mut(&idx) {
                    if matches!(s, ElementState::Pending | ElementState::DependencyFailed) {
                        *s = ElementState::Ended {
                            code: None,
                            signal: None,
                            timeout: false,
                            cancelled: true,
                            interrupted: false,
                        };
                        self.dirty.insert(job);
                    }
                }
            }
            let _ = std::fs::remove_file(e.path());
        }
    }

    fn reap(&mut self) {
        let mut ended = Vec::new();
        for (key, r) in self.running.iter_mut() {
            if let Ok(Some(status)) = r.child.try_wait() {
                use std::os::unix::process::ExitStatusExt;
                ended.push((
                    *key,
                    ElementState::Ended {
                        code: status.code(),
                        signal: status.signal(),
                        timeout: r.timeout,
                        cancelled: r.cancelled,
                        interrupted: false,
                    },
                ));
            }
        }
        for (key, state) in ended {
            if let Some(r) = self.running.remove(&key) {
                // Make sure nothing of the element outlives it.
                signal_group(r.child.id() as i32, Signal::SIGKILL);
            }
            self.states.get_mut(&key.0).unwrap().insert(key.1, state);
            self.dirty.insert(key.0);
        }
    }

    fn enforce(&mut self) {
        for r in self.running.values_mut() {
            let pgid = r.child.id() as i32;
            match r.term_sent {
                None if r.started.elapsed() > r.walltime => {
                    tracing::info!("walltime reached for process group {pgid}");
                    r.timeout = true;
                    signal_group(pgid, Signal::SIGTERM);
                    r.term_sent = Some(Instant::now());
                }
                Some(t) if t.elapsed() > GRACE => signal_group(pgid, Signal::SIGKILL),
                _ => {}
            }
        }
    }

    /// Whether element `idx` of `job` may start: Some(true) yes, Some(false) not
    /// yet, None never.
    fn ready(&self, job: &LocalJob, idx: usize) -> Option<bool> {
        for (dep, corr) in &job.after {
            let Ok(dep) = dep.parse::<u64>() else {
                continue;
            };
            let Some(st) = self.states.get(&dep) else {
                if self.paths.job(&dep.to_string()).exists() {
                    return Some(false);
                }
                continue;
            };
            let elements: Vec<&ElementState> = if *corr {
                st.get(&idx).into_iter().collect()
            } else {
                st.values().collect()
            };
            for e in elements {
                match e {
                    ElementState::Ended { code: Some(0), .. } => {}
                    ElementState::Ended { .. } | ElementState::DependencyFailed => return None,
                    _ => return Some(false),
                }
            }
        }
        Some(true)
    }

    fn start(&mut self) -> Result<(), SchedulerError> {
        let mut used: usize = self.running.values().map(|r| r.cpus).sum();
        let ids: Vec<u64> = self.jobs.keys().copied().collect();
        for id in ids {
            let job = self.jobs[&id].clone();
            let mut job_running = self.running.keys().filter(|k| k.0 == id).count();
            for &idx in &job.indices {
                if self.states[&id].get(&idx) != Some(&ElementState::Pending) {
                    continue;
                }
                match self.ready(&job, idx) {
                    None => {
                        self.states
                            .get_mut(&id)
                            .unwrap()
                            .insert(idx, ElementState::DependencyFailed);
                        self.dirty.insert(id);
                        continue;
                    }
                    Some(false) => continue,
                    Some(true) => {}
                }
                let cpus = (job.cpus as usize).clamp(1, self.slots);
                if used + cpus > self.slots || (job.throttle > 0 && job_running >= job.throttle) {
                    break;
                }
                let child = spawn_element(&job, idx)?;
                let pid = child.id() as i32;
                self.running.insert(
                    (id, idx),
                    Running {
                        child,
                        started: Instant::now(),
                        walltime: Duration::from_secs(job.walltime_s.max(1)),
                        term_sent: None,
                        timeout: false,
                        cancelled: false,
                        cpus,
                    },
                );
                used += cpus;
                job_running += 1;
                self.states
                    .get_mut(&id)
                    .unwrap()
                    .insert(idx, ElementState::Running { pid });
                self.dirty.insert(id);
            }
        }
        Ok(())
    }

    fn stop_all(&mut self, wake: &Receiver<Wake>) {
        tracing::warn!(
            "local executor interrupted: stopping {} running tasks",
            self.running.len()
        );
        for r in self.running.values_mut() {
            signal_group(r.child.id() as i32, Signal::SIGTERM);
        }
        let t = Instant::now();
        while !self.running.is_empty() && t.elapsed() < GRACE {
            let done: Vec<(u64, usize)> = self
                .running
                .iter_mut()
                .filter_map(|(k, r)| matches!(r.child.try_wait(), Ok(Some(_))).then_some(*k))
                .collect();
            for k in done {
                let mut r = self.running.remove(&k).unwrap();
                let code = r.child.wait().ok().and_then(|s| s.code());
                self.states.get_mut(&k.0).unwrap().insert(
                    k.1,
                    ElementState::Ended {
                        code,
                        signal: Some(Signal::SIGTERM as i32),
                        timeout: false,
                        cancelled: false,
                        interrupted: true,
                    },
                );
                self.dirty.insert(k.0);
            }
            let mut again = false;
            wait_for_wake(wake, Duration::from_millis(20), &mut again);
        }
        for (k, mut r) in self.running.drain() {
            signal_group(r.child.id() as i32, Signal::SIGKILL);
            let _ = r.child.wait();
            self.states.get_mut(&k.0).unwrap().insert(
                k.1,
                ElementState::Ended {
                    code: None,
                    signal: Some(Signal::SIGKILL as i32),
                    timeout: false,
                    cancelled: false,
                    interrupted: true,
                },
            );
            self.dirty.insert(k.0);
        }
    }

    fn flush(&mut self) -> Result<(), SchedulerError> {
        for id in std::mem::take(&mut self.dirty) {
            let st = &self.states[&id];
            let bytes = serde_json::to_vec(st).expect("serialisable");
            write_file(&self.paths.status_of(&id.to_string()), &bytes)?;
        }
        Ok(())
    }
}

/// Sends `sig` to the process group `pgid` (an element and everything it
/// started); a group already gone is fine.
fn signal_group(pgid: i32, sig: Signal) {
    if pgid > 0 {
        let _ = nix::sys::signal::killpg(nix::unistd::Pid::from_raw(pgid), sig);
    }
}

fn spawn_element(job: &LocalJob, idx: usize) -> Result<Child, SchedulerError> {
    std::fs::create_dir_all(&job.log_dir).map_err(|e| SchedulerError::io(&job.log_dir, e))?;
    let stem = format!("{}.{}_{}", job.name, job.id, idx);
    let out = job.log_dir.join(format!("{stem}.out"));
    let err = job.log_dir.join(format!("{stem}.err"));
    let of = std::fs::File::create(&out).map_err(|e| SchedulerError::io(&out, e))?;
    let ef = std::fs::File::create(&err).map_err(|e| SchedulerError::io(&err, e))?;
    let mut cmd = Command::new("bash");
    cmd.arg(&job.script)
        .env("LEGWORK_ARRAY_INDEX", idx.to_string())
        .env("LEGWORK_JOB_ID", format!("{}_{}", job.id, idx))
        .stdin(Stdio::null())
        .stdout(of)
        .stderr(ef)
        .process_group(0);
    // If the executor dies, its elements get SIGTERM, which their wrappers
    // record, instead of running on unowned.
    unsafe {
        cmd.pre_exec(|| {
            nix::sys::prctl::set_pdeathsig(Signal::SIGTERM)?;
            Ok(())
        });
    }
    tracing::debug!(command = %format!("bash {} (LEGWORK_ARRAY_INDEX={idx})", job.script.display()), "running");
    cmd.spawn().map_err(|e| SchedulerError::io(&job.script, e))
}
