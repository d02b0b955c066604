//! Loading a project's inputs into the core's plain data: gauges, zones, locators.

use std::collections::HashMap;

use crate::compute::locate::ZoneLocator;
use crate::compute::qc::{conflicting_duplicates, run_qc, QcResult};
use crate::compute::series::{Configured, LevelSeries, TimeInterpolation};
use crate::compute::uncertainty::{
    s44_orders, GaugeUncertainty, SoundingUncertaintyModel, SurveyOrder, ZoneUncertainty,
};
use crate::compute::zoning::{Gauge, GaugeFeed, MeanLevelForm, Zone};
use crate::io::crs::{CrsError, Transformer};
use crate::io::error::{Finding, Position};
use crate::io::gauge_csv::{read_gauge_record, GaugeRecord};
use crate::io::project::{
    DuplicateTimeConflict, GaugeSpec, InterpolationChoice, InterpolationSpec, Project, QcSpec,
};
use crate::io::zoning_geojson::{read_zoning_all, ZoningSpec};

/// Everything a reduction needs, loaded and checked.
#[derive(Debug)]
pub struct Loaded {
    /// The project.
    pub project: Project,
    /// Gauge records as read (for counts and lines).
    pub records: Vec<GaugeRecord>,
    /// Gauges for the core, in project order.
    pub gauges: Vec<Gauge>,
    /// The zoning as written.
    pub zoning: ZoningSpec,
    /// Zones for the core, in file order.
    pub zones: Vec<Zone>,
    /// Time interpolation method.
    pub interp: Box<dyn TimeInterpolation>,
    /// QC of each gauge record, project order (None when QC is off).
    pub qc: Vec<Option<QcResult>>,
    /// How each gauge record is interpolated and filtered, project order.
    pub methods: Vec<GaugeMethod>,
    /// Uncertainty inputs, when the project has an `[uncertainty]` section.
    pub uncertainty: Option<UncertaintyConfig>,
    /// Problems found while loading that do not stop a run.
    pub warnings: Vec<Finding>,
    /// The zoning lies away from every gauge but, with its positions read as [latitude,
    /// longitude], around all of them: its axes look swapped ([`zoning_looks_swapped`]; a warning
    /// says so, and the hint for a sounding outside every zone names the zoning file).
    pub zoning_looks_swapped: bool,
    /// The continuous tide of `[tide_field]`; `None`: the zoning's correctors.
    pub field: Option<crate::run::fields::LoadedField>,
}

/// Uncertainty inputs resolved for every gauge and zone.
#[derive(Debug, Clone)]
pub struct UncertaintyConfig {
    /// Per gauge, project order.
    pub gauge_u: Vec<GaugeUncertainty>,
    /// Per zone, file order.
    pub zone_u: Vec<ZoneUncertainty>,
    /// Sounding uncertainty model (used when a file has no `u_depth` column).
    pub sounding_model: SoundingUncertaintyModel,
    /// Orders assessed: the S-44 ones, then the custom ones.
    pub orders: Vec<SurveyOrder>,
    /// How many of `orders` are built in.
    pub n_builtin: usize,
    /// Index of the chosen order.
    pub chosen: usize,
    /// Acceptance share.
    pub acceptance_share: f64,
    /// Inputs that fell back to the project's defaults: `"gauge orlick: u_gauge_m"`, ….
    pub defaulted: Vec<String>,
    /// Each gauge's rate of change and curvature (for the timing term).
    pub gauge_rates: Vec<crate::compute::uncertainty::GaugeSlopes>,
}

impl UncertaintyConfig {
    /// The inputs a tide model that reads the gauges needs for its budget.
    pub fn gauge_tide_u(&self) -> crate::compute::reduce::GaugeTideU<'_> {
        crate::compute::reduce::GaugeTideU {
            gauge_u: &self.gauge_u,
            zone_u: &self.zone_u,
            rates: &self.gauge_rates,
        }
    }
}

/// Longest record step, minutes, that quality control's spike and rate tests are built for
/// (docs/qc.md): above it, a warning says they can miss faults.
pub const QC_BUILT_FOR_STEP_MIN: f64 = 15.0;

