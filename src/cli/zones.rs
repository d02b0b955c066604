//! `ebbwise zones derive` and `ebbwise zones compare`: each zone's time corrector and range
//! ratio derived from the co-tidal field of the project's gauges (those naming constants) and
//! virtual gauges, beside the zoning's own; a table on stderr and a CSV file.

use std::io::Write;
use std::path::{Path, PathBuf};

use ebbwise::compute::cotidal::{ZoneDerived, ZoneSkipped};
use ebbwise::io::atomic::Sink;
use ebbwise::io::project::Project;
use ebbwise::io::zones_file::write_zones_csv;
use ebbwise::run::fields::{derive_zones, project_field, zoning_of, ProjectField};
use ebbwise::run::load::project_inputs;
use ebbwise::CAUTION;

use super::common::{print_findings, DataOut, Stdout};
use super::{Outcome, Reported};

#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(subcommand)]
    command: ZonesCommand,
}

#[derive(Debug, clap::Subcommand)]
enum ZonesCommand {
    /// Each zone's time corrector and range ratio derived from the co-tidal field, relative to
    /// each gauge that feeds it.
    Derive(Common),
    /// The zoning's correctors against the derived ones: zones whose correctors disagree beyond
    /// a threshold, with the depth difference that puts into soundings at spring range.
    Compare(CompareArgs),
    /// Co-tidal and co-range lines of one constituent as GeoJSON (`cotidal.geojson`), and a map
    /// (`cotidal.svg`) with the zones, triangulation, stations and zone-boundary steps.
    Map(MapArgs),
}

#[derive(Debug, clap::Args)]
struct MapArgs {
    /// The project file.
    #[arg(long)]
    project: PathBuf,
    /// The constituent to draw. Default: the dominant one by the form factor at the stations'
    /// centre (M2 below 1.5, K1 from 1.5).
    #[arg(long)]
    constituent: Option<String>,
    /// Co-tidal lines every this many degrees of phase.
    #[arg(long, default_value_t = 5.0)]
    phase_step_deg: f64,
    /// Co-range lines every this many metres of amplitude.
    #[arg(long, default_value_t = 0.05)]
    amplitude_step_m: f64,
    /// Step of the grid the field is sampled on, metres.
    #[arg(long, default_value_t = 100.0)]
    cell_m: f64,
    /// Folder to write `cotidal.geojson` and `cotidal.svg` to. Default: the project's output
    /// folder.
    #[arg(long, value_name = "DIR")]
    out_dir: Option<PathBuf>,
}

#[derive(Debug, clap::Args)]
struct Common {
    /// The project file.
    #[arg(long)]
    project: PathBuf,
    /// Step of the grid of points at which the field is evaluated inside each zone, metres.
    #[arg(long, default_value_t = 250.0)]
    cell_m: f64,
    /// The CSV table to write; `-` writes it to stdout. Default: `zones-derived.csv` (derive)
    /// or `zones-compare.csv` (compare) in the project's output folder.
    #[arg(long, value_name = "FILE")]
    out: Option<PathBuf>,
}

#[derive(Debug, clap::Args)]
struct CompareArgs {
    #[command(flatten)]
    common: Common,
    /// A zone disagrees when the spring difference between its correctors and those the field
    /// gives for the zone as a whole exceeds this, metres.
    #[arg(long, default_value_t = 0.05)]
    threshold_m: f64,
}

pub fn run(a: Args) -> anyhow::Result<Outcome> {
    match a.command {
        ZonesCommand::Derive(c) => run_common(&c, None, "zones-derived.csv"),
        ZonesCommand::Compare(c) => run_common(&c.common, Some(c.threshold_m), "zones-compare.csv"),
        ZonesCommand::Map(m) => run_map(&m),
    }
}

