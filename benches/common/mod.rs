//! What the benches share: the machine's busy time and the wait for an idle machine, timing one
//! run of work in this process, running a child process under `wait4` (wall time, CPU time, peak
//! resident set), median and minimum, the `ebbwise` binary under test, and the machine's
//! description.
//!
//! Each bench is its own crate (`harness = false`) and includes this file with `mod common;`.
//! Messages start with the including bench's name (`CARGO_CRATE_NAME`).

// Each bench is its own crate and uses a part of this module: what one leaves out would warn as
// dead code there. Every item is used by at least one bench (seen by building each bench without
// this line).
#![allow(dead_code)]

use std::fs;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Instant, SystemTime};

/// The including bench's name, to start its messages with.
const BENCH: &str = env!("CARGO_CRATE_NAME");

/// The machine counts as idle after this many consecutive seconds in which all processes
/// together used less than `IDLE_BUSY_CPU_PER_S` CPU-seconds per second.
const IDLE_STREAK_S: u32 = 3;
const IDLE_BUSY_CPU_PER_S: f64 = 0.05;
/// A run is disturbed when other processes used more than this many CPU-seconds per second of
/// its wall time (plus the allowance a bench adds, see [`disturbed`]).
pub const DISTURBED_OTHER_CPU_PER_WALL: f64 = 0.10;

// ------------------------------------------------------------------------------------------------
// The machine's load

/// Busy CPU time of the whole machine so far, seconds (from /proc/stat; NaN without it).
pub fn machine_busy_s() -> f64 {
    let Ok(stat) = fs::read_to_string("/proc/stat") else {
        return f64::NAN;
    };
    let v: Vec<u64> = stat
        .lines()
        .next()
        .unwrap_or("")
        .split_whitespace()
        .skip(1)
        .filter_map(|x| x.parse().ok())
        .collect();
    if v.len() < 5 {
        return f64::NAN;
    }
    // user nice system idle iowait irq softirq steal (guest times are inside user/nice).
    let busy: u64 = v.iter().take(8).sum::<u64>() - v[3] - v[4];
    // SAFETY: sysconf has no preconditions.
    let ticks_per_s = unsafe { libc::sysconf(libc::_SC_CLK_TCK) } as f64;
    busy as f64 / ticks_per_s
}

/// Waits until the machine has been idle for `IDLE_STREAK_S` seconds, at most `max_s` seconds
/// (0: not at all). Says `busy_note` once, the first time it finds the machine busy. Returns
/// whether the machine became idle (true for `max_s` 0).
pub fn wait_for_idle(max_s: u64, busy_note: &str) -> bool {
    if max_s == 0 {
        return true;
    }
    let start = Instant::now();
    let mut streak = 0;
    let mut told = false;
    while start.elapsed().as_secs() < max_s {
        let before_s = machine_busy_s();
        std::thread::sleep(std::time::Duration::from_secs(1));
        if machine_busy_s() - before_s < IDLE_BUSY_CPU_PER_S {
            streak += 1;
            if streak >= IDLE_STREAK_S {
                return true;
            }
        } else {
            streak = 0;
            if !told {
                eprintln!("{BENCH}: {busy_note}");
                told = true;
            }
        }
    }
    false
}

/// Whether a run of `wall_s` seconds, during which other processes used `other_cpu_s`
/// CPU-seconds, was disturbed: more than `DISTURBED_OTHER_CPU_PER_WALL` per second of wall time,
/// plus `allowance_s`.
pub fn disturbed(other_cpu_s: f64, wall_s: f64, allowance_s: f64) -> bool {
    other_cpu_s > DISTURBED_OTHER_CPU_PER_WALL * wall_s + allowance_s
}

// ------------------------------------------------------------------------------------------------
// Measurements in this process

/// How a bench takes its measurements in this process.
pub struct Runner {
    /// Kept runs of each measurement.
    pub runs: usize,
    /// How many disturbed runs may be discarded and run again.
    pub retries: usize,
    /// Longest wait for an idle machine, seconds (0 to skip).
    pub wait_idle_s: u64,
}

