//! `ebbwise apply` against a correction file's recorded inputs: every input that can change a
//! tide (or, when uncertainty is carried, its uncertainty), changed alone, is refused and named;
//! an unchanged project applies cleanly; what changes no tide is named but not refused; with
//! `--accept-changed-inputs` the differences are written into the applied summary.

use super::{ebbwise, stderr, MiniProject, MINI_PROJECT, MINI_ZONING};

const SOUNDING: &str = "time,lon,lat,depth,line\n2026-06-14T01:00:00Z,10.005,50.005,10.0,L1\n";

const UNCERTAINTY: &str = "\n[uncertainty]\norder = \"1a\"\ndefault_u_datum_m = 0.04\n";

/// A mini project with `project` as its file, the per-zone correction file made from it; returns
/// the project and the correction file's path.
fn made(project: &str) -> (MiniProject, String) {
    let p = MiniProject::new(SOUNDING);
    p.write("project.toml", project);
    let c = p.path("c").to_string_lossy().into_owned();
    let o = ebbwise(&["correctors", &p.project(), "--out", &c]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let file = p
        .path("c/correctors-zones.csv")
        .to_string_lossy()
        .into_owned();
    (p, file)
}

fn apply(p: &MiniProject, file: &str, extra: &[&str]) -> std::process::Output {
    let mut args = vec!["apply", file, "--project"];
    let project = p.project();
    args.push(&project);
    args.extend_from_slice(extra);
    ebbwise(&args)
}

#[test]
fn an_unchanged_project_applies_cleanly() {
    for project in [
        MINI_PROJECT.to_string(),
        format!("{MINI_PROJECT}{UNCERTAINTY}"),
    ] {
        let (p, file) = made(&project);
        let o = apply(&p, &file, &[]);
        assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
        assert!(!stderr(&o).contains("warning:"), "{}", stderr(&o));
    }
}

/// Each input the sidecar records that can change a tide, changed alone: `apply` refuses (exit
/// status 2, "cannot run"), names the item and says how to re-run.
#[test]
fn each_tide_input_changed_alone_is_refused_and_named() {
    type Edit = fn(&MiniProject);
    type Case = (
        &'static str,
        Box<dyn Fn(&MiniProject)>,
        &'static [&'static str],
    );
    let project_edit = |from: &'static str, to: &'static str| {
        move |p: &MiniProject| {
            let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
            assert!(text.contains(from), "{from}");
            p.write("project.toml", &text.replacen(from, to, 1));
        }
    };
    let cases: Vec<Case> =
        vec![
        (
            "datum relation",
            Box::new(project_edit("zero_above_datum_m = 1.0", "zero_above_datum_m = 1.1")),
            &["gauge 'g1' zero_above_datum_m: 1.0 in the correction file, 1.1 now"],
        ),
        (
            "gauge mean level",
            Box::new(project_edit(
                "mean_level_above_datum_m = 2.1",
                "mean_level_above_datum_m = 2.2",
            )),
            &["gauge 'g1' mean_level_above_datum_m: 2.1 in the correction file, 2.2 now"],
        ),
        (
            "maximum gap",
            Box::new(project_edit("max_gap_min = 30", "max_gap_min = 45")),
            &["gauge 'g1' max_gap_min: 30.0 in the correction file, 45.0 now"],
        ),
        (
            "units",
            Box::new(project_edit("units = \"m\"", "units = \"ft\"")),
            &["gauge 'g1' units: \"m\" in the correction file, \"ft\" now"],
        ),
        (
            "naive time offset",
            Box::new(project_edit(
                "name = \"mini\"",
                "name = \"mini\"\nnaive_time_utc_offset = \"+01:00\"",
            )),
            &["naive_time_utc_offset: null in the correction file, \"+01:00\" now"],
        ),
        (
            "qc setting",
            Box::new(|p: &MiniProject| {
                let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
                p.write("project.toml", &format!("{text}\n[qc]\nspike_k = 6.5\n"));
            }),
            &["(tide) qc.spike_k:", "6.5 now"],
        ),
        (
            "interpolation setting",
            Box::new(|p: &MiniProject| {
                let text = std::fs::read_to_string(p.path("project.toml")).unwrap();
                p.write(
                    "project.toml",
                    &format!("{text}\n[interpolation]\ncubic_above_step_min = 3\n"),
                );
            }),
            &[
                "(tide) interpolation.cubic_above_step_min: 10.0 in the correction file, 3.0 now",
                "gauge 'g1' method.interpolation:",
            ],
        ),
        (
            "gauge record",
            Box::new((|p: &MiniProject| {
                let g = std::fs::read_to_string(p.path("g1.csv"))
                    .unwrap()
                    .replacen("1.000", "1.001", 1);
                p.write("g1.csv", &g);
            }) as Edit),
            &["gauge 'g1' record_sha256:"],
        ),
        (
            "zoning",
            Box::new((|p: &MiniProject| {
                p.write(
                    "zoning.geojson",
                    &MINI_ZONING.replacen("\"range_ratio\":0.5", "\"range_ratio\":0.6", 1),
                );
            }) as Edit),
            &[
                "(tide) zoning_sha256:",
                "zone 'Z2' feeds.g1.range_ratio: 0.5 in the correction file, 0.6 now",
            ],
        ),
    ];
    for (what, edit, named) in cases {
        let (p, file) = made(MINI_PROJECT);
        edit(&p);
        let o = apply(&p, &file, &[]);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{what}: {err}");
        assert!(
            err.contains("the project has changed since the correction file was made")
                && err.contains("re-run `ebbwise correctors")
                && err.contains("--accept-changed-inputs"),
            "{what}: {err}"
        );
        for n in named {
            assert!(err.contains(n), "{what}: {n} not in {err}");
        }
        assert!(!p.path("out/apply-summary.json").exists(), "{what}");
    }
}