/// Reads gauges and zoning. Problems that make a reduction impossible are errors.
/// `order_override` is the command line's `--order`: it replaces `[uncertainty] order`, and an
/// unknown name is reported at `--order`, not at the project file.
pub fn load(project: Project, order_override: Option<&str>) -> Result<Loaded, Vec<Finding>> {
    let mut findings = Vec::new();
    let mut records = Vec::new();
    for (i, g) in project.spec.gauges.iter().enumerate() {
        match read_gauge_record(g, project.gauge_naive_offset(g)) {
            Ok(r) => {
                if let Some(f) = plausibility(g, &r) {
                    findings.push(f);
                }
                if let Some(step_min) = max_gap_below_step(g, &r) {
                    findings.push(Finding::error(
                        Position::file(&project.path).field(format!("gauge[{i}].max_gap_min")),
                        format!(
                            "gauge '{}': max_gap_min = {}{} is shorter than the record's own step of {} min: every interval would be a gap and no sounding would get a tide from it; set max_gap_min to at least {}; {} (2.5 steps) also bridges one missing reading",
                            g.id,
                            g.max_gap_min,
                            if g.max_gap_min == crate::io::project::DEFAULT_MAX_GAP_MIN {
                                " (the default, when the gauge does not set it)"
                            } else {
                                ""
                            },
                            clean_minutes(step_min),
                            clean_minutes(step_min),
                            clean_minutes(2.5 * step_min)
                        ),
                    ));
                }
                findings.extend(duplicate_findings(
                    g,
                    &r,
                    project.spec.qc.duplicate_time_conflict,
                ));
                if r.times_s.is_empty() {
                    findings.push(Finding::error(
                        Position::file(&g.record),
                        "the record holds no usable sample",
                    ));
                }
                records.push(r);
            }
            Err(e) => findings.push(e.into()),
        }
    }
    let mut constants: Vec<Option<crate::compute::harmonic::HarmonicConstants>> =
        vec![None; project.spec.gauges.len()];
    for (gi, g) in project.spec.gauges.iter().enumerate() {
        if let Some(d) = &g.datums {
            if let Ok(f) = crate::io::project::gauge_datums(g, d) {
                for w in crate::io::project::datums_disagreements(g, &f) {
                    findings.push(Finding::warning(
                        Position::file(&project.path),
                        format!("gauge '{}': {w} ({})", g.id, d.display()),
                    ));
                }
            }
        }
        if let Some(c) = &g.constants {
            match crate::io::constants::read_constants(c) {
                Ok((file, k)) => {
                    constants[gi] = Some(k);
                    for w in crate::run::harmonics::constants_warnings(&file) {
                        findings.push(Finding::warning(
                            Position::file(c),
                            format!("gauge '{}': {w}", g.id),
                        ));
                    }
                    if file
                        .levels
                        .as_deref()
                        .is_some_and(|l| l != "above chart datum")
                    {
                        findings.push(Finding::warning(
                            Position::file(c).field("levels"),
                            format!(
                                "gauge '{}': these constants give levels {}, not above chart datum",
                                g.id,
                                file.levels.as_deref().unwrap_or("")
                            ),
                        ));
                    }
                }
                Err(e) => findings.push(e.into()),
            }
        }
    }
    let zoning = match read_zoning_all(&project.spec.zoning) {
        Ok(z) => z,
        Err(e) => {
            findings.push(e.into());
            return Err(findings);
        }
    };
    findings.extend(zoning.errors.iter().cloned());
    findings.extend(zoning.warnings.iter().cloned());
    if let Some(note) = left_out_note(&zoning, &project.spec.zoning) {
        findings.push(note);
    }
    let index: HashMap<&str, usize> = project
        .spec
        .gauges
        .iter()
        .enumerate()
        .map(|(i, g)| (g.id.as_str(), i))
        .collect();
    let mut zones = Vec::new();
    for z in &zoning.zones {
        let at = Position::file(&project.spec.zoning)
            .field(format!("features[{}].properties", z.feature_index));
        let at_geometry = Position::file(&project.spec.zoning)
            .field(format!("features[{}].geometry", z.feature_index));
        if let Some(m) = self_intersection(&z.polygon_lonlat) {
            findings.push(Finding::error(
                at_geometry.clone(),
                format!("zone '{}': {m}", z.id),
            ));
        }
        if approx_area_m2(&z.polygon_lonlat) < ZONE_AREA_MIN_M2 {
            findings.push(Finding::error(
                at_geometry.clone(),
                format!(
                    "zone '{}': the polygon encloses no area (less than {ZONE_AREA_MIN_M2} m²: its positions lie on a line or a point)",
                    z.id
                ),
            ));
        }
        for ring in &z.unclosed_rings {
            findings.push(Finding::error(
                at_geometry.clone(),
                format!(
                    "zone '{}': {ring} is not closed (first and last positions differ)",
                    z.id
                ),
            ));
        }
        let mut feeds = Vec::new();
        for f in &z.feeds {
            match index.get(f.gauge.as_str()) {
                Some(&gi) => feeds.push(GaugeFeed {
                    gauge: gi,
                    weight: f.weight,
                    time_corrector_min: f.time_corrector_min,
                    range_ratio: f.range_ratio,
                }),
                None => findings.push(Finding::error(
                    at.clone(),
                    format!(
                        "zone '{}' names gauge '{}', which the project does not define{}",
                        z.id,
                        f.gauge,
                        gauge_hint(&project, &f.gauge)
                    ),
                )),
            }
        }
        let zone = Zone {
            id: z.id.clone(),
            feeds,
            mean_level: match z.mean_level_above_datum_m {
                Some(m) => MeanLevelForm::ZoneMean {
                    zone_mean_level_above_datum_m: m,
                },
                None => MeanLevelForm::Scaled,
            },
        };
        let w: f64 = z.feeds.iter().map(|f| f.weight).sum();
        if (w - 1.0).abs() > 1e-6 && !zone.feeds.is_empty() {
            let hint = if (w - 100.0).abs() <= 1e-4 {
                " (percentages? write the weights as fractions of 1)"
            } else {
                ""
            };
            findings.push(Finding::error(
                Position::file(&project.spec.zoning)
                    .field(format!("features[{}].properties.feeds", z.feature_index)),
                format!("zone '{}': gauge weights sum to {w:.6}, not 1{hint}", z.id),
            ));
        }
        // The same gauge in two feeds is well defined (a blend of two lags) but is most often a
        // feed copied and not edited: say so.
        for (k, f) in z.feeds.iter().enumerate() {
            if let Some(j) = z.feeds[..k].iter().position(|e| e.gauge == f.gauge) {
                findings.push(Finding::warning(
                    Position::file(&project.spec.zoning)
                        .field(format!("features[{}].properties.feeds[{k}].gauge", z.feature_index)),
                    format!(
                        "zone '{}': gauge '{}' feeds the zone twice (feeds {j} and {k}): a feed copied and not edited? Both are used, blended by their weights",
                        z.id, f.gauge
                    ),
                ));
            }
        }
        zones.push(zone);
    }
    findings.extend(zone_overlaps(&zoning, &project.spec.zoning));
    if findings
        .iter()
        .any(|f| f.severity == crate::io::error::Severity::Error)
    {
        return Err(findings);
    }
    let gauge_lonlat: Vec<(f64, f64)> =
        project.spec.gauges.iter().map(|g| (g.lon, g.lat)).collect();
    let swapped = zoning_looks_swapped(&zoning, &gauge_lonlat);
    if let Some(d_deg) = swapped {
        findings.push(Finding::warning(
            Position::file(&project.spec.zoning),
            format!(
                "the zoning lies {d_deg:.1}° from the nearest gauge, but with each position read as [latitude, longitude] it would lie around the gauges: GeoJSON positions are [longitude, latitude]; are they swapped in the zoning file?"
            ),
        ));
    }
    let uncertainty = match &project.spec.uncertainty {
        None => None,
        Some(u) => {
            let mut defaulted = Vec::new();
            let gauge_u = project
                .spec
                .gauges
                .iter()
                .map(|g| {
                    let mut pick = |v: Option<f64>, d: f64, k: &str| {
                        v.unwrap_or_else(|| {
                            defaulted.push(format!("gauge {}: {k}", g.id));
                            d
                        })
                    };
                    GaugeUncertainty {
                        u_gauge_m: pick(g.u_gauge_m, u.default_u_gauge_m, "u_gauge_m"),
                        u_datum_m: pick(g.u_datum_m, u.default_u_datum_m, "u_datum_m"),
                    }
                })
                .collect();
            let zone_u = zoning
                .zones
                .iter()
                .map(|z| {
                    let mut pick = |v: Option<f64>, d: f64, k: &str| {
                        v.unwrap_or_else(|| {
                            defaulted.push(format!("zone {}: {k}", z.id));
                            d
                        })
                    };
                    ZoneUncertainty {
                        u_renormalised_m: 0.0,
                        u_time_corrector_min: pick(
                            z.u_time_corrector_min,
                            u.default_u_time_corrector_min,
                            "u_time_corrector_min",
                        ),
                        u_range_ratio: pick(
                            z.u_range_ratio,
                            u.default_u_range_ratio,
                            "u_range_ratio",
                        ),
                        u_zone_m: pick(z.u_zone_m, u.default_u_zone_m, "u_zone_m"),
                        u_datum_m: z.u_datum_m,
                    }
                })
                .collect();
            let mut orders = s44_orders();
            let n_builtin = orders.len();
            for c in &u.custom_orders {
                orders.push(SurveyOrder {
                    name: c.name.clone(),
                    a_m: c.a_m,
                    b: c.b,
                    thu_max95: "not set".into(),
                });
            }
            let want = order_override.unwrap_or(&u.order);
            let Some(chosen) = orders
                .iter()
                .position(|o| o.name.eq_ignore_ascii_case(want))
            else {
                // Blame where the name came from: the command line (the option stands where a
                // file would) or the project file's key.
                let at = match order_override {
                    Some(_) => Position::file(std::path::Path::new("--order")),
                    None => Position::file(&project.path).field("uncertainty.order"),
                };
                findings.push(Finding::error(
                    at,
                    format!(
                        "unknown survey order '{want}'{}",
                        crate::compute::names::hint(want, orders.iter().map(|o| o.name.as_str()))
                    ),
                ));
                return Err(findings);
            };
            Some(UncertaintyConfig {
                gauge_u,
                zone_u,
                sounding_model: SoundingUncertaintyModel {
                    a_m: u.sounding_a_m,
                    b: u.sounding_b,
                },
                orders,
                n_builtin,
                chosen,
                acceptance_share: u.acceptance_share,
                defaulted,
                gauge_rates: Vec::new(),
            })
        }
    };
    if !project.spec.qc.enabled {
        findings.push(Finding::warning(
            Position::file(&project.path).field("qc.enabled"),
            "quality control is off: reversed or repeated times and spikes in the gauge records reach the soundings unchecked",
        ));
    }
    let mut gauges = Vec::new();
    let mut qc = Vec::new();
    let mut methods = Vec::new();
    for (gi, (g, r)) in project.spec.gauges.iter().zip(&records).enumerate() {
        let prepared = prepare_series(&project.spec.qc, &project.spec.interpolation, g, r);
        findings.extend(sample_findings(g, r, prepared.qc.as_ref()));
        if let Some(q) = &prepared.qc {
            let flagged: Vec<String> = crate::compute::qc::QcFlag::ALL
                .iter()
                .filter(|f| f.excludes() && q.count(**f) > 0)
                .map(|f| format!("{} {}", q.count(*f), f.as_str()))
                .collect();
            if !flagged.is_empty() {
                findings.push(Finding::warning(
                    Position::file(&g.record),
                    format!(
                        "gauge '{}': quality control set aside {} of {} samples ({}); soundings whose tide would be interpolated across them get status gauge_flagged (see `ebbwise qc`)",
                        g.id,
                        r.times_s.len() - q.usable_count(),
                        r.times_s.len(),
                        flagged.join(", ")
                    ),
                ));
            }
        }
        if prepared.qc.is_some() && prepared.method.nominal_step_min > QC_BUILT_FOR_STEP_MIN {
            findings.push(Finding::warning(
                Position::file(&g.record),
                format!(
                    "gauge '{}': quality control is built for records of 1 to {} min; at this record's {}-min step the spike and rate tests see the tide's own curvature and can miss faults: review the record against its neighbours or its prediction (`ebbwise qc` compares gauges)",
                    g.id,
                    QC_BUILT_FOR_STEP_MIN,
                    clean_minutes(prepared.method.nominal_step_min)
                ),
            ));
        }
        if let Some(c) = g.lowpass_cutoff_min {
            if c <= 2.0 * prepared.method.nominal_step_min {
                findings.push(Finding::warning(
                    Position::file(&project.path).field(format!("gauge[{gi}].lowpass_cutoff_min")),
                    format!(
                        "gauge '{}': a cut-off of {c} min is not longer than two steps of this {:.1}-min record: the filter leaves it unchanged",
                        g.id,
                        prepared.method.nominal_step_min
                    ),
                ));
            }
        }
        methods.push(prepared.method);
        qc.push(prepared.qc);
        gauges.push(Gauge {
            id: g.id.clone(),
            series: prepared.series,
            mean_level_above_datum_m: g.mean_level_above_datum_m,
        });
    }
    if project.spec.gap_fill.enabled {
        findings.extend(fill_gaps(
            &project,
            &mut gauges,
            &zones,
            &constants,
            &methods,
        ));
    }
    let mut uncertainty = uncertainty;
    if let (Some(u), true) = (
        uncertainty.as_mut(),
        project.spec.gap_fill.enabled && project.spec.gap_fill.renormalise_feeds,
    ) {
        for (z, zu) in zones.iter().zip(u.zone_u.iter_mut()) {
            let span = z.feeds.iter().fold(None, |acc: Option<(f64, f64)>, f| {
                let t = &gauges[f.gauge].series.times_s;
                match (t.first(), t.last(), acc) {
                    (Some(&a), Some(&b), None) => Some((a, b)),
                    (Some(&a), Some(&b), Some((x, y))) => Some((x.min(a), y.max(b))),
                    _ => acc,
                }
            });
            if let Some((a, b)) = span {
                let times: Vec<f64> = (0..)
                    .map(|k| a + k as f64 * RENORMALISATION_STEP_S)
                    .take_while(|&t| t <= b)
                    .collect();
                zu.u_renormalised_m = z
                    .renormalisation_rms_m(&gauges, &Configured, &times)
                    .unwrap_or(0.0);
            }
        }
    }
    let field = match &project.spec.tide_field {
        None => None,
        Some(spec) => match crate::run::fields::loaded_field(&project, spec, &gauges) {
            Ok((f, notes)) => {
                let at = Position::file(&project.path).field("tide_field");
                findings.extend(notes.into_iter().map(|n| Finding::warning(at.clone(), n)));
                if let Some(u) = uncertainty.as_mut() {
                    // The zones' correctors and their uncertainties are not used.
                    u.defaulted.retain(|d| !d.starts_with("zone "));
                    u.defaulted
                        .extend(crate::run::fields::tide_field_defaults(spec));
                }
                Some(f)
            }
            Err(e) => {
                findings.extend(e);
                return Err(findings);
            }
        },
    };
    if let Some(u) = uncertainty.as_mut() {
        u.gauge_rates = gauges
            .iter()
            .map(|g| crate::compute::uncertainty::rate_series(g, &Configured))
            .collect();
    }
    Ok(Loaded {
        project,
        records,
        gauges,
        zoning,
        zones,
        interp: Box::new(Configured),
        qc,
        methods,
        uncertainty,
        warnings: findings,
        zoning_looks_swapped: swapped.is_some(),
        field,
    })
}