impl Runner {
    /// The options `--runs K`, `--retries R` and `--wait-idle S` from the command line over
    /// `self`'s defaults. `--bench` (which cargo passes to harness-less benches) is skipped;
    /// `extra(option, number)` may take any other option, reading its value with
    /// `number(what)`, and returns whether it did. Panics with `usage` on anything else.
    pub fn with_args(
        mut self,
        usage: &str,
        mut extra: impl FnMut(&str, &mut dyn FnMut(&str) -> u64) -> bool,
    ) -> Runner {
        let mut args = std::env::args().skip(1);
        while let Some(a) = args.next() {
            let mut number = |what: &str| -> u64 {
                args.next()
                    .and_then(|v| v.parse().ok())
                    .unwrap_or_else(|| panic!("{a} needs a whole number of {what}\n{usage}"))
            };
            match a.as_str() {
                "--bench" => {}
                "--runs" => self.runs = number("runs").max(1) as usize,
                "--retries" => self.retries = number("retries") as usize,
                "--wait-idle" => self.wait_idle_s = number("seconds"),
                other => {
                    if !extra(other, &mut number) {
                        panic!("unknown argument '{other}'\n{usage}");
                    }
                }
            }
        }
        self
    }

    /// Waits (at most `wait_idle_s`) for an idle machine.
    pub fn wait_for_idle(&self) {
        let max_s = self.wait_idle_s;
        wait_for_idle(
            max_s,
            &format!("waiting (at most {max_s} s) for other processes to finish…"),
        );
    }
}

/// One run of some work in this process.
#[derive(Clone, Copy)]
pub struct Run {
    pub wall_s: f64,
    /// CPU time of this process and its waited-for children during the run, seconds.
    pub cpu_s: f64,
    /// CPU time the other processes used meanwhile, seconds (from /proc/stat).
    pub other_cpu_s: f64,
}

/// Runs `f` once and times it: wall clock (`Instant`), this process's CPU time and the other
/// processes' CPU time.
pub fn time_run<T>(f: impl FnOnce() -> T) -> (Run, T) {
    let own_before_s = own_cpu_s();
    let busy_before_s = machine_busy_s();
    let start = Instant::now();
    let r = f();
    let wall_s = start.elapsed().as_secs_f64();
    let cpu_s = own_cpu_s() - own_before_s;
    let other_cpu_s = machine_busy_s() - busy_before_s - cpu_s;
    let run = Run {
        wall_s,
        cpu_s,
        other_cpu_s,
    };
    (run, r)
}

/// CPU time (user + system) of this process and its waited-for children so far, seconds.
fn own_cpu_s() -> f64 {
    [libc::RUSAGE_SELF, libc::RUSAGE_CHILDREN]
        .into_iter()
        .map(|who| {
            // SAFETY: getrusage only writes into the struct passed.
            let mut ru: libc::rusage = unsafe { std::mem::zeroed() };
            assert_eq!(unsafe { libc::getrusage(who, &mut ru) }, 0, "getrusage");
            timeval_s(ru.ru_utime) + timeval_s(ru.ru_stime)
        })
        .sum()
}

fn timeval_s(tv: libc::timeval) -> f64 {
    tv.tv_sec as f64 + tv.tv_usec as f64 * 1e-6
}

/// Timings of one measurement over its kept runs.
pub struct Timed {
    pub label: String,
    pub median_s: f64,
    pub min_s: f64,
    /// CPU time of this process and its children, median over the kept runs, seconds.
    pub cpu_median_s: f64,
    /// Kept runs that were disturbed (retries exhausted).
    pub disturbed: usize,
    /// Disturbed runs discarded and run again.
    pub discarded: usize,
    /// Wall time of each kept run, in run order, seconds.
    pub runs_s: Vec<f64>,
    /// CPU time other processes used during each kept run, seconds.
    pub others_s: Vec<f64>,
}

