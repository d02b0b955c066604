//! What a correction file's tides were made from, and how a project now differs from it.
//!
//! [`tide_inputs`] gathers every input of a project that can change a tide — the zoning (its
//! SHA-256 and each zone's form, mean level and feeds), every gauge's record (SHA-256), datum
//! relation, mean level, units, reading of the record, gap, band, filter and interpolation
//! settings, the project's naive-time offset, quality control and interpolation settings, the
//! `[tide_field]` mode and, when it is set, each virtual gauge's position and constants
//! (SHA-256) — apart
//! from the tide's uncertainty inputs (the `default_u_` values and each gauge's and zone's own,
//! and `[tide_field]`'s uncertainty keys, which change a tide's uncertainty, not the tide) and
//! from what changes neither (the project's name, output folder and soundings groups, gauge
//! names, gauge positions unless the tide is continuous, file paths, and the survey order,
//! acceptance share and sounding model, which `apply` applies afresh). [`differences`] compares
//! two such records item by item.
//!
//! Paths are left out on purpose: a project folder copied elsewhere makes the same tides, and the
//! files' contents are compared by their SHA-256.

use serde_json::{json, Map, Value};

use super::load::Loaded;
use crate::io::correctors_file::sha256_file;
use crate::io::error::IoError;

/// Every input file of a run with its SHA-256, in a fixed order: the project file, the zoning,
/// each gauge's record and constants file, each virtual gauge's constants (a continuous tide),
/// the given soundings files (with their hash when the caller already has it), and the
/// correction file applied (an apply run). A datums file is
/// not read by a reduction and is not listed.
pub fn input_files(
    loaded: &Loaded,
    soundings: &[(&std::path::Path, Option<&str>)],
    correction_file: Option<&std::path::Path>,
) -> Result<Vec<crate::compute::qa_report::InputFile>, IoError> {
    use crate::compute::qa_report::InputFile;
    let p = &loaded.project;
    let one = |role: String, path: &std::path::Path| -> Result<InputFile, IoError> {
        Ok(InputFile {
            role,
            path: path.display().to_string(),
            sha256: sha256_file(path)?,
        })
    };
    let mut out = vec![
        one("project".into(), &p.path)?,
        one("zoning".into(), &p.spec.zoning)?,
    ];
    for g in &p.spec.gauges {
        out.push(one(format!("gauge record '{}'", g.id), &g.record)?);
        if let Some(c) = &g.constants {
            out.push(one(format!("gauge constants '{}'", g.id), c)?);
        }
    }
    // Virtual gauges are read only for a continuous tide.
    if loaded.field.is_some() {
        for v in &p.spec.virtual_gauges {
            out.push(one(
                format!("virtual gauge constants '{}'", v.id),
                &v.constants,
            )?);
        }
    }
    // A soundings file's hash taken as the run read it, when given (one read, not two).
    for (f, known) in soundings {
        match known {
            Some(h) => out.push(InputFile {
                role: "soundings".into(),
                path: f.display().to_string(),
                sha256: (*h).to_string(),
            }),
            None => out.push(one("soundings".into(), f)?),
        }
    }
    if let Some(c) = correction_file {
        out.push(one("correction file".into(), c)?);
    }
    Ok(out)
}

/// The three parts of a project's inputs, as recorded in a correction file's sidecar.
pub const PARTS: [&str; 3] = ["tide", "uncertainty", "other"];