/// Step of the instants at which a zone's full and renormalised blends are compared, seconds
/// (6 min, the common gauge step).
pub const RENORMALISATION_STEP_S: f64 = 360.0;

/// Fills the gauges' gaps as `[gap_fill]` asks (see `compute::gapfill`), rebuilding the spline
/// of a cubic gauge on its filled series; returns one warning per gauge with a gap, saying what
/// was filled and what was left open.
pub fn fill_gaps(
    project: &Project,
    gauges: &mut [Gauge],
    zones: &[Zone],
    constants: &[Option<crate::compute::harmonic::HarmonicConstants>],
    methods: &[GaugeMethod],
) -> Vec<Finding> {
    use crate::compute::gapfill::{
        fill_series, gauge_relation, FillSettings, MethodChoice, NeighbourRelation, Reference,
        MIN_TRIALS,
    };
    use crate::io::project::GapFillChoice;
    let spec = &project.spec.gap_fill;
    let settings = FillSettings {
        max_fill_s: spec.max_fill_min * 60.0,
        edge_window_s: spec.edge_window_min * 60.0,
        min_trials: MIN_TRIALS,
    };
    let originals: Vec<LevelSeries> = gauges.iter().map(|g| g.series.clone()).collect();
    let k_refs: Vec<Option<&crate::compute::harmonic::HarmonicConstants>> =
        constants.iter().map(|k| k.as_ref()).collect();
    let mut findings = Vec::new();
    for gi in 0..gauges.len() {
        let choice = match spec.method_for(&gauges[gi].id) {
            GapFillChoice::None => continue,
            GapFillChoice::PredictionResidual => MethodChoice::PredictionResidual,
            GapFillChoice::Neighbour => MethodChoice::Neighbour,
            _ => MethodChoice::Auto,
        };
        let mut refs = Vec::new();
        if let Some(k) = &constants[gi] {
            refs.push(Reference::Prediction(k));
        }
        for (gj, other) in originals.iter().enumerate() {
            if gj == gi {
                continue;
            }
            if let Some((lag_s, ratio, _)) = gauge_relation(gi, gj, zones, &k_refs) {
                refs.push(Reference::Neighbour(NeighbourRelation {
                    gauge: gj,
                    series: other,
                    lag_s,
                    ratio,
                    self_mean_m: gauges[gi].mean_level_above_datum_m,
                    other_mean_m: gauges[gj].mean_level_above_datum_m,
                }));
            }
        }
        let step_s = methods[gi].nominal_step_min * 60.0;
        if step_s <= 0.0 {
            continue;
        }
        let (mut series, marks) = fill_series(&originals[gi], step_s, &refs, choice, &settings);
        if marks.spans.is_empty() && marks.refused.is_empty() {
            continue;
        }
        let g_spec = &project.spec.gauges[gi];
        let mut words = Vec::new();
        for sp in &marks.spans {
            words.push(format!(
                "filled {} to {} by {}{} (u {} m mid-gap, {} m at the edges, measured on {} artificial gaps)",
                crate::io::timefmt::utc_label(sp.from_s),
                crate::io::timefmt::utc_label(sp.to_s),
                sp.method.as_str(),
                sp.neighbour
                    .map(|j| format!(" from gauge '{}'", gauges[j].id))
                    .unwrap_or_default(),
                crate::io::numfmt::round_to(sp.error.u_at_m(0.5), 3),
                crate::io::numfmt::round_to(sp.error.u_edge_m, 3),
                sp.error.trials
            ));
        }
        for r in &marks.refused {
            words.push(format!(
                "left {} to {} open: {}",
                crate::io::timefmt::utc_label(r.from_s),
                crate::io::timefmt::utc_label(r.to_s),
                r.why
            ));
        }
        findings.push(Finding::warning(
            Position::file(&g_spec.record),
            format!("gauge '{}': gap filling {}", g_spec.id, words.join("; ")),
        ));
        if marks.spans.is_empty() {
            gauges[gi].series.fill = marks;
            continue;
        }
        if !originals[gi].spline_m_per_s2.is_empty() {
            let unbridged = series.unbridged();
            series.spline_m_per_s2 = crate::compute::spline::spline_second_derivatives(
                &series.times_s,
                &series.heights_m,
                &unbridged,
                crate::compute::spline::SplineEnds::NotAKnot,
            );
        }
        series.fill = marks;
        gauges[gi].series = series;
    }
    findings
}