impl Timed {
    /// The summary of the kept `runs` (at least one).
    pub fn new(label: String, runs: &[Run], disturbed: usize, discarded: usize) -> Timed {
        let runs_s: Vec<f64> = runs.iter().map(|r| r.wall_s).collect();
        let (median_s, min_s) = median_min(runs_s.clone());
        Timed {
            label,
            median_s,
            min_s,
            cpu_median_s: median(runs.iter().map(|r| r.cpu_s).collect()),
            disturbed,
            discarded,
            runs_s,
            others_s: runs.iter().map(|r| r.other_cpu_s).collect(),
        }
    }
}

/// The median of `v` (the mean of the middle two for an even count); `v` is not empty.
pub fn median(v: Vec<f64>) -> f64 {
    median_min(v).0
}

/// The median and the minimum of `v` (not empty).
pub fn median_min(mut v: Vec<f64>) -> (f64, f64) {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    let median = if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    };
    (median, v[0])
}

// ------------------------------------------------------------------------------------------------
// A child process

/// What a child process used, from `wait4` on its pid.
pub struct ChildRun {
    /// Spawn to exit, seconds.
    pub wall_s: f64,
    /// User + system CPU time of the child, seconds.
    pub cpu_s: f64,
    /// The child's own peak resident set, KiB (`ru_maxrss`).
    pub peak_rss_kib: i64,
    /// Exit status, or `None` when it did not exit normally.
    pub exit_code: Option<i32>,
    /// The signal that ended it, if one did.
    pub signal: Option<i32>,
}

/// Starts `cmd` (its stdio as the caller set it), waits for it with `wait4` on its pid and
/// returns what it used.
///
/// A child started from a large process has that process's resident set counted in its
/// `ru_maxrss` (the child shares its parent's memory until `exec`): start the child from a
/// small process for a clean peak (see qc_year's `--child-rss`).
pub fn run_child(cmd: &mut Command) -> Result<ChildRun, String> {
    let start = Instant::now();
    let child = cmd
        .spawn()
        .map_err(|e| format!("cannot start {:?}: {e}", cmd.get_program()))?;
    let pid = child.id() as libc::pid_t;
    let mut status: libc::c_int = 0;
    // SAFETY: rusage is plain old data; all-zero is a valid value.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    loop {
        // SAFETY: pid is our own child, not yet reaped (std's Child is never waited on here);
        // status and usage point to live locals.
        let r = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
        if r == pid {
            break;
        }
        let e = std::io::Error::last_os_error();
        if e.kind() != std::io::ErrorKind::Interrupted {
            return Err(format!("wait4 on pid {pid}: {e}"));
        }
    }
    let wall_s = start.elapsed().as_secs_f64();
    drop(child);
    Ok(ChildRun {
        wall_s,
        cpu_s: timeval_s(usage.ru_utime) + timeval_s(usage.ru_stime),
        peak_rss_kib: usage.ru_maxrss as i64,
        exit_code: libc::WIFEXITED(status).then(|| libc::WEXITSTATUS(status)),
        signal: libc::WIFSIGNALED(status).then(|| libc::WTERMSIG(status)),
    })
}

/// This executable, to start again as a helper child. /proc/self/exe still names it when cargo
/// has replaced the file meanwhile (a rebuild during the bench).
pub fn this_exe() -> Result<PathBuf, String> {
    if Path::new("/proc/self/exe").exists() {
        Ok(PathBuf::from("/proc/self/exe"))
    } else {
        std::env::current_exe().map_err(|e| format!("cannot find this executable: {e}"))
    }
}

// ------------------------------------------------------------------------------------------------
// The binary under test

/// The target folder this bench was built in (`<target>/release/deps/` holds bench
/// executables), else `<repository>/target`.
pub fn target_dir() -> Result<PathBuf, String> {
    let exe = std::env::current_exe().map_err(|e| format!("cannot find this executable: {e}"))?;
    Ok(exe
        .parent()
        .filter(|d| d.file_name().is_some_and(|n| n == "deps"))
        .and_then(Path::parent)
        .and_then(Path::parent)
        .map(Path::to_path_buf)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join("target")))
}

