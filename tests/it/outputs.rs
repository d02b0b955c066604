//! Outputs appear whole or not at all, reruns are byte-identical, inputs are never overwritten.

use super::{ebbwise, stderr, MiniProject, MINI_PROJECT};

const S: &str = "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n2026-06-14T01:06:00Z,10.015,50.005,12.0,L1\n";

#[test]
fn rerun_is_byte_identical_and_stale_temporaries_are_removed() {
    let p = MiniProject::new(S);
    assert_eq!(
        ebbwise(&["reduce", &p.project(), "--no-progress"])
            .status
            .code(),
        Some(0)
    );
    let first = std::fs::read(p.path("out/s.reduced.csv")).unwrap();
    std::fs::write(
        p.path("out/.s.reduced.csv.ebbwise-partial"),
        b"left by a killed run",
    )
    .unwrap();
    let out = ebbwise(&["reduce", &p.project(), "--no-progress", "--threads", "1"]);
    assert!(
        stderr(&out).contains("removed 1 temporary file(s) left by an interrupted run"),
        "{}",
        stderr(&out)
    );
    assert_eq!(std::fs::read(p.path("out/s.reduced.csv")).unwrap(), first);
    assert!(!p.path("out/.s.reduced.csv.ebbwise-partial").exists());
}

#[test]
fn output_folder_equal_to_input_folder_never_overwrites_inputs() {
    // A soundings file named like an output of another: s.csv → s.reduced.csv, and an input
    // called s.reduced.csv in the same folder would be overwritten: ebbwise refuses, before
    // writing anything.
    let p = MiniProject::new(S);
    std::fs::write(p.path("s.reduced.csv"), S).unwrap();
    p.write(
        "project.toml",
        &MINI_PROJECT
            .replace("dir = \"out\"", "dir = \".\"")
            .replace(
                "files = [\"s.csv\"]",
                "files = [\"s.csv\", \"s.reduced.csv\"]",
            ),
    );
    let out = ebbwise(&["reduce", &p.project(), "--no-progress"]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));
    assert!(
        stderr(&out).contains("the soundings file would be overwritten by the reduced file of"),
        "{}",
        stderr(&out)
    );
    assert_eq!(std::fs::read_to_string(p.path("s.reduced.csv")).unwrap(), S);
    // Refused before any output is opened: the other input's output does not appear either.
    assert!(!p.path("s.reduced.reduced.csv").exists());
    assert!(!p.path("reduce-summary.json").exists());
}