/// Most samples named one by one per gauge and kind (times, readings); the rest are counted.
pub const SAMPLES_NAMED_MAX: usize = 20;

/// Every time written twice with different readings in a gauge record: an error naming both
/// lines when `policy` refuses them, else a warning that both copies are set aside.
pub fn duplicate_findings(
    g: &GaugeSpec,
    r: &GaugeRecord,
    policy: DuplicateTimeConflict,
) -> Vec<Finding> {
    let mut out = Vec::new();
    for c in conflicting_duplicates(&r.times_s, &r.heights_m) {
        let at = Position::file(&g.record)
            .line(r.lines[c.later])
            .field(&g.time_column);
        let what = format!(
            "time '{}' is also at line {} with another reading (levels {} and {} m above chart datum)",
            crate::io::timefmt::utc_label(r.times_s[c.later]),
            r.lines[c.first],
            level_words(r.heights_m[c.first]),
            level_words(r.heights_m[c.later]),
        );
        out.push(match policy {
            DuplicateTimeConflict::SetBothAside => Finding::warning(
                at,
                format!("{what}: both copies are set aside ([qc] duplicate_time_conflict = \"set_both_aside\")"),
            ),
            _ => Finding::error(
                at,
                format!("{what}: no rule can tell which is right; correct the record, or set [qc] duplicate_time_conflict = \"set_both_aside\" to set both copies aside"),
            ),
        });
    }
    out
}

/// A level for a message: three decimals, or the exponent form when it is huge (`1e308`).
fn level_words(h_m: f64) -> String {
    if h_m.is_finite() && h_m.abs() < 1e6 {
        format!("{h_m:.3}")
    } else {
        format!("{h_m:e}")
    }
}

/// One warning per sample that quality control sets aside for its time or its reading (up to
/// [`SAMPLES_NAMED_MAX`] of each, then a count), naming its line and field. Conflicting
/// duplicate times are left to [`duplicate_findings`]. Without QC (`qc` is `None`), readings that
/// are not finite numbers are still named: they are left out of the series all the same.
pub fn sample_findings(g: &GaugeSpec, r: &GaugeRecord, qc: Option<&QcResult>) -> Vec<Finding> {
    use crate::compute::qc::QcReason;
    use crate::io::timefmt::utc_label;
    let mut out = Vec::new();
    let (mut times, mut readings) = (0usize, 0usize);
    let at = |i: usize, field: &str| Position::file(&g.record).line(r.lines[i]).field(field);
    let mut push = |count: &mut usize, f: Finding| {
        *count += 1;
        if *count <= SAMPLES_NAMED_MAX {
            out.push(f);
        }
    };
    let Some(q) = qc else {
        for (i, h) in r.heights_m.iter().enumerate() {
            if !h.is_finite() {
                push(
                    &mut readings,
                    Finding::warning(
                        at(i, &g.height_column),
                        format!("reading '{h}' is not a finite number: the sample is left out (quality control is off)"),
                    ),
                );
            }
        }
        if readings > SAMPLES_NAMED_MAX {
            out.push(Finding::warning(
                Position::file(&g.record),
                format!(
                    "{} more readings that are not finite numbers",
                    readings - SAMPLES_NAMED_MAX
                ),
            ));
        }
        return out;
    };
    const ASIDE: &str = "quality control sets the sample aside";
    for n in &q.notes {
        let i = n.sample;
        let t = utc_label(r.times_s[i]);
        let line = |k: usize| r.lines[k];
        match n.reason {
            QcReason::DuplicateTime { kept, .. } => push(
                &mut times,
                Finding::warning(
                    at(i, &g.time_column),
                    format!("time '{t}' and its reading repeat line {}: {ASIDE}", line(kept)),
                ),
            ),
            QcReason::DistantDuplicate { other, .. } => push(
                &mut times,
                Finding::warning(
                    at(i, &g.time_column),
                    format!(
                        "time '{t}' and its reading are also at line {}, with other rows between: not a repeated row (a clock set back?): {ASIDE}",
                        line(other)
                    ),
                ),
            ),
            QcReason::EarlierThanPrevious { previous, .. } => push(
                &mut times,
                Finding::warning(
                    at(i, &g.time_column),
                    format!(
                        "time '{t}' is earlier than that of line {} ('{}') before it: {ASIDE}",
                        line(previous),
                        utc_label(r.times_s[previous])
                    ),
                ),
            ),
            QcReason::LaterThanNext { next, .. } => push(
                &mut times,
                Finding::warning(
                    at(i, &g.time_column),
                    format!(
                        "time '{t}' is later than that of line {} ('{}') after it: {ASIDE}",
                        line(next),
                        utc_label(r.times_s[next])
                    ),
                ),
            ),
            QcReason::OutOfOrder { .. } => push(
                &mut times,
                Finding::warning(at(i, &g.time_column), format!("time '{t}' is out of order: {ASIDE}")),
            ),
            QcReason::NotFinite { level_m } => push(
                &mut readings,
                Finding::warning(
                    at(i, &g.height_column),
                    format!("reading '{level_m}' is not a finite number: {ASIDE}"),
                ),
            ),
            QcReason::OutOfBand {
                level_m,
                band_min_m,
                band_max_m,
            } => push(
                &mut readings,
                Finding::warning(
                    at(i, &g.height_column),
                    format!(
                        "level {} m above chart datum is outside the plausible band {band_min_m:.2} to {band_max_m:.2} m: {ASIDE}",
                        level_words(level_m)
                    ),
                ),
            ),
            _ => {}
        }
    }
    if times > SAMPLES_NAMED_MAX {
        out.push(Finding::warning(
            Position::file(&g.record),
            format!("{} more times out of order", times - SAMPLES_NAMED_MAX),
        ));
    }
    if readings > SAMPLES_NAMED_MAX {
        out.push(Finding::warning(
            Position::file(&g.record),
            format!(
                "{} more readings outside the plausible band or not finite",
                readings - SAMPLES_NAMED_MAX
            ),
        ));
    }
    out
}