/// `<target>/release/ebbwise`, which must exist: the benches build nothing themselves.
pub fn ebbwise_binary() -> Result<PathBuf, String> {
    let ebbwise = target_dir()?.join("release").join("ebbwise");
    if !ebbwise.is_file() {
        return Err(format!(
            "{} does not exist: build it first with `cargo build --release --bin ebbwise` \
             (this benchmark builds nothing itself)",
            ebbwise.display()
        ));
    }
    Ok(ebbwise)
}

/// Warns when a file under src/ is newer than the binary (the binary may be stale).
pub fn warn_if_stale(ebbwise: &Path) {
    let Ok(built) = fs::metadata(ebbwise).and_then(|m| m.modified()) else {
        return;
    };
    let mut newest: Option<(SystemTime, PathBuf)> = None;
    let mut stack = vec![Path::new(env!("CARGO_MANIFEST_DIR")).join("src")];
    while let Some(dir) = stack.pop() {
        let Ok(rd) = fs::read_dir(&dir) else { continue };
        for e in rd.flatten() {
            let p = e.path();
            if p.is_dir() {
                stack.push(p);
            } else if let Ok(t) = e.metadata().and_then(|m| m.modified()) {
                if newest.as_ref().is_none_or(|(n, _)| t > *n) {
                    newest = Some((t, p));
                }
            }
        }
    }
    if let Some((t, p)) = newest {
        if t > built {
            eprintln!(
                "{BENCH}: warning: {} is newer than {}; run `cargo build --release --bin ebbwise` \
                 to measure the current code",
                p.display(),
                ebbwise.display()
            );
        }
    }
}

// ------------------------------------------------------------------------------------------------
// The machine

/// What the benches say about the machine they ran on.
pub struct Machine {
    pub cpu_model: String,
    pub logical_cpus: usize,
    pub memory_gib: f64,
    /// The Linux kernel release.
    pub kernel: String,
}

/// The machine, from /proc (`unknown CPU`, 0 CPUs, NaN GiB or an empty kernel where it cannot
/// tell).
pub fn machine() -> Machine {
    let cpuinfo = fs::read_to_string("/proc/cpuinfo").unwrap_or_default();
    let cpu_model = cpuinfo
        .lines()
        .find(|l| l.starts_with("model name"))
        .and_then(|l| l.split_once(':'))
        .map(|(_, v)| v.trim().to_string())
        .unwrap_or_else(|| "unknown CPU".into());
    let meminfo = fs::read_to_string("/proc/meminfo").unwrap_or_default();
    let mem_kib: f64 = meminfo
        .lines()
        .find(|l| l.starts_with("MemTotal:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|v| v.parse().ok())
        .unwrap_or(f64::NAN);
    Machine {
        cpu_model,
        logical_cpus: std::thread::available_parallelism().map_or(0, |n| n.get()),
        memory_gib: mem_kib / (1024.0 * 1024.0),
        kernel: fs::read_to_string("/proc/sys/kernel/osrelease")
            .map(|s| s.trim().to_string())
            .unwrap_or_default(),
    }
}

/// `<CPU model> | <n> logical CPUs | load average <1 5 15 min>`.
pub fn machine_and_load() -> String {
    let m = machine();
    format!(
        "{} | {} logical CPUs | load average {}",
        m.cpu_model,
        m.logical_cpus,
        load_average()
    )
}

/// The 1-, 5- and 15-minute load averages (from /proc/loadavg), or `unknown`.
pub fn load_average() -> String {
    fs::read_to_string("/proc/loadavg")
        .map(|s| s.split_whitespace().take(3).collect::<Vec<_>>().join(" "))
        .unwrap_or_else(|_| "unknown".into())
}