/// Every input of `loaded`'s project, in three parts: `tide` (changes a tide), `uncertainty`
/// (changes a tide's uncertainty) and `other` (changes neither).
pub fn tide_inputs(loaded: &Loaded) -> Result<Value, IoError> {
    let spec = &loaded.project.spec;
    let (mut gauges, mut gauge_u, mut gauge_other) = (Vec::new(), Vec::new(), Vec::new());
    for (i, g) in spec.gauges.iter().enumerate() {
        let mut v = serde_json::to_value(g).expect("a gauge spec serialises");
        let o = v.as_object_mut().expect("a gauge spec is a table");
        let mut other = Map::new();
        o.remove("id");
        // A gauge's position changes a continuous tide (it places the field's station).
        let position_other: &[&str] = if spec.tide_field.is_some() {
            &["name", "record"]
        } else {
            &["name", "lon", "lat", "record"]
        };
        for &k in position_other {
            if let Some(x) = o.remove(k) {
                other.insert(k.to_string(), x);
            }
        }
        let mut u = Map::new();
        u.insert("gauge".into(), json!(g.id));
        other.insert("gauge".into(), json!(g.id));
        for k in ["u_gauge_m", "u_datum_m"] {
            if let Some(x) = o.remove(k) {
                u.insert(k.to_string(), x);
            }
        }
        o.insert("record_sha256".into(), json!(sha256_file(&g.record)?));
        // Constants change a tide through gap filling by their content, not their path; a
        // datums file changes no tide.
        for k in ["constants", "datums"] {
            if let Some(x) = o.remove(k) {
                other.insert(k.to_string(), x);
            }
        }
        if let Some(c) = &g.constants {
            o.insert("constants_sha256".into(), json!(sha256_file(c)?));
        }
        if let Some(m) = loaded.methods.get(i) {
            o.insert(
                "method".into(),
                serde_json::to_value(m).expect("a method serialises"),
            );
        }
        let mut keyed = Map::new();
        keyed.insert("gauge".into(), json!(g.id));
        keyed.extend(o.clone());
        gauges.push(Value::Object(keyed));
        gauge_u.push(Value::Object(u));
        gauge_other.push(Value::Object(other));
    }
    let (mut zones, mut zone_u) = (Vec::new(), Vec::new());
    for (z, zs) in loaded.zones.iter().zip(&loaded.zoning.zones) {
        zones.push(json!({
            "zone": z.id,
            "mean_level_form": z.mean_level.label(),
            "mean_level_above_datum_m": zs.mean_level_above_datum_m,
            "feeds": z.feeds.iter().map(|f| json!({
                "gauge": loaded.gauges[f.gauge].id,
                "weight": f.weight,
                "time_corrector_min": f.time_corrector_min,
                "range_ratio": f.range_ratio,
            })).collect::<Vec<_>>(),
        }));
        zone_u.push(json!({
            "zone": z.id,
            "u_time_corrector_min": zs.u_time_corrector_min,
            "u_range_ratio": zs.u_range_ratio,
            "u_zone_m": zs.u_zone_m,
            "u_datum_m": zs.u_datum_m,
        }));
    }
    // The tide's uncertainty inputs (the `default_u_` values) are what a correction file's
    // `u_tide_m` was made from; the order, acceptance share and sounding model are applied
    // afresh by `apply`.
    let (mut u_tide, mut u_other) = (Map::new(), Map::new());
    if let Some(Value::Object(u)) = spec
        .uncertainty
        .as_ref()
        .map(|u| serde_json::to_value(u).expect("uncertainty settings serialise"))
    {
        for (k, x) in u {
            if k.starts_with("default_u_") {
                u_tide.insert(k, x);
            } else {
                u_other.insert(k, x);
            }
        }
    }
    // Every project table and key not named here is taken as one that can change a tide (the
    // naive-time offset, `[qc]`, `[interpolation]`, and any added later): a difference there is
    // refused rather than passed over.
    let mut tide = match serde_json::to_value(spec).expect("a project serialises") {
        Value::Object(m) => m,
        _ => Map::new(),
    };
    for k in [
        "name",
        "zoning",
        "output",
        "gauge",
        "soundings",
        "uncertainty",
        "virtual_gauge",
        "tide_field",
    ] {
        tide.remove(k);
    }
    // Virtual gauges change a continuous tide by their position and their constants' content;
    // with the zoning they change no tide.
    let mut virtual_other = Vec::new();
    let mut virtuals = Vec::new();
    for v in spec
        .virtual_gauges
        .iter()
        .filter(|_| spec.tide_field.is_some())
    {
        virtuals.push(json!({
            "virtual_gauge": v.id,
            "lon": v.lon,
            "lat": v.lat,
            "constants_sha256": sha256_file(&v.constants)?,
        }));
    }
    for v in &spec.virtual_gauges {
        let mut o = json!({"virtual_gauge": v.id, "name": v.name, "constants": v.constants});
        if spec.tide_field.is_none() {
            o["lon"] = json!(v.lon);
            o["lat"] = json!(v.lat);
        }
        virtual_other.push(o);
    }
    if !virtuals.is_empty() {
        tide.insert("virtual_gauges".into(), Value::Array(virtuals));
    }
    // `[tide_field]`: its mode changes the tide, its `u_` keys and scale only the uncertainty;
    // each soundings group's CRS places the field in its plane, so it changes the tide too.
    let mut field_u = Map::new();
    if let Some(f) = &spec.tide_field {
        tide.insert("tide_field_mode".into(), json!(f.mode));
        tide.insert(
            "soundings_crs".into(),
            json!(spec
                .soundings
                .iter()
                .map(|g| g.crs.clone())
                .collect::<Vec<_>>()),
        );
        field_u.insert("u_field_m".into(), json!(f.u_field_m));
        field_u.insert("field_scale_km".into(), json!(f.field_scale_km));
        field_u.insert(
            "u_station_range_ratio".into(),
            json!(f.u_station_range_ratio),
        );
        field_u.insert("u_station_time_min".into(), json!(f.u_station_time_min));
    }
    tide.insert("zoning_sha256".into(), json!(sha256_file(&spec.zoning)?));
    tide.insert("zones".into(), Value::Array(zones));
    tide.insert("gauges".into(), Value::Array(gauges));
    Ok(json!({
        "tide": tide,
        "uncertainty": {
            "project": u_tide,
            "gauges": gauge_u,
            "zones": zone_u,
            "tide_field": field_u,
        },
        "other": {
            "uncertainty": u_other,
            "name": spec.name,
            "output": serde_json::to_value(&spec.output).expect("output settings serialise"),
            "soundings": serde_json::to_value(&spec.soundings).expect("soundings groups serialise"),
            "gauges": gauge_other,
            "zoning_path": spec.zoning,
            "virtual_gauges": virtual_other,
        },
    }))
}