/// A file a command is about to write, and what it is ("the reduced file of day.csv").
#[derive(Debug, Clone, PartialEq)]
pub struct PlannedOutput {
    /// Where it goes.
    pub path: std::path::PathBuf,
    /// What it is, for messages.
    pub what: String,
}

/// Every input a project names, with what it is: the project file, the zoning, the gauge
/// records and constants, and the soundings files of every group.
pub fn project_inputs(project: &Project) -> Vec<(std::path::PathBuf, String)> {
    let mut out = vec![
        (project.path.clone(), "the project file".to_string()),
        (project.spec.zoning.clone(), "the zoning".to_string()),
    ];
    for g in &project.spec.gauges {
        out.push((g.record.clone(), format!("the record of gauge '{}'", g.id)));
        if let Some(c) = &g.constants {
            out.push((c.clone(), format!("the constants of gauge '{}'", g.id)));
        }
        if let Some(d) = &g.datums {
            out.push((d.clone(), format!("the datums of gauge '{}'", g.id)));
        }
    }
    for v in &project.spec.virtual_gauges {
        out.push((
            v.constants.clone(),
            format!("the constants of virtual gauge '{}'", v.id),
        ));
    }
    for group in &project.spec.soundings {
        for f in &group.files {
            out.push((f.clone(), "the soundings file".to_string()));
        }
    }
    out
}