#[test]
fn a_killed_run_leaves_no_output_only_a_temporary_that_the_next_run_removes() {
    // About a million soundings, so that a kill lands while the output is being written.
    let mut s = String::from("time,lon,lat,depth,line\n");
    for i in 0..1_000_000u32 {
        let m = 60 + (i / 10_000) % 60;
        s.push_str(&format!(
            "2026-06-14T{:02}:{:02}:00Z,10.00{},50.005,{}.5,L{}\n",
            m / 60,
            m % 60,
            1 + i % 8,
            5 + i % 20,
            i / 5000
        ));
    }
    let p = MiniProject::new(&s);
    let out = p.path("out/s.reduced.csv");
    let clean = {
        let o = ebbwise(&["reduce", &p.project(), "--no-progress", "--no-uncertainty"]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        std::fs::read(&out).unwrap()
    };
    std::fs::remove_dir_all(p.path("out")).unwrap();
    // Each run is killed a set time after its temporary file appears (polled every 0.2 ms), so
    // that the kill lands mid-write whatever the machine's speed. Each run removes the temporary
    // file its predecessor left, so the last kill (at once) is the one whose leftover the rerun
    // below must find and remove; the earlier, later kills may land after the rename.
    let partial = p.path("out/.s.reduced.csv.ebbwise-partial");
    let mut saw_partial = false;
    for delay_after_partial_ms in [60u64, 20, 5, 0] {
        let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_ebbwise"))
            .args(["reduce", &p.project(), "--no-progress", "--no-uncertainty"])
            .stderr(std::process::Stdio::null())
            .spawn()
            .unwrap();
        let started = std::time::Instant::now();
        let mut appeared = false;
        while started.elapsed() < std::time::Duration::from_secs(60) {
            if partial.exists() {
                appeared = true;
                break;
            }
            if child.try_wait().unwrap().is_some() {
                break;
            }
            std::thread::sleep(std::time::Duration::from_micros(200));
        }
        std::thread::sleep(std::time::Duration::from_millis(delay_after_partial_ms));
        let _ = child.kill(); // SIGKILL: no chance to clean up
        let _ = child.wait();
        if out.exists() {
            // The rename happened before the kill: the file must then be complete.
            assert_eq!(
                std::fs::read(&out).unwrap(),
                clean,
                "an output at the final path is always whole"
            );
            std::fs::remove_file(&out).unwrap();
        }
        saw_partial |= appeared && partial.exists();
    }
    assert!(saw_partial, "at least one kill landed mid-run");
    let o = ebbwise(&["reduce", &p.project(), "--no-progress", "--no-uncertainty"]);
    assert!(
        stderr(&o).contains("removed 1 temporary file(s) left by an interrupted run"),
        "{}",
        stderr(&o)
    );
    assert_eq!(
        std::fs::read(&out).unwrap(),
        clean,
        "the rerun is byte-identical"
    );
    let leftovers: Vec<_> = std::fs::read_dir(p.path("out"))
        .unwrap()
        .filter_map(Result::ok)
        .map(|e| e.file_name())
        .filter(|n| n.to_string_lossy().ends_with(".ebbwise-partial"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

/// What a reduction tells its progress receiver: `start` once with the soundings file's size,
/// `advance` calls that add up to exactly that size (the header line included), `finish` once.
/// The file spans several read chunks (2.3 MB of rows).
#[test]
fn reported_progress_adds_up_to_the_input_size() {
    use ebbwise::run::reduce::{reduce_project, Progress, ReduceOptions, RunKind};
    use std::sync::atomic::{AtomicU64, Ordering::Relaxed};

    #[derive(Default)]
    struct Count {
        starts: AtomicU64,
        total: AtomicU64,
        done: AtomicU64,
        finishes: AtomicU64,
    }
    impl Progress for Count {
        fn start(&self, total_bytes: u64) {
            self.starts.fetch_add(1, Relaxed);
            self.total.store(total_bytes, Relaxed);
        }
        fn advance(&self, bytes: u64) {
            self.done.fetch_add(bytes, Relaxed);
        }
        fn finish(&self) {
            self.finishes.fetch_add(1, Relaxed);
        }
    }

    let mut text = String::from("time,lon,lat,depth,line\n");
    for i in 0..50_000 {
        text.push_str(&format!(
            "2026-06-14T01:{:02}:{:02}Z,10.005,50.005,10.0,L1\n",
            (i / 60) % 60,
            i % 60
        ));
    }
    let p = MiniProject::new(&text);
    let size = std::fs::metadata(p.path("s.csv")).unwrap().len();
    assert!(size > 2 << 20, "{size}");
    let project = ebbwise::io::project::Project::load(&p.path("project.toml")).unwrap();
    let loaded = ebbwise::run::load::load(project, None).expect("the mini project loads");
    let count = Count::default();
    let summary = reduce_project(
        &loaded,
        &ReduceOptions {
            out_dir: p.path("out"),
            progress: Some(&count),
            kind: RunKind::Reduce,
            only_files: None,
        },
    )
    .unwrap();
    assert_eq!(summary.rows(), 50_000);
    assert_eq!(count.starts.load(Relaxed), 1);
    assert_eq!(count.total.load(Relaxed), size);
    assert_eq!(count.done.load(Relaxed), size);
    assert_eq!(count.finishes.load(Relaxed), 1);
}
