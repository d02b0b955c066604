//! Integration test modules and shared helpers.

mod bad_input;
mod bad_input_suite;
mod check;
mod cli;
mod correctors;
mod correctors_apply;
mod cotidal;
mod cotidal_map;
mod crs_reference;
mod datums;
mod demo_field;
mod demo_recovery;
mod harmonics;
mod harmonics_noise;
mod harmonics_trust;
mod layers;
mod one_bad_row;
mod output_table;
mod outputs;
mod parquet;
mod pipeline;
mod properties;
mod provenance;
mod qa_report;
mod qc;
mod tidy;
mod transfer;

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// The repository root.
pub fn repo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Runs the real `ebbwise` with arguments.
pub fn ebbwise(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_ebbwise"))
        .args(args)
        .output()
        .expect("ebbwise runs")
}

/// Runs the real `ebbwise` with arguments in folder `dir`.
pub fn ebbwise_in(dir: &Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_ebbwise"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("ebbwise runs")
}

/// stdout as text.
pub fn stdout(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// stderr as text.
pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Reads a CSV file into header + rows of strings.
pub fn read_csv(path: &Path) -> (Vec<String>, Vec<Vec<String>>) {
    let mut r = csv::ReaderBuilder::new()
        .flexible(false)
        .from_path(path)
        .unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    let header = r.headers().unwrap().iter().map(String::from).collect();
    let rows = r
        .records()
        .map(|x| x.unwrap().iter().map(String::from).collect())
        .collect();
    (header, rows)
}

/// A small project in a temporary folder, written from parts; see `bad_input.rs`.
pub struct MiniProject {
    /// Keeps the folder alive.
    pub dir: tempfile::TempDir,
}

impl MiniProject {
    /// Writes the files of a small project: one gauge "g1" sampled every 6 minutes from
    /// 2026-06-14T00:00Z to 04:00Z with level above chart datum 2.0 + 0.001·minute (gauge zero
    /// 1.0 m above chart datum: readings 1.0 + 0.001·minute), a gap between 02:00 and 03:00, and
    /// two square zones in lon/lat (Z1: 10..10.01 E, 50..50.01 N, fed by g1 with Δt 0 and R 1;
    /// Z2: the square east of it, Δt +6 min, R 0.5, zone mean 1.5 m).
    pub fn new(soundings_csv: &str) -> Self {
        let dir = tempfile::tempdir().unwrap();
        let mut g = String::from("time,height\n");
        let mut minute = 0;
        while minute <= 240 {
            if !(121..180).contains(&minute) {
                g.push_str(&format!(
                    "2026-06-14T{:02}:{:02}:00Z,{:.3}\n",
                    minute / 60,
                    minute % 60,
                    1.0 + 0.001 * minute as f64
                ));
            }
            minute += 6;
        }
        std::fs::write(dir.path().join("g1.csv"), g).unwrap();
        std::fs::write(dir.path().join("zoning.geojson"), MINI_ZONING).unwrap();
        std::fs::write(dir.path().join("s.csv"), soundings_csv).unwrap();
        std::fs::write(dir.path().join("project.toml"), MINI_PROJECT).unwrap();
        MiniProject { dir }
    }

    /// Path of a file in the project folder.
    pub fn path(&self, name: &str) -> PathBuf {
        self.dir.path().join(name)
    }

    /// Replaces a file's text.
    pub fn write(&self, name: &str, text: &str) {
        std::fs::write(self.path(name), text).unwrap();
    }

    /// Path of the project file, as text.
    pub fn project(&self) -> String {
        self.path("project.toml").to_string_lossy().into_owned()
    }
}

pub const MINI_PROJECT: &str = r#"
name = "mini"
zoning = "zoning.geojson"
[output]
dir = "out"
[[gauge]]
id = "g1"
lon = 10.0
lat = 50.0
record = "g1.csv"
units = "m"
zero_above_datum_m = 1.0
mean_level_above_datum_m = 2.1
max_gap_min = 30
[[soundings]]
files = ["s.csv"]
crs = "EPSG:4326"
columns = { time = "time", x = "lon", y = "lat", depth = "depth", line = "line" }
"#;

pub const MINI_ZONING: &str = r#"{"type":"FeatureCollection","features":[
{"type":"Feature","properties":{"zone":"Z1","gauge":"g1","time_corrector_min":0,"range_ratio":1.0},
 "geometry":{"type":"Polygon","coordinates":[[[10.0,50.0],[10.01,50.0],[10.01,50.01],[10.0,50.01],[10.0,50.0]]]}},
{"type":"Feature","properties":{"zone":"Z2","gauge":"g1","time_corrector_min":6,"range_ratio":0.5,"mean_level_above_datum_m":1.5},
 "geometry":{"type":"Polygon","coordinates":[[[10.01,50.0],[10.02,50.0],[10.02,50.01],[10.01,50.01],[10.01,50.0]]]}}
]}"#;

/// The demo's `project.toml` with its zoning, gauge records and soundings files as absolute
/// paths, so that a changed copy can be written in any folder.
pub fn demo_project_with_absolute_paths() -> String {
    let demo = repo().join("zoning-demo");
    std::fs::read_to_string(demo.join("project.toml"))
        .unwrap()
        .replace(
            "zoning = \"zoning.geojson\"",
            &format!("zoning = \"{}\"", demo.join("zoning.geojson").display()),
        )
        .replace(
            "record = \"gauges/",
            &format!("record = \"{}/gauges/", demo.display()),
        )
        .replace("\"soundings/", &format!("\"{}/soundings/", demo.display()))
}