/// A path made comparable with others without needing it to exist: the canonical path when it
/// exists, else its canonical folder joined with its name, else the absolute path with `.` and
/// `..` taken away by their names.
fn comparable(p: &std::path::Path) -> std::path::PathBuf {
    use std::path::{Component, PathBuf};
    if let Ok(c) = p.canonicalize() {
        return c;
    }
    let abs = if p.is_absolute() {
        p.to_path_buf()
    } else {
        std::env::current_dir()
            .map(|d| d.join(p))
            .unwrap_or_else(|_| p.to_path_buf())
    };
    if let (Some(dir), Some(name)) = (abs.parent(), abs.file_name()) {
        if let Ok(c) = dir.canonicalize() {
            return c.join(name);
        }
    }
    let mut out = PathBuf::new();
    for c in abs.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

/// Every clash of the outputs a command plans with its inputs (the project's and `extra_inputs`,
/// e.g. a correction file) and with each other, as errors naming both files. Run before any
/// output is opened: inputs are never overwritten, and a refused run writes nothing.
pub fn output_clashes(
    project: &Project,
    outputs: &[PlannedOutput],
    extra_inputs: &[(std::path::PathBuf, String)],
) -> Vec<Finding> {
    const FIX: &str =
        "choose another output folder ([output] dir or --out) or rename one of the files";
    let mut inputs: Vec<(std::path::PathBuf, std::path::PathBuf, &str)> = Vec::new();
    let all = project_inputs(project);
    for (p, what) in all.iter().chain(extra_inputs) {
        inputs.push((comparable(p), p.clone(), what.as_str()));
    }
    let mut out = Vec::new();
    let mut seen: HashMap<std::path::PathBuf, &PlannedOutput> = HashMap::new();
    for o in outputs {
        let key = comparable(&o.path);
        if let Some((_, input, what)) = inputs.iter().find(|(k, _, _)| *k == key) {
            out.push(Finding::error(
                Position::file(input),
                format!(
                    "{what} would be overwritten by {}: inputs are never overwritten; {FIX}",
                    o.what
                ),
            ));
        } else if let Some(prev) = seen.get(&key) {
            out.push(Finding::error(
                Position::file(&o.path),
                format!(
                    "{} and {} would both be written here, one over the other; {FIX}",
                    prev.what, o.what
                ),
            ));
        } else {
            seen.insert(key, o);
        }
    }
    out
}

/// What could not be checked because features of the zoning have errors: they take no part in
/// the checks of geometry against other zones (overlaps), and soundings are not located in them.
fn left_out_note(zoning: &ZoningSpec, path: &std::path::Path) -> Option<Finding> {
    if zoning.left_out.is_empty() {
        return None;
    }
    let list: Vec<String> = zoning.left_out.iter().map(|i| i.to_string()).collect();
    Some(Finding::warning(
        Position::file(path),
        format!(
            "not checked because of the errors above: feature(s) {} take no part in the overlap check, and no sounding is located in the zoning until they are fixed",
            list.join(", ")
        ),
    ))
}

/// Overlaps smaller than this are reported as warnings (rounding slivers), larger as errors.
pub const OVERLAP_ERROR_M2: f64 = 1.0;

/// A zone enclosing less than this is refused: its soundings could never lie in it.
pub const ZONE_AREA_MIN_M2: f64 = 1.0;

/// Every pair of zones that overlap, with the overlap area: an error from
/// [`OVERLAP_ERROR_M2`] up, a warning below (the point goes to the first zone in the file).
pub fn zone_overlaps(zoning: &ZoningSpec, path: &std::path::Path) -> Vec<Finding> {
    use geo::{BooleanOps, BoundingRect, Intersects};
    let mut out = Vec::new();
    let zones = &zoning.zones;
    for i in 0..zones.len() {
        for j in i + 1..zones.len() {
            let (a, b) = (&zones[i].polygon_lonlat, &zones[j].polygon_lonlat);
            let (Some(ra), Some(rb)) = (a.bounding_rect(), b.bounding_rect()) else {
                continue;
            };
            if !ra.intersects(&rb) {
                continue;
            }
            let area = geodesic_area_m2(&a.intersection(b));
            if area > 0.0 {
                let at =
                    Position::file(path).field(format!("features[{}]", zones[j].feature_index));
                let msg = format!(
                    "zones '{}' and '{}' overlap by {area:.0} m² (points in the overlap go to '{}', the first in the file)",
                    zones[i].id, zones[j].id, zones[i].id
                );
                out.push(if area >= OVERLAP_ERROR_M2 {
                    Finding::error(at, msg)
                } else {
                    Finding::warning(at, msg)
                });
            }
        }
    }
    out
}

/// Area of a lon/lat multipolygon, m², taken in the plane of longitude and latitude and scaled
/// by 111 320 m per degree (longitude × cos latitude): enough to tell a polygon with no area
/// (positions on one line or one point) from a real one. The geodesic area cannot: the edges of
/// a "polygon" along one parallel are great-circle arcs that do enclose an area.
pub fn approx_area_m2(mp: &geo::MultiPolygon<f64>) -> f64 {
    use geo::{Area, BoundingRect};
    let Some(r) = mp.bounding_rect() else {
        return 0.0;
    };
    let lat_rad = (0.5 * (r.min().y + r.max().y)).to_radians();
    mp.unsigned_area() * 111_320.0_f64.powi(2) * lat_rad.cos().abs()
}

/// Geodesic area of a lon/lat multipolygon, m², whatever the winding of its rings (rings are
/// oriented counter-clockwise first: the geodesic area of a clockwise ring is the rest of the
/// globe).
///
/// # References
/// Karney (2013), *Algorithms for geodesics*, through geo's `GeodesicArea`.
pub fn geodesic_area_m2(mp: &geo::MultiPolygon<f64>) -> f64 {
    use geo::orient::Direction;
    use geo::{GeodesicArea, Orient};
    mp.0.iter()
        .map(|p| p.orient(Direction::Default).geodesic_area_unsigned())
        .sum()
}

/// `": did you mean 'g1'?"` for the project's gauge nearest to `id`, or `" (gauges: g1, g2)"`.
pub fn gauge_hint(project: &Project, id: &str) -> String {
    let ids = project.spec.gauges.iter().map(|g| g.id.as_str());
    match crate::compute::names::nearest(id, ids.clone()) {
        Some(n) => format!(": did you mean '{n}'?"),
        None => format!(" (gauges: {})", ids.collect::<Vec<_>>().join(", ")),
    }
}

/// Whether a zoning's positions look written as [latitude, longitude]: no gauge lies near the
/// zoning's bounding box, and every gauge lies near the box with its axes swapped. "Near" is
/// within the box's diagonal or 0.1°, whichever is larger (a gauge may stand a little outside
/// the zones it feeds). Returns the distance, degrees, from the box to the nearest gauge.
pub fn zoning_looks_swapped(zoning: &ZoningSpec, gauge_lonlat: &[(f64, f64)]) -> Option<f64> {
    use geo::BoundingRect;
    let mut rects = zoning
        .zones
        .iter()
        .filter_map(|z| z.polygon_lonlat.bounding_rect());
    let first = rects.next()?;
    let (mut x0, mut y0, mut x1, mut y1) =
        (first.min().x, first.min().y, first.max().x, first.max().y);
    for r in rects {
        x0 = x0.min(r.min().x);
        y0 = y0.min(r.min().y);
        x1 = x1.max(r.max().x);
        y1 = y1.max(r.max().y);
    }
    if gauge_lonlat.is_empty() {
        return None;
    }
    let near_deg = (x1 - x0).hypot(y1 - y0).max(0.1);
    let distance = |(x, y): (f64, f64), (x0, y0, x1, y1): (f64, f64, f64, f64)| {
        let dx = (x0 - x).max(x - x1).max(0.0);
        let dy = (y0 - y).max(y - y1).max(0.0);
        dx.hypot(dy)
    };
    let nearest = gauge_lonlat
        .iter()
        .map(|&g| distance(g, (x0, y0, x1, y1)))
        .fold(f64::INFINITY, f64::min);
    let all_near_swapped = gauge_lonlat
        .iter()
        .all(|&g| distance(g, (y0, x0, y1, x1)) <= near_deg);
    (nearest > near_deg && all_near_swapped).then_some(nearest)
}

/// A gauge's series as the reducer uses it, with what was done to it.
#[derive(Debug)]
pub struct PreparedSeries {
    /// The series: usable samples, flagged times, spline coefficients when cubic.
    pub series: LevelSeries,
    /// QC result (None when `[qc] enabled = false`).
    pub qc: Option<QcResult>,
    /// Interpolation and filtering applied, for reports.
    pub method: GaugeMethod,
}

/// How a gauge's record is used.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct GaugeMethod {
    /// `linear` or `cubic_spline_not_a_knot`.
    pub interpolation: &'static str,
    /// Nominal step of the record, minutes.
    #[serde(serialize_with = "crate::io::numfmt::ser_minutes")]
    pub nominal_step_min: f64,
    /// Low-pass cut-off period, minutes, when filtered.
    pub lowpass_cutoff_min: Option<f64>,
}

/// QC, filtering and interpolation set-up of one gauge record (pure apart from reading the
/// project's settings).
pub fn prepare_series(
    qc_spec: &QcSpec,
    interp_spec: &InterpolationSpec,
    g: &GaugeSpec,
    r: &GaugeRecord,
) -> PreparedSeries {
    let (mut series, qc) = if qc_spec.enabled {
        let q = run_qc(&r.times_s, &r.heights_m, &qc_spec.thresholds_for(g));
        let mut s = LevelSeries {
            max_gap_s: r.max_gap_s,
            ..Default::default()
        };
        for (i, f) in q.flags.iter().enumerate() {
            if f.usable() {
                s.times_s.push(r.times_s[i]);
                s.heights_m.push(r.heights_m[i]);
            } else if f.blocks_interpolation() {
                s.flagged_times_s.push(r.times_s[i]);
            }
        }
        s.flagged_times_s.sort_by(f64::total_cmp);
        (s, Some(q))
    } else {
        (r.increasing_series(), None)
    };
    let mut steps: Vec<f64> = series.times_s.windows(2).map(|w| w[1] - w[0]).collect();
    let nominal_step_s = if steps.is_empty() {
        0.0
    } else {
        let mid = steps.len() / 2;
        *steps.select_nth_unstable_by(mid, f64::total_cmp).1
    };
    if let Some(c) = g.lowpass_cutoff_min {
        let unbridged = series.unbridged();
        series.heights_m = crate::compute::lowpass::lowpass_zero_phase(
            &series.times_s,
            &series.heights_m,
            &unbridged,
            c,
        );
    }
    let cubic = match g.interpolation {
        InterpolationChoice::Linear => false,
        InterpolationChoice::Cubic => true,
        InterpolationChoice::Auto => nominal_step_s > interp_spec.cubic_above_step_min * 60.0,
    };
    if cubic {
        let unbridged = series.unbridged();
        series.spline_m_per_s2 = crate::compute::spline::spline_second_derivatives(
            &series.times_s,
            &series.heights_m,
            &unbridged,
            crate::compute::spline::SplineEnds::NotAKnot,
        );
    }
    PreparedSeries {
        series,
        qc,
        method: GaugeMethod {
            interpolation: if cubic {
                "cubic_spline_not_a_knot"
            } else {
                "linear"
            },
            nominal_step_min: nominal_step_s / 60.0,
            lowpass_cutoff_min: g.lowpass_cutoff_min,
        },
    }
}