/// One input that differs between a correction file's record and the project now.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct InputDifference {
    /// `tide`, `uncertainty` or `other` ([`PARTS`]).
    pub part: &'static str,
    /// The item, e.g. `gauges.orlick.zero_above_datum_m`.
    pub item: String,
    /// As recorded (JSON text; `absent` when the record lacks it).
    pub recorded: String,
    /// In the project now (JSON text; `absent` when the project lacks it).
    pub current: String,
}

impl std::fmt::Display for InputDifference {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let parts: Vec<&str> = self.item.splitn(3, '.').collect();
        let item = match parts[..] {
            ["gauges", id, rest] => format!("gauge '{id}' {rest}"),
            ["zones", id, rest] => format!("zone '{id}' {rest}"),
            _ => self.item.clone(),
        };
        write!(
            f,
            "{} {item}: {} in the correction file, {} now",
            match self.part {
                "tide" => "(tide)",
                "uncertainty" => "(uncertainty)",
                _ => "(neither)",
            },
            self.recorded,
            self.current
        )
    }
}

/// Leaves of `v` by dotted path (array elements by index, objects by key).
fn leaves(prefix: &str, v: &Value, out: &mut Vec<(String, String)>) {
    let join = |k: &str| {
        if prefix.is_empty() {
            k.to_string()
        } else {
            format!("{prefix}.{k}")
        }
    };
    match v {
        Value::Object(m) if !m.is_empty() => {
            for (k, x) in m {
                leaves(&join(k), x, out);
            }
        }
        Value::Array(a) if !a.is_empty() => {
            // Entries named by their `zone` or `gauge` member when every entry has a distinct
            // one (`gauges.orlick.units`), else by index.
            let id = |x: &Value| {
                x.get("zone")
                    .or_else(|| x.get("gauge"))
                    .and_then(Value::as_str)
                    .map(str::to_string)
            };
            let ids: Option<Vec<String>> = a.iter().map(id).collect();
            let distinct = ids.as_ref().is_some_and(|v| {
                v.iter().collect::<std::collections::BTreeSet<_>>().len() == v.len()
            });
            for (k, x) in a.iter().enumerate() {
                let name = match (&ids, distinct) {
                    (Some(v), true) => v[k].clone(),
                    _ => k.to_string(),
                };
                leaves(&join(&name), x, out);
            }
        }
        other => out.push((prefix.to_string(), other.to_string())),
    }
}

/// Every item of `current` that differs from `recorded`, part by part ([`PARTS`]), in path
/// order. Numbers are compared as written by JSON (the same value always writes the same text).
pub fn differences(recorded: &Value, current: &Value) -> Vec<InputDifference> {
    let mut out = Vec::new();
    for part in PARTS {
        let (mut a, mut b) = (Vec::new(), Vec::new());
        leaves("", &recorded[part], &mut a);
        leaves("", &current[part], &mut b);
        let a: std::collections::BTreeMap<_, _> = a.into_iter().collect();
        let b: std::collections::BTreeMap<_, _> = b.into_iter().collect();
        let keys: std::collections::BTreeSet<&String> = a.keys().chain(b.keys()).collect();
        for k in keys {
            let (x, y) = (a.get(k), b.get(k));
            if x != y {
                out.push(InputDifference {
                    part,
                    item: k.clone(),
                    recorded: x.cloned().unwrap_or_else(|| "absent".into()),
                    current: y.cloned().unwrap_or_else(|| "absent".into()),
                });
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn differences_name_each_leaf_and_its_part() {
        let a = json!({
            "tide": {"gauges": {"g1": {"zero_above_datum_m": 1.0, "units": "m"}}, "qc": {"enabled": true}},
            "uncertainty": {"gauges": {"g1": {"u_datum_m": 0.03}}},
            "other": {"name": "a"},
        });
        assert!(differences(&a, &a).is_empty());
        let mut b = a.clone();
        b["tide"]["gauges"]["g1"]["zero_above_datum_m"] = json!(1.1);
        b["tide"]["qc"]["spike_k"] = json!(4.0);
        b["uncertainty"]["gauges"]["g1"]["u_datum_m"] = Value::Null;
        b["other"]["name"] = json!("b");
        let d = differences(&a, &b);
        let named: Vec<(&str, &str, &str, &str)> = d
            .iter()
            .map(|d| {
                (
                    d.part,
                    d.item.as_str(),
                    d.recorded.as_str(),
                    d.current.as_str(),
                )
            })
            .collect();
        assert_eq!(
            named,
            [
                ("tide", "gauges.g1.zero_above_datum_m", "1.0", "1.1"),
                ("tide", "qc.spike_k", "absent", "4.0"),
                ("uncertainty", "gauges.g1.u_datum_m", "0.03", "null"),
                ("other", "name", "\"a\"", "\"b\""),
            ]
        );
    }
}