/// The tide's uncertainty inputs are refused when uncertainty is carried, and only named when it
/// is not (`--no-uncertainty`); the survey order is applied afresh and is not refused.
#[test]
fn uncertainty_inputs_are_refused_only_when_uncertainty_is_carried() {
    let project = format!("{MINI_PROJECT}{UNCERTAINTY}");
    let (p, file) = made(&project);
    p.write(
        "project.toml",
        &project.replace("default_u_datum_m = 0.04", "default_u_datum_m = 0.06"),
    );
    let o = apply(&p, &file, &[]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains(
            "(uncertainty) project.default_u_datum_m: 0.04 in the correction file, 0.06 now"
        ),
        "{}",
        stderr(&o)
    );
    let o = apply(&p, &file, &["--no-uncertainty"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains(
            "warning: differs, but changes no tide: (uncertainty) project.default_u_datum_m"
        ),
        "{}",
        stderr(&o)
    );
    p.write(
        "project.toml",
        &project.replace("order = \"1a\"", "order = \"special\""),
    );
    let o = apply(&p, &file, &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("differs, but changes no tide: (neither) uncertainty.order"),
        "{}",
        stderr(&o)
    );
}

/// What changes no tide: a comment is noted, the output folder named; neither is refused.
#[test]
fn differences_that_change_no_tide_are_named_not_refused() {
    let (p, file) = made(MINI_PROJECT);
    p.write("project.toml", &format!("# reviewed\n{MINI_PROJECT}"));
    let o = apply(&p, &file, &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("differs from the one the correction file was made with, but in nothing that changes a tide"),
        "{}",
        stderr(&o)
    );
    p.write(
        "project.toml",
        &MINI_PROJECT.replace("dir = \"out\"", "dir = \"out2\""),
    );
    let o = apply(&p, &file, &[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("warning: differs, but changes no tide: (neither) output.dir: ")
            && stderr(&o).contains("out2\" now"),
        "{}",
        stderr(&o)
    );
}

/// With `--accept-changed-inputs` the file is applied and the applied summary lists what
/// differed.
#[test]
fn accepted_differences_are_written_into_the_applied_summary() {
    let (p, file) = made(MINI_PROJECT);
    p.write(
        "project.toml",
        &MINI_PROJECT.replace("zero_above_datum_m = 1.0", "zero_above_datum_m = 1.1"),
    );
    let o = apply(&p, &file, &["--accept-changed-inputs"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(
        stderr(&o).contains(
            "warning: accepted with --accept-changed-inputs: (tide) gauge 'g1' zero_above_datum_m"
        ),
        "{}",
        stderr(&o)
    );
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(p.path("out/apply-summary.json")).unwrap()).unwrap();
    let accepted = summary["accepted_input_differences"].as_array().unwrap();
    assert_eq!(accepted.len(), 1, "{accepted:?}");
    assert_eq!(accepted[0]["part"], "tide");
    assert_eq!(accepted[0]["item"], "gauges.g1.zero_above_datum_m");
    assert_eq!(accepted[0]["recorded"], "1.0");
    assert_eq!(accepted[0]["current"], "1.1");
}

/// A file without sidecar applies with a warning that its provenance cannot be checked.
#[test]
fn a_file_without_sidecar_is_applied_with_a_warning() {
    let (p, file) = made(MINI_PROJECT);
    std::fs::remove_file(format!("{file}.json")).unwrap();
    let o = apply(&p, &file, &[]);
    assert!(stderr(&o).contains("has no sidecar"), "{}", stderr(&o));
}