/// Finds a ring of the polygon that crosses itself (or another ring), naming where.
pub fn self_intersection(mp: &geo::MultiPolygon<f64>) -> Option<String> {
    use geo::line_intersection::{line_intersection, LineIntersection};
    for p in &mp.0 {
        let rings: Vec<&geo::LineString<f64>> =
            std::iter::once(p.exterior()).chain(p.interiors()).collect();
        let segs: Vec<(usize, usize, geo::Line<f64>)> = rings
            .iter()
            .enumerate()
            .flat_map(|(r, ls)| ls.lines().enumerate().map(move |(k, l)| (r, k, l)))
            .collect();
        let len = |r: usize| rings[r].0.len().saturating_sub(1);
        for i in 0..segs.len() {
            for j in i + 1..segs.len() {
                let (ri, ki, a) = segs[i];
                let (rj, kj, b) = segs[j];
                if ri == rj {
                    let n = len(ri);
                    // Neighbouring edges share a vertex; that is not a crossing.
                    if kj == ki + 1 || (ki == 0 && kj + 1 == n) {
                        continue;
                    }
                }
                match line_intersection(a, b) {
                    Some(LineIntersection::SinglePoint { intersection, .. }) => {
                        let what = if ri == rj {
                            "crosses itself"
                        } else {
                            "touches or crosses another ring"
                        };
                        return Some(format!(
                            "a polygon ring {what} near [{:.6}, {:.6}] (edges {} and {})",
                            intersection.x,
                            intersection.y,
                            ki + 1,
                            kj + 1
                        ));
                    }
                    Some(LineIntersection::Collinear { .. }) => {
                        return Some(format!(
                            "a polygon ring runs back over itself (edges {} and {})",
                            ki + 1,
                            kj + 1
                        ));
                    }
                    None => {}
                }
            }
        }
    }
    None
}

/// The record's nominal step (the median interval between increasing times), minutes, when it
/// is longer than the gauge's `max_gap_min`: then interpolation could bridge no interval at all.
pub fn max_gap_below_step(g: &GaugeSpec, r: &GaugeRecord) -> Option<f64> {
    let s = r.increasing_series();
    let mut steps: Vec<f64> = s.times_s.windows(2).map(|w| w[1] - w[0]).collect();
    if steps.is_empty() {
        return None;
    }
    steps.sort_by(f64::total_cmp);
    let step_min = steps[steps.len() / 2] / 60.0;
    (step_min > g.max_gap_min).then_some(step_min)
}

/// Minutes for a message: whole when whole, else to 0.1 min.
fn clean_minutes(m: f64) -> String {
    if (m - m.round()).abs() < 1e-9 {
        format!("{}", m.round())
    } else {
        format!("{m:.1}")
    }
}

/// The record's level must agree with the stated mean level within this, metres, or more than
/// [`MEAN_LEVEL_WARN_M`] is a warning (see [`plausibility`]).
pub const MEAN_LEVEL_WARN_M: f64 = 0.5;

/// Beyond this many metres (or half the record's robust range, if larger) between the record's
/// median level and the stated mean level, the record is refused (see [`plausibility`]).
pub const MEAN_LEVEL_ERROR_M: f64 = 1.0;

/// The largest tidal range on Earth, about 16 m (from memory): a record's spread counts at most
/// this much in [`plausibility`]'s bounds, so that a record in the wrong unit (whose spread is
/// inflated with it) does not widen them.
pub const TIDAL_RANGE_MAX_M: f64 = 16.0;

/// One rule for "the record's level disagrees with the gauge's stated mean level".
///
/// The record's level is its median over the finite readings (robust to the few bad readings
/// quality control sets aside), its spread `R` the 5th to 95th percentile range. Let `d` be
/// |median − `mean_level_above_datum_m`|, with `R` counted at most [`TIDAL_RANGE_MAX_M`]:
///
/// * `d ≤ max(0.5 m, R / 4)`: agreement. A day's median lies within a few decimetres of mean
///   level (common practice).
/// * `d > max(1.0 m, R / 2)`: an error. A record of any length lies mostly within half its range
///   of mean level, and a surge rarely moves a day's level by a metre (from memory): a
///   disagreement this large is a units or datum mistake that would shift every depth.
/// * in between: a warning.
///
/// Both name the usual causes whose re-reading would agree (`d ≤ max(0.5 m, R'/4)` with the
/// re-read record): the heights in feet (or metres, when feet are declared), in centimetres or
/// millimetres, and `zero_above_datum_m` given with the wrong sign.
pub fn plausibility(g: &crate::io::project::GaugeSpec, r: &GaugeRecord) -> Option<Finding> {
    use crate::io::project::HeightUnit;
    let mut h: Vec<f64> = r
        .heights_m
        .iter()
        .copied()
        .filter(|x| x.is_finite())
        .collect();
    if h.len() < 10 {
        return None;
    }
    h.sort_by(f64::total_cmp);
    let pick = |p: f64| h[((h.len() - 1) as f64 * p).round() as usize];
    let median = pick(0.5);
    let spread = pick(0.95) - pick(0.05);
    let stated = g.mean_level_above_datum_m;
    let zero = g.zero_above_datum_m;
    let agrees = |level: f64, spread: f64| {
        (level - stated).abs() <= MEAN_LEVEL_WARN_M.max(0.25 * spread.min(TIDAL_RANGE_MAX_M))
    };
    if agrees(median, spread) {
        return None;
    }
    let off = (median - stated).abs();
    let scale = g.units.metres_per_unit();
    // The median reading in the declared unit, and the readings re-read other ways.
    let reading = (median - zero) / scale;
    let mut hints = Vec::new();
    let mut try_unit = |factor_m: f64, words: &str, fix: &str| {
        let level = reading * factor_m + zero;
        if agrees(level, spread / scale * factor_m) {
            hints.push(format!(
                "read as {words} it would be {level:.2} m: are the heights in {words}? ({fix})"
            ));
        }
    };
    if g.units != HeightUnit::Foot {
        try_unit(0.3048, "feet", "set units = \"ft\"");
    }
    if g.units != HeightUnit::Metre {
        try_unit(1.0, "metres", "set units = \"m\"");
    }
    try_unit(0.01, "centimetres", "convert the record to metres");
    try_unit(0.001, "millimetres", "convert the record to metres");
    if zero != 0.0 {
        let level = median - 2.0 * zero;
        if agrees(level, spread) {
            hints.push(format!(
                "with zero_above_datum_m = {:.2} it would be {level:.2} m: is the gauge zero's sign wrong? (the zero's height above chart datum is positive when the zero lies above it)",
                -zero
            ));
        }
    }
    let at = Position::file(&g.record).field(g.height_column.clone());
    let msg = format!(
        "the record's median level is {median:.2} m above chart datum, but gauge '{}' states mean_level_above_datum_m = {stated:.2} m ({off:.2} m apart)",
        g.id
    );
    let hint = if hints.is_empty() {
        ": check units, zero_above_datum_m and the stated mean".to_string()
    } else {
        format!("; {}", hints.join("; "))
    };
    let bound = MEAN_LEVEL_ERROR_M.max(0.5 * spread.min(TIDAL_RANGE_MAX_M));
    Some(if off > bound {
        Finding::error(
            at,
            format!("{msg}, more than the {bound:.2} m a record can lie from its mean level{hint}"),
        )
    } else {
        Finding::warning(at, format!("{msg}{hint}"))
    })
}