fn run_map(a: &MapArgs) -> anyhow::Result<Outcome> {
    use ebbwise::io::cotidal_map::{
        render_cotidal_svg, write_cotidal_geojson, write_svg, LineFeature,
    };
    use ebbwise::run::cotidal_map::{add_steps, cotidal_map, to_lonlat, MapOptions, StepsOnMap};
    for (name, v) in [
        ("--phase-step-deg", a.phase_step_deg),
        ("--amplitude-step-m", a.amplitude_step_m),
        ("--cell-m", a.cell_m),
    ] {
        if !(v.is_finite() && v > 0.0) {
            anyhow::bail!("{name} {v}: expected a positive number");
        }
    }
    let (project, pf, zoning) = field_and_zoning(&a.project)?;
    let opts = MapOptions {
        constituent: a.constituent.clone(),
        phase_step_deg: a.phase_step_deg,
        amplitude_step_m: a.amplitude_step_m,
        cell_m: a.cell_m,
    };
    let mut map = cotidal_map(&project, &pf, &zoning, &opts).map_err(|f| {
        print_findings(&f);
        Reported
    })?;
    add_steps(&mut map, &project.path, &pf);
    let dir = a
        .out_dir
        .clone()
        .unwrap_or_else(|| project.spec.output.dir.clone());
    std::fs::create_dir_all(&dir)?;
    let inputs = project_inputs(&project);
    let input_paths: Vec<&Path> = inputs.iter().map(|(p, _)| p.as_path()).collect();
    let mut features = Vec::new();
    for l in &map.lines {
        for (inside_hull, parts) in [(true, &l.inside), (false, &l.outside)] {
            if parts.is_empty() {
                continue;
            }
            features.push(LineFeature {
                kind: l.kind,
                value: l.value,
                inside_hull,
                parts: parts.iter().map(|p| to_lonlat(&pf, p)).collect(),
            });
        }
    }
    let gj = write_cotidal_geojson(
        &dir.join("cotidal.geojson"),
        &map.constituent,
        &features,
        &input_paths,
    )?;
    let mut notes = vec![format!(
        "{} {}; field of {} stations; grid every {} m; local azimuthal equidistant metres ({})",
        map.constituent,
        if map.constituent_by_form_factor {
            "(dominant by the form factor)"
        } else {
            "(chosen)"
        },
        map.stations.len(),
        map.cell_m,
        pf.local_crs
    )];
    if let (StepsOnMap::Drawn(_), Some((t0, t1))) = (&map.steps, map.steps_span_s) {
        notes.push(format!(
            "Tide steps every 5 min over the gauge records' common span {} to {} (not the survey period: the map does not read the soundings).",
            ebbwise::io::timefmt::utc_label(t0),
            ebbwise::io::timefmt::utc_label(t1)
        ));
    }
    notes.extend(pf.notes.iter().cloned());
    let title = format!(
        "Co-tidal and co-range lines of {} — {}",
        map.constituent, project.spec.name
    );
    let svg = render_cotidal_svg(&map, &title, &notes, CAUTION);
    let sv = write_svg(&dir.join("cotidal.svg"), &svg, &input_paths)?;
    let mut w = std::io::stderr().lock();
    let phase = map
        .lines
        .iter()
        .filter(|l| l.kind == ebbwise::compute::isolines::LineKind::Phase)
        .count();
    let _ = writeln!(
        w,
        "ebbwise zones map: {} of a field of {} stations ({} triangles): {phase} co-tidal lines every {}°, {} co-range lines every {} m",
        map.constituent,
        map.stations.len(),
        map.triangles.len(),
        map.phase_step_deg,
        map.lines.len() - phase,
        map.amplitude_step_m
    );
    for n in &pf.notes {
        let _ = writeln!(w, "  note: {n}");
    }
    let _ = writeln!(w, "  dashed on the map and inside_hull = false in the GeoJSON: lines beyond the stations' hull, where the field is the hull edge's carried out unchanged");
    match &map.steps {
        StepsOnMap::Drawn(s) => {
            let _ = writeln!(w, "  zone-boundary steps drawn: {} shared edges", s.len());
        }
        StepsOnMap::NotDrawn { reason: why } => {
            let _ = writeln!(w, "  zone-boundary steps not drawn: {why}");
        }
    }
    let _ = writeln!(w, "wrote {}", gj.display());
    let _ = writeln!(w, "wrote {}", sv.display());
    let _ = writeln!(w, "{CAUTION}");
    Ok(Outcome::unless(false))
}

/// The project at `path`, its co-tidal field and its zoning; problems printed.
fn field_and_zoning(
    path: &Path,
) -> anyhow::Result<(
    Project,
    ProjectField,
    ebbwise::io::zoning_geojson::ZoningSpec,
)> {
    let project = Project::load(path)?;
    let pf = project_field(&project).map_err(|f| {
        print_findings(&f);
        Reported
    })?;
    let zoning = zoning_of(&project).map_err(|f| {
        print_findings(&f);
        Reported
    })?;
    Ok((project, pf, zoning))
}