/// Why the zoning cannot be placed in a soundings group's CRS.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum LocatorError {
    /// The CRS is unknown, or PROJ has no transformation into it.
    #[error(transparent)]
    Crs(#[from] CrsError),
    /// A zone's outline does not transform.
    #[error("zone '{zone}': {error}")]
    Zone {
        /// The zone id.
        zone: String,
        /// What failed.
        error: CrsError,
    },
}

/// Builds the zone locator for one CRS (the zoning transformed into it).
pub fn locator_for_crs(zoning: &ZoningSpec, crs: &str) -> Result<ZoneLocator, LocatorError> {
    let t = Transformer::new("EPSG:4326", crs)?;
    let polys = zoning
        .zones
        .iter()
        .map(|z| {
            t.polygon_from_lonlat(&z.polygon_lonlat)
                .map_err(|error| LocatorError::Zone {
                    zone: z.id.clone(),
                    error,
                })
        })
        .collect::<Result<Vec<_>, _>>()?;
    Ok(ZoneLocator::new(polys))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::zoning_geojson::parse_zoning;

    fn zoning(coords: &str) -> ZoningSpec {
        let text = format!(
            r#"{{"type":"FeatureCollection","features":[{{"type":"Feature","properties":{{"zone":"A","gauge":"g","time_corrector_min":0,"range_ratio":1}},"geometry":{{"type":"Polygon","coordinates":[{coords}]}}}}]}}"#
        );
        parse_zoning(text.as_bytes(), std::path::Path::new("z.geojson")).unwrap()
    }

    /// A 2-day record every 30 min of levels `2.0 + sin(2π t / 12 h)` above chart datum (median 2.0
    /// m, robust range about 2 m), read back through a gauge declared with `units` and `zero`:
    /// `readings` turns each true level into what the file holds.
    fn record_of(
        units: crate::io::project::HeightUnit,
        zero: f64,
        readings: impl Fn(f64) -> f64,
    ) -> (GaugeSpec, GaugeRecord) {
        let mut g = GaugeSpec::for_record(std::path::Path::new("g.csv"), units, zero);
        g.id = "g".into();
        g.mean_level_above_datum_m = 2.0;
        let mut r = GaugeRecord::default();
        for k in 0..96 {
            let level = 2.0 + (k as f64 * std::f64::consts::TAU / 24.0).sin();
            r.times_s.push(k as f64 * 1800.0);
            r.heights_m
                .push(readings(level) * units.metres_per_unit() + zero);
            r.lines.push(k + 2);
        }
        (g, r)
    }

    /// One rule, its two bounds and the hints, each case worked by hand from `record_of`.
    #[test]
    fn the_record_level_and_the_stated_mean_level_follow_one_rule() {
        use crate::io::project::HeightUnit;
        // Readings above a zero 0.8 m below chart datum, read right: agreement.
        let (g, r) = record_of(HeightUnit::Metre, -0.8, |l| l + 0.8);
        assert!(plausibility(&g, &r).is_none());
        // A NaN and a 1e308 reading move the median by nothing.
        let (g, mut r) = record_of(HeightUnit::Metre, -0.8, |l| l + 0.8);
        r.heights_m[5] = f64::NAN;
        r.heights_m[6] = 1e308;
        assert!(plausibility(&g, &r).is_none());
        // The zero given as +3.25 where it is −3.25: levels come out 6.5 m high (median near
        // 8.5 m against 2.0 m), an error; with −3.25 they fit.
        let (g, r) = record_of(HeightUnit::Metre, 3.25, |l| l + 3.25);
        let f = plausibility(&g, &r).unwrap();
        assert_eq!(f.severity, crate::io::error::Severity::Error);
        let m = f.message.to_string();
        assert!(
            m.contains("with zero_above_datum_m = -3.25 it would be 2.0"),
            "{m}"
        );
        assert!(!m.contains("feet") && !m.contains("millimetres"), "{m}");
        // Readings in millimetres above a zero 0.5 m below chart datum, declared metres.
        let (g, r) = record_of(HeightUnit::Metre, -0.5, |l| (l + 0.5) * 1000.0);
        let f = plausibility(&g, &r).unwrap();
        let m = f.message.to_string();
        assert_eq!(f.severity, crate::io::error::Severity::Error);
        assert!(m.contains("read as millimetres it would be 2.0"), "{m}");
        assert!(!m.contains("centimetres") && !m.contains("feet"), "{m}");
        // Readings in feet (0.3048 m) declared metres, zero at chart datum: levels 3.28 × too
        // large (median 6.56 m, 4.56 m off).
        let (g, r) = record_of(HeightUnit::Metre, 0.0, |l| l / 0.3048);
        let m = plausibility(&g, &r).unwrap().message.to_string();
        assert!(m.contains("read as feet it would be 2.0"), "{m}");
        assert!(m.contains("set units = \"ft\""), "{m}");
        // 0.7 m off with a 2 m range: beyond max(0.5, 2/4) = 0.5 m, within max(1.0, 2/2) =
        // 1.0 m: a warning, and no re-reading fits.
        let (g, r) = record_of(HeightUnit::Metre, -0.8, |l| l + 0.8 + 0.7);
        let f = plausibility(&g, &r).unwrap();
        assert_eq!(f.severity, crate::io::error::Severity::Warning);
        assert!(
            f.message.to_string().contains("check units"),
            "{}",
            f.message
        );
    }

    #[test]
    fn a_zoning_written_latitude_first_is_recognised_by_the_gauges() {
        // A 0.1° square at 4..4.1° E, 52..52.1° N; a gauge at 4.05° E, 52.12° N (0.02° north of
        // it, within the 0.1° margin).
        let right = zoning("[[4,52],[4.1,52],[4.1,52.1],[4,52.1],[4,52]]");
        let swapped = zoning("[[52,4],[52,4.1],[52.1,4.1],[52.1,4],[52,4]]");
        let gauge = [(4.05, 52.12)];
        assert_eq!(zoning_looks_swapped(&right, &gauge), None);
        // The swapped box is 52..52.1 by 4..4.1: the gauge lies 52 − 4.05 = 47.95° west and
        // 52.12 − 4.1 = 48.02° north of it.
        let d = zoning_looks_swapped(&swapped, &gauge).unwrap();
        assert!((d - 47.95f64.hypot(48.02)).abs() < 1e-9, "{d}");
        // A gauge far from both boxes says nothing about the axes.
        assert_eq!(
            zoning_looks_swapped(&swapped, &[(4.05, 52.12), (-60.0, -10.0)]),
            None
        );
    }
}