fn run_common(c: &Common, threshold_m: Option<f64>, default_name: &str) -> anyhow::Result<Outcome> {
    if !(c.cell_m.is_finite() && c.cell_m > 0.0) {
        anyhow::bail!(
            "--cell-m {}: expected a positive number of metres",
            c.cell_m
        );
    }
    if let Some(t) = threshold_m {
        if !(t.is_finite() && t > 0.0) {
            anyhow::bail!("--threshold-m {t}: expected a positive number of metres");
        }
    }
    let (project, pf, zoning) = field_and_zoning(&c.project)?;
    let (rows, skipped) = derive_zones(&pf, &zoning, c.cell_m);
    let out = c
        .out
        .clone()
        .map(DataOut::from_option)
        .unwrap_or_else(|| DataOut::File(project.spec.output.dir.join(default_name)));
    if let DataOut::File(p) = &out {
        if let Some(dir) = p.parent().filter(|d| !d.as_os_str().is_empty()) {
            std::fs::create_dir_all(dir)?;
        }
    }
    let inputs = project_inputs(&project);
    let input_paths: Vec<&Path> = inputs.iter().map(|(p, _)| p.as_path()).collect();
    let mut stdout = Stdout::lock();
    let written = match &out {
        DataOut::File(p) => write_zones_csv(&rows, Sink::File(p), &input_paths)?,
        DataOut::Stdout => write_zones_csv(&rows, Sink::Stream(&mut stdout), &input_paths)?,
    };
    drop(stdout);
    let disagree = print_table(&pf, &rows, &skipped, threshold_m);
    let mut w = std::io::stderr().lock();
    if let Some(p) = written {
        let _ = writeln!(w, "wrote {}", p.display());
    }
    let _ = writeln!(w, "{CAUTION}");
    Ok(Outcome::unless(disagree > 0 || !skipped.is_empty()))
}

/// The table on stderr; returns how many rows disagree beyond the threshold.
fn print_table(
    pf: &ProjectField,
    rows: &[ZoneDerived],
    skipped: &[ZoneSkipped],
    threshold_m: Option<f64>,
) -> usize {
    let mut w = std::io::stderr().lock();
    let st = pf.field.stations();
    let _ = writeln!(
        w,
        "ebbwise zones: co-tidal field of {} stations ({}), {} triangles, constituents {}",
        st.len(),
        st.iter()
            .map(|s| if s.is_virtual {
                format!("{} (virtual)", s.id)
            } else {
                s.id.clone()
            })
            .collect::<Vec<_>>()
            .join(", "),
        pf.field.triangles().len(),
        pf.field.constituent_names()
    );
    for n in &pf.notes {
        let _ = writeln!(w, "  note: {n}");
    }
    let _ = writeln!(
        w,
        "  {:<8} {:<10} {:>5}  {:>9} {:>9} {:>15}  {:>7} {:>7} {:>15}  {:>8} {:>8} {:>8}",
        "zone",
        "gauge",
        "dom",
        "Δt zoning",
        "Δt field",
        "field range min",
        "R zoning",
        "R field",
        "field range",
        "spring m",
        "worst m",
        "out m"
    );
    let mut disagree = 0;
    for r in rows {
        let bad = threshold_m.is_some_and(|t| r.spring_difference_m > t);
        disagree += usize::from(bad);
        let _ = writeln!(
            w,
            "  {:<8} {:<10} {:>5}  {:>9.1} {:>9.1} {:>7.1}..{:<6.1}  {:>7.4} {:>7.4} {:>7.4}..{:<6.4}  {:>8.3} {:>8.3} {:>8.0}{}",
            r.zone,
            r.gauge,
            r.derived.dominant.name(),
            r.zoning.0,
            r.derived.time_corrector_min,
            r.time_corrector_range_min.0,
            r.time_corrector_range_min.1,
            r.zoning.1,
            r.derived.range_ratio,
            r.range_ratio_range.0,
            r.range_ratio_range.1,
            r.spring_difference_m,
            r.worst_spring_difference_m,
            r.outside_hull_max_m,
            if bad { "  DISAGREES" } else { "" }
        );
    }
    for s in skipped {
        let _ = writeln!(
            w,
            "  {:<8} {:<10} not derived: {}",
            s.zone, s.gauge, s.reason
        );
    }
    let _ = writeln!(
        w,
        "  spring m: the largest difference over a spring tide between the tide the zoning's correctors give and the tide the field's give for the zone as a whole; worst m: the same at the zone's worst point (the zone's own discretisation included); out m: how far the zone reaches outside the stations' hull (the field is carried out unchanged there)"
    );
    if let Some(t) = threshold_m {
        let _ = writeln!(
            w,
            "  {disagree} of {} zone feeds disagree by more than {t} m at spring range",
            rows.len()
        );
    }
    disagree
}
