//! Quality assessment of reduced soundings against survey orders: accumulators that can be
//! filled in parallel and merged, and the summary a reviewer reads.
//!
//! Owns: [`QaAccumulator`] (per-order counts overall, per zone and per line; a histogram and a
//! percentile sketch of U95/allowed; budget shares of each component of u_tvu²) and the group
//! summaries ([`GroupSummary`]) that the QA report is made of.
//!
//! A survey (zone, line) *meets* an order when the share of its soundings whose U95 TVU is within
//! the order's allowed TVU is at least the acceptance share (95 % by default: common practice).
//! The U95/allowed percentiles come from [`QuantileSketch`]es: never below the exact
//! percentile, at most [`RELATIVE_ERROR`](super::quantile::RELATIVE_ERROR) above it. The budget
//! shares' percentiles are exact at the report's [`SHARE_DECIMALS`] (`ShareCounts`).

use std::collections::{BTreeMap, BTreeSet, HashMap};

use serde::Serialize;

use super::quantile::QuantileSketch;
use super::reduce::StatusCounts;
use super::uncertainty::SurveyOrder;

/// Decimals of a share (0–1) in the report: 0.001, i.e. 0.1 %.
pub const SHARE_DECIMALS: i32 = 3;
/// Decimals of a U95/allowed ratio in the report.
pub const RATIO_DECIMALS: i32 = 3;
/// Decimals of metres in the report (0.1 mm).
pub const METRE_DECIMALS: i32 = 4;

/// `x` rounded to `decimals`, to nearest (half away from zero): the double nearest that decimal,
/// which serialises as that short decimal.
pub fn round_nearest(x: f64, decimals: i32) -> f64 {
    let s = 10f64.powi(decimals);
    (x * s).round() / s
}

/// The smallest multiple of `10^-decimals` that is not below `x` (as doubles compare).
pub fn round_up(x: f64, decimals: i32) -> f64 {
    let s = 10f64.powi(decimals);
    let k = (x * s).round();
    if k / s < x {
        (k + 1.0) / s
    } else {
        k / s
    }
}

/// `within / n` rounded down to [`SHARE_DECIMALS`], in units of the last decimal, computed in
/// integers: exact, and 1000 (1.0) only when every sounding is within.
fn share_units(within: u64, n: u64) -> u64 {
    if n == 0 {
        return 0;
    }
    let unit = 10u128.pow(SHARE_DECIMALS as u32);
    (u128::from(within) * unit / u128::from(n)) as u64
}

fn from_share_units(k: u64) -> f64 {
    k as f64 / 10f64.powi(SHARE_DECIMALS)
}

/// Components of u_tvu², in order.
pub const BUDGET_COMPONENTS: [&str; 6] = ["sounding", "gauge", "datum", "range", "timing", "zone"];

/// U95/allowed histogram bins per unit of the ratio.
const RATIO_BINS_PER_UNIT: f64 = 20.0;
/// Width of a U95/allowed histogram bin (0.05).
pub const RATIO_BIN_WIDTH: f64 = 1.0 / RATIO_BINS_PER_UNIT;
/// Number of U95/allowed bins (0 to 3; the last also holds everything above).
pub const RATIO_BINS: usize = 60;

/// The histogram bin of a U95/allowed ratio. Bins are closed on the right, `(k·w, (k+1)·w]`
/// (bin 0 also holds 0), so a ratio of exactly 1, which is within the order, falls left of the
/// limit with the other soundings within.
pub fn ratio_bin(ratio: f64) -> usize {
    let k = (ratio * RATIO_BINS_PER_UNIT).ceil() - 1.0;
    if k > 0.0 {
        (k as usize).min(RATIO_BINS - 1)
    } else {
        0
    }
}

/// Counts for one group of soundings (the survey, a zone or a line).
#[derive(Debug, Clone)]
pub struct GroupQa {
    /// Soundings assessed.
    pub n: u64,
    /// Soundings within each order's limit (orders in the accumulator's order).
    pub within: Vec<u64>,
    /// Histogram of U95/allowed for the chosen order (for the report's plot).
    pub ratio_hist: [u64; RATIO_BINS],
    /// Percentile sketch of U95/allowed for the chosen order.
    pub ratio_sketch: QuantileSketch,
    /// The largest U95/allowed for the chosen order (`None`: nothing judged).
    pub max_ratio: Option<f64>,
}

impl GroupQa {
    /// An empty group for `n_orders` orders.
    pub fn new(n_orders: usize) -> Self {
        GroupQa {
            n: 0,
            within: vec![0; n_orders],
            ratio_hist: [0; RATIO_BINS],
            ratio_sketch: QuantileSketch::new(),
            max_ratio: None,
        }
    }
    fn merge(&mut self, o: &GroupQa) {
        self.max_ratio = max_opt(self.max_ratio, o.max_ratio);
        self.n += o.n;
        for (a, b) in self.within.iter_mut().zip(&o.within) {
            *a += b;
        }
        for (a, b) in self.ratio_hist.iter_mut().zip(&o.ratio_hist) {
            *a += b;
        }
        self.ratio_sketch.merge(&o.ratio_sketch);
    }
}

fn max_opt(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    match (a, b) {
        (Some(x), Some(y)) => Some(x.max(y)),
        (x, None) => x,
        (None, y) => y,
    }
}

/// Every sounding of a group by status (judged or not), and its drying heights.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct StatusTally {
    /// Soundings per status, in `SoundingStatus::ALL` order.
    pub by_status: StatusCounts,
    /// Reduced soundings (`reduced` or `gap_filled`) whose reduced depth is negative: drying
    /// heights, above chart datum.
    pub drying: u64,
}

impl StatusTally {
    fn merge(&mut self, o: &StatusTally) {
        self.by_status.add(&o.by_status);
        self.drying += o.drying;
    }
}

/// What a survey line (the unit a crew re-runs) adds to its QA counts: where and when it ran.
#[derive(Debug, Clone)]
pub struct LineQa {
    /// The judged soundings' counts.
    pub qa: GroupQa,
    /// Their uncertainty budget.
    pub budget: BudgetQa,
    /// Every sounding of the line by status.
    pub tally: StatusTally,
    /// First and last time of the line's readable soundings, UTC seconds.
    pub span_s: Option<(f64, f64)>,
    /// Zones (indices) its soundings lie in.
    pub zones: BTreeSet<usize>,
    /// Soundings files it comes from (file names).
    pub files: BTreeSet<String>,
}

impl LineQa {
    fn new(n_orders: usize) -> Self {
        LineQa {
            qa: GroupQa::new(n_orders),
            budget: BudgetQa::without_percentiles(),
            tally: StatusTally::default(),
            span_s: None,
            zones: BTreeSet::new(),
            files: BTreeSet::new(),
        }
    }
    fn merge(&mut self, o: &LineQa) {
        self.qa.merge(&o.qa);
        self.budget.merge(&o.budget);
        self.tally.merge(&o.tally);
        self.span_s = match (self.span_s, o.span_s) {
            (Some(a), Some(b)) => Some((a.0.min(b.0), a.1.max(b.1))),
            (a, None) => a,
            (None, b) => b,
        };
        self.zones.extend(o.zones.iter().copied());
        self.files.extend(o.files.iter().cloned());
    }
}

/// Shares are summed as integers in units of 1e-9, so totals do not depend on the order in which
/// soundings (chunks, files, threads) are added.
const SHARE_UNITS: f64 = 1e9;

/// Budget shares for one group.
#[derive(Debug, Clone)]
pub struct BudgetQa {
    n: u64,
    share_sum: [u64; 6],
    /// Counts of each component's share as the report writes its percentile (rounded up to
    /// [`SHARE_DECIMALS`]): kept for the survey and zones, not for lines
    /// ([`BudgetQa::without_percentiles`]), whose budget gives means and metres only (a survey
    /// of thousands of lines would otherwise hold six histograms per line).
    share_counts: Option<ShareCounts>,
    /// Sum of each component's variance, in units of [`VARIANCE_UNIT_M2`] (integers, so that
    /// the total does not depend on the order of adding).
    var_sum: [u128; 6],
}

/// Share bins: a share (0–1) rounded up to [`SHARE_DECIMALS`] is one of `0, 0.001, …, 1`.
const SHARE_BINS: usize = 1001;

/// Each budget component's shares, counted by their value rounded up to [`SHARE_DECIMALS`]
/// (bin `k` holds the shares `s` with `round_up(s) = k / 1000`). Rounding up never lowers a
/// value and keeps the order of any two, so the nearest-rank percentile of the rounded shares
/// is the rounded exact percentile: the report's p95 share is exact, not an estimate, and
/// adding a share is one increment. The bins are allocated at the first share (a chunk's
/// accumulator holds them only for the zones it met).
#[derive(Debug, Clone, Default)]
struct ShareCounts(Option<Box<[[u64; SHARE_BINS]; 6]>>);

impl ShareCounts {
    /// The bin of `share`: its value rounded up to [`SHARE_DECIMALS`], in units of the last
    /// decimal (by [`round_up`]'s rule), held to 0–1000.
    fn bin(share: f64) -> usize {
        let k = (round_up(share, SHARE_DECIMALS) * 10f64.powi(SHARE_DECIMALS)).round();
        if k > 0.0 {
            (k as usize).min(SHARE_BINS - 1)
        } else {
            0
        }
    }
    fn bins(&mut self) -> &mut [[u64; SHARE_BINS]; 6] {
        self.0.get_or_insert_with(|| Box::new([[0; SHARE_BINS]; 6]))
    }
    fn add(&mut self, shares: &[f64; 6]) {
        let bins = self.bins();
        for (b, s) in bins.iter_mut().zip(shares) {
            b[Self::bin(*s)] += 1;
        }
    }
    fn merge(&mut self, o: &ShareCounts) {
        if let Some(ob) = &o.0 {
            for (a, b) in self.bins().iter_mut().zip(ob.iter()) {
                for (x, y) in a.iter_mut().zip(b.iter()) {
                    *x += y;
                }
            }
        }
    }
    /// Component `k`'s `p`-th percentile (nearest rank), rounded up to [`SHARE_DECIMALS`];
    /// `None` when no share was counted.
    fn percentile(&self, k: usize, p: u32) -> Option<f64> {
        let bins = &self.0.as_ref()?[k];
        let n: u64 = bins.iter().sum();
        if n == 0 {
            return None;
        }
        let rank = ((u128::from(p.min(100)) * u128::from(n)).div_ceil(100)).max(1) as u64;
        let mut cum = 0;
        for (i, c) in bins.iter().enumerate() {
            cum += c;
            if cum >= rank {
                return Some(i as f64 / 10f64.powi(SHARE_DECIMALS));
            }
        }
        None
    }
}

/// Unit of the summed variances: 1e-12 m² (a standard uncertainty of 1 µm).
const VARIANCE_UNIT_M2: f64 = 1e-12;

/// One sounding's budget as the sums take it: each component's variance in
/// [`VARIANCE_UNIT_M2`] and its share of u_tvu² in units of 1e-9, both to nearest, and the
/// shares themselves (for the percentile sketches).
struct BudgetUnits {
    var: [u64; 6],
    share: [u64; 6],
    shares: [f64; 6],
}

impl BudgetUnits {
    /// `None` for a sounding with no variance at all. Rounded to nearest by adding a half and
    /// truncating (every value is non-negative); a variance beyond the u64 range (more than
    /// 1.8e7 m², beyond any plausible depth uncertainty) saturates.
    fn of(var_m2: &[f64; 6]) -> Option<BudgetUnits> {
        let total: f64 = var_m2.iter().sum();
        if total.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
            return None;
        }
        let mut u = BudgetUnits {
            var: [0; 6],
            share: [0; 6],
            shares: [0.0; 6],
        };
        for (k, v) in var_m2.iter().enumerate() {
            u.var[k] = (v / VARIANCE_UNIT_M2 + 0.5) as u64;
            let s = v / total;
            u.shares[k] = s;
            u.share[k] = (s * SHARE_UNITS + 0.5) as u64;
        }
        Some(u)
    }
}

impl Default for BudgetQa {
    fn default() -> Self {
        BudgetQa {
            n: 0,
            share_sum: [0; 6],
            share_counts: Some(ShareCounts::default()),
            var_sum: [0; 6],
        }
    }
}

impl BudgetQa {
    /// A budget that keeps no percentile of the shares (a line's).
    pub fn without_percentiles() -> Self {
        BudgetQa {
            share_counts: None,
            ..Default::default()
        }
    }

    #[cfg(test)]
    fn add(&mut self, var_m2: &[f64; 6]) {
        if let Some(u) = BudgetUnits::of(var_m2) {
            self.add_units(&u);
        }
    }

    /// Adds one sounding's budget, in the units [`BudgetUnits::of`] made of it (once for the
    /// zone and the line).
    fn add_units(&mut self, u: &BudgetUnits) {
        self.n += 1;
        for k in 0..6 {
            // Saturating: a sum that reaches the top stays there, never wraps to a small one.
            self.var_sum[k] = self.var_sum[k].saturating_add(u128::from(u.var[k]));
            self.share_sum[k] += u.share[k];
        }
        if let Some(c) = self.share_counts.as_mut() {
            c.add(&u.shares);
        }
    }
    fn merge(&mut self, o: &BudgetQa) {
        self.n += o.n;
        for k in 0..6 {
            self.var_sum[k] = self.var_sum[k].saturating_add(o.var_sum[k]);
            self.share_sum[k] += o.share_sum[k];
        }
        if let (Some(a), Some(b)) = (self.share_counts.as_mut(), o.share_counts.as_ref()) {
            a.merge(b);
        }
    }
    fn mean_share(&self, k: usize) -> f64 {
        if self.n > 0 {
            self.share_sum[k] as f64 / SHARE_UNITS / self.n as f64
        } else {
            0.0
        }
    }
    /// Root mean square over the soundings of component `k`'s standard uncertainty, metres.
    fn rms_m(&self, k: usize) -> f64 {
        if self.n > 0 {
            (self.var_sum[k] as f64 * VARIANCE_UNIT_M2 / self.n as f64).sqrt()
        } else {
            0.0
        }
    }
    fn summary(&self) -> BudgetSummary {
        let components: Vec<ComponentShare> = BUDGET_COMPONENTS
            .iter()
            .enumerate()
            .map(|(k, name)| ComponentShare {
                component: name,
                mean_share: round_nearest(self.mean_share(k), SHARE_DECIMALS),
                p95_share: self
                    .share_counts
                    .as_ref()
                    .map(|c| c.percentile(k, 95).unwrap_or(0.0)),
                rms_m: round_nearest(self.rms_m(k), METRE_DECIMALS),
            })
            .collect();
        // The largest mean share before rounding (two may read the same after it).
        let dominant = (0..6)
            .filter(|_| self.n > 0)
            .max_by(|a, b| self.mean_share(*a).total_cmp(&self.mean_share(*b)))
            .map(|k| BUDGET_COMPONENTS[k])
            .unwrap_or("none");
        let total_var: f64 = (0..6).map(|k| self.rms_m(k).powi(2)).sum();
        BudgetSummary {
            soundings: self.n,
            rms_u_tvu_m: round_nearest(total_var.sqrt(), METRE_DECIMALS),
            components,
            dominant_component: dominant,
        }
    }
}

/// One sounding's place on the QA map.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MapSample {
    /// Index of the soundings group (for its CRS).
    pub group: usize,
    /// Easting/longitude in the group's CRS.
    pub x: f64,
    /// Northing/latitude in the group's CRS.
    pub y: f64,
    /// U95 TVU / allowed TVU for the chosen order (a judged sounding), or the status index
    /// (`SoundingStatus::index`) of a sounding not reduced.
    pub value: f64,
}

impl MapSample {
    /// Which of two samples a map cell keeps: the larger value, then the smaller position (so
    /// that the choice does not depend on the order of adding).
    fn worse(self, o: MapSample) -> MapSample {
        let key = |m: &MapSample| (m.value, -m.x, -m.y);
        if key(&o).partial_cmp(&key(&self)) == Some(std::cmp::Ordering::Greater) {
            o
        } else {
            self
        }
    }
}

/// What the QA map keeps of the soundings in one map cell: the judged sounding with the worst
/// U95/allowed, a drying height and a sounding not reduced (each when there is one), so that
/// thinning never hides a failing, drying or unreduced sounding.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct MapCell {
    /// The judged sounding with the largest U95/allowed.
    pub worst: Option<MapSample>,
    /// A drying height (reduced depth below zero), the one with the largest U95/allowed.
    pub drying: Option<MapSample>,
    /// A sounding not reduced (the one of the highest status index).
    pub unreduced: Option<MapSample>,
}

impl MapCell {
    fn merge(&mut self, o: &MapCell) {
        let pick = |a: Option<MapSample>, b: Option<MapSample>| match (a, b) {
            (Some(x), Some(y)) => Some(x.worse(y)),
            (x, None) => x,
            (None, y) => y,
        };
        self.worst = pick(self.worst, o.worst);
        self.drying = pick(self.drying, o.drying);
        self.unreduced = pick(self.unreduced, o.unreduced);
    }
}

/// Map cells across the longer side of the zoning's extent: one cell about 3 px of the
/// report's map.
pub const MAP_CELLS_ACROSS: f64 = 200.0;

/// The key of a map cell: group, column, row.
pub type CellKey = (usize, i64, i64);

/// The key of the map cell of `(x, y)` of group `group`, for cells `cell` wide (group CRS
/// units).
pub fn cell_key(group: usize, x: f64, y: f64, cell: f64) -> CellKey {
    (group, (x / cell).floor() as i64, (y / cell).floor() as i64)
}

/// One sounding as the QA counts take it.
#[derive(Debug, Clone, Copy)]
pub struct QaRow<'a> {
    /// Its zone, when it lies in one.
    pub zone: Option<usize>,
    /// Its survey line (the file name when the file has no line column).
    pub line: &'a str,
    /// Its time, UTC seconds, when it could be read.
    pub t_s: Option<f64>,
    /// Its status (`SoundingStatus::index`).
    pub status: usize,
    /// Its position in its group's CRS, with the group and the map cell width there, when it
    /// could be read.
    pub at: Option<(usize, f64, f64, f64)>,
    /// Whether its reduced depth is negative (a drying height).
    pub drying: bool,
    /// The judgement, for a reduced sounding with an uncertainty.
    pub judged: Option<Judged<'a>>,
}

/// A judged sounding: within each order or not, U95/allowed for the chosen order, and the
/// variance components of u_tvu² (m², [`BUDGET_COMPONENTS`] order).
#[derive(Debug, Clone, Copy)]
pub struct Judged<'a> {
    /// Within each order's limit (orders in the accumulator's order).
    pub within: &'a [bool],
    /// U95/allowed for the chosen order.
    pub ratio: f64,
    /// Variance components, m².
    pub var_m2: [f64; 6],
}

/// QA counts, filled per chunk and merged.
#[derive(Debug, Clone)]
pub struct QaAccumulator {
    /// Number of orders assessed.
    pub n_orders: usize,
    /// Index of the chosen order.
    pub chosen: usize,
    /// The whole survey (filled by [`QaAccumulator::settle`]).
    pub overall: GroupQa,
    /// Budget shares over the whole survey (filled by [`QaAccumulator::settle`]).
    pub overall_budget: BudgetQa,
    /// Every sounding of the survey by status (filled by [`QaAccumulator::settle`]).
    pub overall_tally: StatusTally,
    /// Per zone (index = zone index).
    pub zones: Vec<(GroupQa, BudgetQa, StatusTally)>,
    /// Soundings in no zone (outside the zoning, or unreadable).
    pub no_zone: StatusTally,
    /// Per survey line.
    pub lines: BTreeMap<String, LineQa>,
    /// The map's cells.
    pub cells: HashMap<CellKey, MapCell>,
    /// The cell of the last soundings added, not yet in `cells`: consecutive soundings mostly
    /// share a cell, so most are merged here without a hash lookup.
    pending: Option<(CellKey, MapCell)>,
}

impl QaAccumulator {
    /// An empty accumulator.
    pub fn new(n_orders: usize, chosen: usize, n_zones: usize) -> Self {
        QaAccumulator {
            n_orders,
            chosen,
            overall: GroupQa::new(n_orders),
            overall_budget: BudgetQa::default(),
            overall_tally: StatusTally::default(),
            zones: vec![
                (
                    GroupQa::new(n_orders),
                    BudgetQa::default(),
                    StatusTally::default()
                );
                n_zones
            ],
            no_zone: StatusTally::default(),
            lines: BTreeMap::new(),
            cells: HashMap::new(),
            pending: None,
        }
    }

    /// Moves the pending cell into `cells`.
    fn flush(&mut self) {
        if let Some((k, c)) = self.pending.take() {
            self.cells.entry(k).or_default().merge(&c);
        }
    }

    /// Sums the zones into the survey totals (every judged sounding lies in exactly one zone);
    /// call before reading `overall`.
    pub fn settle(&mut self) {
        let mut overall = GroupQa::new(self.n_orders);
        let mut budget = BudgetQa::default();
        let mut tally = self.no_zone;
        for (g, b, t) in &self.zones {
            overall.merge(g);
            budget.merge(b);
            tally.merge(t);
        }
        self.overall = overall;
        self.overall_budget = budget;
        self.overall_tally = tally;
    }

    /// Adds one sounding, whatever its status.
    pub fn add(&mut self, row: &QaRow) {
        let line = match self.lines.get_mut(row.line) {
            Some(l) => l,
            None => self
                .lines
                .entry(row.line.to_string())
                .or_insert_with(|| LineQa::new(self.n_orders)),
        };
        let drying = u64::from(row.drying);
        line.tally.by_status.0[row.status] += 1;
        line.tally.drying += drying;
        if let Some(t) = row.t_s {
            line.span_s = Some(match line.span_s {
                None => (t, t),
                Some((a, b)) => (a.min(t), b.max(t)),
            });
        }
        let zone_tally = match row.zone {
            Some(z) => {
                line.zones.insert(z);
                &mut self.zones[z].2
            }
            None => &mut self.no_zone,
        };
        zone_tally.by_status.0[row.status] += 1;
        zone_tally.drying += drying;
        let mut sample = row.at.map(|(group, x, y, cell)| {
            (
                cell_key(group, x, y, cell),
                MapSample {
                    group,
                    x,
                    y,
                    value: row.status as f64,
                },
            )
        });
        if let (Some(j), Some(z)) = (row.judged, row.zone) {
            let bin = ratio_bin(j.ratio);
            let bump = |g: &mut GroupQa| {
                g.n += 1;
                for (w, yes) in g.within.iter_mut().zip(j.within) {
                    *w += u64::from(*yes);
                }
                g.ratio_hist[bin] += 1;
                g.ratio_sketch.add(j.ratio);
                g.max_ratio = max_opt(g.max_ratio, Some(j.ratio));
            };
            bump(&mut self.zones[z].0);
            bump(&mut line.qa);
            if let Some(u) = BudgetUnits::of(&j.var_m2) {
                self.zones[z].1.add_units(&u);
                line.budget.add_units(&u);
            }
            if let Some((_, s)) = sample.as_mut() {
                s.value = j.ratio;
            }
        }
        if let Some((key, s)) = sample {
            let mut c = MapCell::default();
            match (row.judged.is_some(), row.drying) {
                (true, true) => {
                    c.worst = Some(s);
                    c.drying = Some(s);
                }
                (true, false) => c.worst = Some(s),
                (false, true) => c.drying = Some(s),
                (false, false) if row.status >= FIRST_UNREDUCED_STATUS => c.unreduced = Some(s),
                (false, false) => {}
            }
            match self.pending.as_mut() {
                Some((k, p)) if *k == key => p.merge(&c),
                _ => {
                    self.flush();
                    self.pending = Some((key, c));
                }
            }
        }
    }

    /// Records that every line seen so far has soundings in file `name`.
    pub fn set_file(&mut self, name: &str) {
        for l in self.lines.values_mut() {
            if !l.files.contains(name) {
                l.files.insert(name.to_string());
            }
        }
    }

    /// Merges another accumulator into this one.
    pub fn merge(&mut self, mut o: QaAccumulator) {
        self.flush();
        o.flush();
        for (a, b) in self.zones.iter_mut().zip(&o.zones) {
            a.0.merge(&b.0);
            a.1.merge(&b.1);
            a.2.merge(&b.2);
        }
        self.no_zone.merge(&o.no_zone);
        for (k, g) in o.lines {
            match self.lines.get_mut(&k) {
                Some(a) => a.merge(&g),
                None => {
                    self.lines.insert(k, g);
                }
            }
        }
        for (k, c) in o.cells {
            self.cells.entry(k).or_default().merge(&c);
        }
    }

    /// The map's cells in a fixed order (by key).
    pub fn sorted_cells(&self) -> Vec<(CellKey, MapCell)> {
        let mut v: Vec<(CellKey, MapCell)> = self.cells.iter().map(|(k, c)| (*k, *c)).collect();
        // The pending cell merges into its entry, or is one more.
        if let Some((k, c)) = &self.pending {
            match v.iter_mut().find(|(key, _)| key == k) {
                Some((_, cell)) => cell.merge(c),
                None => v.push((*k, *c)),
            }
        }
        v.sort_by_key(|(k, _)| *k);
        v
    }
}

/// Status indices from this one on are soundings not reduced (`SoundingStatus::ALL` order:
/// reduced, gap_filled, then the four kinds not reduced).
pub const FIRST_UNREDUCED_STATUS: usize = 2;

/// Share within one order.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct OrderShare {
    /// Order name.
    pub order: String,
    /// Soundings whose U95 TVU is within the order's limit (as the rows' `within_order` judges
    /// it for the chosen order).
    pub soundings_within: u64,
    /// Share of soundings whose U95 TVU is within the order's limit (0–1), rounded down to
    /// [`SHARE_DECIMALS`] from the counts.
    pub share_within: f64,
    /// Whether the share, as written, reaches the acceptance share.
    pub met: bool,
}

/// One component's share of u_tvu².
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ComponentShare {
    /// Component name.
    pub component: &'static str,
    /// Mean over soundings of the component's share of u_tvu² (0–1, to nearest
    /// [`SHARE_DECIMALS`]).
    pub mean_share: f64,
    /// 95th percentile over soundings of that share (rounded up to [`SHARE_DECIMALS`]); `None`
    /// for a line, whose budget keeps no percentiles.
    pub p95_share: Option<f64>,
    /// Root mean square over soundings of the component's standard uncertainty, metres (to
    /// nearest [`METRE_DECIMALS`]): the budget in metres.
    pub rms_m: f64,
}

/// The uncertainty budget of a group.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct BudgetSummary {
    /// Soundings in the budget.
    pub soundings: u64,
    /// Root mean square of u_tvu over the soundings, metres (the components' `rms_m` in
    /// quadrature, before rounding).
    pub rms_u_tvu_m: f64,
    /// Components, in [`BUDGET_COMPONENTS`] order.
    pub components: Vec<ComponentShare>,
    /// The component with the largest mean share.
    pub dominant_component: &'static str,
}

/// The assessment of one group against every order.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct GroupSummary {
    /// Zone or line id (`"survey"` for the whole survey).
    pub id: String,
    /// Soundings assessed.
    pub soundings: u64,
    /// Per order.
    pub orders: Vec<OrderShare>,
    /// The strictest built-in order met at the acceptance share, if any.
    pub strictest_order_met: Option<String>,
    /// Share within the chosen order (as [`OrderShare::share_within`]).
    pub share_within_chosen: f64,
    /// 95th percentile of U95/allowed for the chosen order, rounded up to [`RATIO_DECIMALS`]
    /// (above 1: exceeds).
    pub p95_ratio_chosen: f64,
    /// Whether the chosen order is met.
    pub meets_chosen: bool,
    /// Acceptance share minus share within the chosen order, when it fails (0–1; the
    /// acceptance share rounded up to [`SHARE_DECIMALS`]).
    pub shortfall: Option<f64>,
    /// The uncertainty budget.
    pub budget: Option<BudgetSummary>,
    /// Every sounding of the group, whatever its status.
    pub all_soundings: u64,
    /// Every sounding of the group by status.
    pub by_status: StatusCounts,
    /// Soundings within the chosen order as a share of `all_soundings` (0–1, rounded down to
    /// [`SHARE_DECIMALS`]): those not reduced count as not within.
    pub share_within_of_all: f64,
    /// Drying heights: reduced soundings whose reduced depth is negative (above chart datum).
    pub drying_heights: u64,
    /// The largest U95/allowed for the chosen order, rounded up to [`RATIO_DECIMALS`]; `None`
    /// when nothing was judged.
    pub max_ratio_chosen: Option<f64>,
    /// The uncertainty inputs this group's tides were made with that fell back to the project's
    /// defaults (a zone: its own and its gauges'; a line: those of the zones it crosses; the
    /// survey: all). Filled by the caller.
    pub defaulted_inputs: Vec<String>,
}

/// Summarises a group: its judged soundings `g`, their budget, and every sounding's status.
#[allow(clippy::too_many_arguments)]
pub fn summarise_group(
    id: &str,
    g: &GroupQa,
    budget: Option<&BudgetQa>,
    tally: &StatusTally,
    orders: &[SurveyOrder],
    n_builtin: usize,
    chosen: usize,
    acceptance: f64,
) -> GroupSummary {
    // Every verdict is made on the share as written, so that no reader sees "95.0 %" beside
    // "not met" at an acceptance of 95 %.
    let met = |k: u64| g.n > 0 && from_share_units(k) >= acceptance;
    let ords: Vec<OrderShare> = orders
        .iter()
        .enumerate()
        .map(|(k, o)| {
            let units = share_units(g.within[k], g.n);
            OrderShare {
                order: o.name.clone(),
                soundings_within: g.within[k],
                share_within: from_share_units(units),
                met: met(units),
            }
        })
        .collect();
    let strictest = ords[..n_builtin]
        .iter()
        .find(|o| o.met)
        .map(|o| o.order.clone());
    let chosen_units = share_units(g.within[chosen], g.n);
    let meets = met(chosen_units);
    let acceptance_units =
        (round_up(acceptance, SHARE_DECIMALS) * 10f64.powi(SHARE_DECIMALS)).round() as u64;
    GroupSummary {
        id: id.to_string(),
        soundings: g.n,
        orders: ords,
        strictest_order_met: strictest,
        share_within_chosen: from_share_units(chosen_units),
        p95_ratio_chosen: round_up(g.ratio_sketch.percentile(95).unwrap_or(0.0), RATIO_DECIMALS),
        meets_chosen: meets,
        shortfall: (!meets)
            .then(|| from_share_units(acceptance_units.saturating_sub(chosen_units))),
        budget: budget.map(BudgetQa::summary),
        all_soundings: tally.by_status.total(),
        by_status: tally.by_status,
        share_within_of_all: from_share_units(share_units(
            g.within[chosen],
            tally.by_status.total(),
        )),
        drying_heights: tally.drying,
        max_ratio_chosen: g.max_ratio.map(|r| round_up(r, RATIO_DECIMALS)),
        defaulted_inputs: Vec::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::compute::uncertainty::s44_orders;

    #[test]
    fn budget_shares_sum_to_one_and_name_the_dominant_component() {
        let mut b = BudgetQa::default();
        b.add(&[0.0025, 0.0004, 0.0016, 0.0001, 0.01, 0.0025]);
        b.add(&[0.0025, 0.0004, 0.0016, 0.0009, 0.0, 0.0025]);
        let s = b.summary();
        // By hand: the first sounding's shares are its variances over 0.0171 m² (0.146199,
        // 0.023392, 0.093567, 0.005848, 0.584795, 0.146199), the second's over 0.0079 m²
        // (0.316456, 0.050633, 0.202532, 0.113924, 0, 0.316456); their means, to 0.001, are
        // 0.231, 0.037, 0.148, 0.060, 0.292, 0.231, which sum to 0.999: each mean is rounded on
        // its own, so the sum is within 6 × 0.0005 of 1.
        let means: Vec<f64> = s.components.iter().map(|c| c.mean_share).collect();
        assert_eq!(means, [0.231, 0.037, 0.148, 0.06, 0.292, 0.231]);
        let total: f64 = means.iter().sum();
        assert!((total - 1.0).abs() <= 0.003 + 1e-12, "{total}");
        // The 95th percentile of two values is the larger (rank ⌈1.9⌉ = 2), rounded up to
        // 0.001: timing 0.584795 → 0.585, sounding 0.316456 → 0.317, timing's other 0 ignored.
        assert_eq!(s.components[4].p95_share, Some(0.585));
        assert_eq!(s.components[0].p95_share, Some(0.317));
        // A line's budget keeps the means and metres, no percentiles.
        let mut l = BudgetQa::without_percentiles();
        l.add(&[0.0025, 0.0004, 0.0016, 0.0001, 0.01, 0.0025]);
        l.add(&[0.0025, 0.0004, 0.0016, 0.0009, 0.0, 0.0025]);
        let ls = l.summary();
        assert_eq!(ls.components[4].p95_share, None);
        assert_eq!(ls.components[4].mean_share, 0.292);
        assert_eq!(ls.components[0].rms_m, 0.05);
        assert_eq!(s.dominant_component, "timing");
    }

    #[test]
    fn p95_shares_equal_the_exact_nearest_rank_percentile_rounded_up() {
        // Checked against the definition (nearest rank, ⌈0.95·n⌉-th smallest, then rounded up to
        // 0.001): sorting every share. Shares land on and beside bin edges (0.25 exactly, 1/3,
        // 0 and 1) as well as at random.
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        let mut whole = BudgetQa::default();
        let mut parts = [BudgetQa::default(), BudgetQa::default()];
        let mut shares: Vec<[f64; 6]> = Vec::new();
        for i in 0..5000 {
            let mut v = [0.0; 6];
            for x in v.iter_mut() {
                *x = match rng.gen_range(0..6) {
                    0 => 0.0,
                    1 => 0.01,
                    _ => rng.gen_range(0.0..0.02),
                };
            }
            if v.iter().sum::<f64>() == 0.0 {
                v[5] = 0.01;
            }
            let total: f64 = v.iter().sum();
            let mut sh = [0.0; 6];
            for k in 0..6 {
                sh[k] = v[k] / total;
            }
            shares.push(sh);
            whole.add(&v);
            parts[i % 2].add(&v);
        }
        let [mut a, b] = parts;
        a.merge(&b);
        let (sw, sa) = (whole.summary(), a.summary());
        for k in 0..6 {
            let mut col: Vec<f64> = shares.iter().map(|s| s[k]).collect();
            col.sort_by(f64::total_cmp);
            let rank = (95 * col.len()).div_ceil(100);
            let exact = round_up(col[rank - 1], SHARE_DECIMALS);
            assert_eq!(sw.components[k].p95_share, Some(exact), "component {k}");
            assert_eq!(
                sa.components[k].p95_share,
                Some(exact),
                "merged, component {k}"
            );
        }
        // The bins of values at and just above a bin edge.
        assert_eq!(ShareCounts::bin(0.25), 250);
        assert_eq!(ShareCounts::bin(0.250_000_1), 251);
        assert_eq!(ShareCounts::bin(0.0), 0);
        assert_eq!(ShareCounts::bin(1.0), 1000);
    }

    #[test]
    fn shares_are_rounded_down_from_the_counts_and_judged_as_written() {
        let orders = s44_orders();
        let group = |n: u64, within: u64| GroupQa {
            n,
            within: vec![within; orders.len()],
            ratio_hist: [0; RATIO_BINS],
            ratio_sketch: QuantileSketch::new(),
            max_ratio: None,
        };
        let tally = StatusTally::default();
        let at = |n, within, acceptance| {
            summarise_group(
                "g",
                &group(n, within),
                None,
                &tally,
                &orders,
                5,
                2,
                acceptance,
            )
        };
        // 2 of 3 is 0.6667: rounded down, 0.666.
        assert_eq!(at(3, 2, 0.95).share_within_chosen, 0.666);
        // 94 999 of 100 000 is 0.94999: written 0.949, so not met at 0.95, short by 0.001.
        let s = at(100_000, 94_999, 0.95);
        assert_eq!(s.share_within_chosen, 0.949);
        assert!(!s.meets_chosen);
        assert_eq!(s.shortfall, Some(0.001));
        // 950 of 1000 is 0.95 exactly: met.
        assert!(at(1000, 950, 0.95).meets_chosen);
        // 1.0 only when every sounding is within: 1 999 999 of 2 000 000 reads 0.999.
        assert_eq!(at(2_000_000, 1_999_999, 1.0).share_within_chosen, 0.999);
        assert!(!at(2_000_000, 1_999_999, 1.0).meets_chosen);
        assert!(at(2_000_000, 2_000_000, 1.0).meets_chosen);
        // An acceptance share finer than 0.001 is compared with the share as written: 0.9507
        // reads 0.950, below 0.9505; the shortfall uses the acceptance rounded up (0.951).
        let s = at(10_000, 9_507, 0.9505);
        assert!(!s.meets_chosen);
        assert_eq!(s.shortfall, Some(0.001));
        // An empty group meets nothing and has share 0.
        assert!(!at(0, 0, 0.5).meets_chosen);
        assert_eq!(at(0, 0, 0.5).share_within_chosen, 0.0);
    }

    #[test]
    fn a_ratio_of_one_is_left_of_the_limit() {
        // Bins of 0.05 closed on the right: bin 19 is (0.95, 1.00], bin 20 is (1.00, 1.05].
        assert_eq!(ratio_bin(1.0), 19);
        assert_eq!(ratio_bin(1.0 + 1e-12), 20);
        assert_eq!(ratio_bin(0.95), 18);
        assert_eq!(ratio_bin(0.0), 0);
        assert_eq!(ratio_bin(0.05), 0);
        assert_eq!(ratio_bin(0.0501), 1);
        assert_eq!(ratio_bin(1000.0), RATIO_BINS - 1);
        // Every ratio of written values at or below 1 lands at or below bin 19.
        for u in 1..=1000u32 {
            assert!(ratio_bin(f64::from(u) / 1000.0) <= 19, "{u}");
        }
    }

    #[test]
    fn rounding_up_never_lands_below() {
        // 1.1 · 1000 is 1100.0000000000002 in doubles: a plain ceil would give 1.101.
        assert_eq!(round_up(1.1, 3), 1.1);
        assert_eq!(round_up(1.1000001, 3), 1.101);
        assert_eq!(round_up(0.0, 3), 0.0);
        for i in 0..5000 {
            let x = i as f64 * 0.000_37;
            let r = round_up(x, 3);
            assert!(r >= x && r - x < 0.001 + 1e-12, "{x} → {r}");
        }
        assert_eq!(round_nearest(0.30926427887235075, 3), 0.309);
    }

    #[test]
    fn an_empty_group_has_no_dominant_component() {
        assert_eq!(BudgetQa::default().summary().dominant_component, "none");
    }

    /// A judged, reduced sounding of zone `zone` on `line` at `t_s`.
    fn judged_row<'a>(
        zone: usize,
        line: &'a str,
        within: &'a [bool],
        ratio: f64,
        var_m2: [f64; 6],
    ) -> QaRow<'a> {
        QaRow {
            zone: Some(zone),
            line,
            t_s: Some(100.0),
            status: 0,
            at: None,
            drying: false,
            judged: Some(Judged {
                within,
                ratio,
                var_m2,
            }),
        }
    }

    #[test]
    fn strictest_order_met_and_shortfall() {
        let orders = s44_orders();
        let mut acc = QaAccumulator::new(orders.len(), 2, 1);
        // 96 soundings within every order; 4 within only orders 1a, 1b, 2 (ratios 1.2 for
        // exclusive and special).
        for i in 0..100 {
            let r = if i < 96 { 0.5 } else { 1.2 };
            let within = [r, r, 0.52, 0.52, 0.3].map(|r| r <= 1.0);
            acc.add(&judged_row(
                0,
                if i % 2 == 0 { "L1" } else { "L2" },
                &within,
                0.52,
                [1.0, 0.0, 0.0, 0.0, 0.0, 0.0],
            ));
        }
        acc.settle();
        let t = acc.overall_tally;
        let s = summarise_group(
            "survey",
            &acc.overall,
            Some(&acc.overall_budget),
            &t,
            &orders,
            5,
            2,
            0.95,
        );
        assert_eq!(s.strictest_order_met.as_deref(), Some("exclusive"));
        let s = summarise_group("survey", &acc.overall, None, &t, &orders, 5, 0, 0.97);
        assert_eq!(s.strictest_order_met.as_deref(), Some("1a"));
        assert!(!s.meets_chosen);
        assert!((s.shortfall.unwrap() - 0.01).abs() < 1e-12);
        // The 4 bad soundings are 2 per line: each line 48/50 = 0.96 within exclusive. The
        // ratio percentile is kept for the accumulator's chosen order (1a), where every
        // sounding's ratio is 0.52: the percentile is that value itself.
        let l = &acc.lines["L1"];
        let l1 = summarise_group("L1", &l.qa, None, &l.tally, &orders, 5, 0, 0.95);
        assert!((l1.share_within_chosen - 0.96).abs() < 1e-12);
        assert_eq!(l1.p95_ratio_chosen, 0.52);
        assert_eq!(l1.max_ratio_chosen, Some(0.52));
        assert_eq!(l1.all_soundings, 50);
    }

    #[test]
    fn every_sounding_is_counted_and_the_map_keeps_the_worst_of_a_cell() {
        let orders = s44_orders();
        let mut acc = QaAccumulator::new(orders.len(), 1, 2);
        let yes = [true; 5];
        let no = [false; 5];
        // One map cell (10 m wide) holds three judged soundings, ratios 0.4, 1.7 and 0.9, one
        // of them a drying height, and one sounding outside the zoning; a second cell only
        // an unreadable row's line. A row with no position (bad input) is counted, not mapped.
        let mut row = judged_row(0, "L1", &yes, 0.4, [1e-4; 6]);
        row.at = Some((0, 1.0, 1.0, 10.0));
        acc.add(&row);
        let mut row = judged_row(0, "L1", &no, 1.7, [4e-4; 6]);
        row.at = Some((0, 9.0, 2.0, 10.0));
        acc.add(&row);
        let mut row = judged_row(1, "L2", &yes, 0.9, [1e-4; 6]);
        row.at = Some((0, 5.0, 5.0, 10.0));
        row.drying = true;
        acc.add(&row);
        acc.add(&QaRow {
            zone: None,
            line: "L2",
            t_s: Some(50.0),
            status: 2,
            at: Some((0, 3.0, 3.0, 10.0)),
            drying: false,
            judged: None,
        });
        acc.add(&QaRow {
            zone: None,
            line: "L3",
            t_s: None,
            status: 5,
            at: None,
            drying: false,
            judged: None,
        });
        acc.settle();
        let t = acc.overall_tally;
        assert_eq!(t.by_status.0, [3, 0, 1, 0, 0, 1]);
        assert_eq!(t.drying, 1);
        assert_eq!(acc.zones[1].2.drying, 1);
        assert_eq!(acc.no_zone.by_status.total(), 2);
        let s = summarise_group("survey", &acc.overall, None, &t, &orders, 5, 1, 0.95);
        // 2 of 3 judged within (0.666), 2 of all 5 (0.4).
        assert_eq!(s.share_within_chosen, 0.666);
        assert_eq!(s.share_within_of_all, 0.4);
        assert_eq!(s.max_ratio_chosen, Some(1.7));
        let cells = acc.sorted_cells();
        assert_eq!(cells.len(), 1);
        let c = cells[0].1;
        assert_eq!(c.worst.map(|m| m.value), Some(1.7));
        assert_eq!(c.drying.map(|m| (m.x, m.y)), Some((5.0, 5.0)));
        assert_eq!(c.unreduced.map(|m| m.value), Some(2.0));
        let l2 = &acc.lines["L2"];
        assert_eq!(l2.span_s, Some((50.0, 100.0)));
        assert_eq!(l2.zones.iter().copied().collect::<Vec<_>>(), [1]);
        acc.set_file("a.csv");
        assert!(acc.lines["L3"].files.contains("a.csv"));
        // The budget in metres: RMS of each component's u over the zone's two soundings,
        // sqrt((1e-4 + 4e-4) / 2) = 0.0158 m; u_tvu in quadrature over six, 0.0387 m.
        let b = acc.zones[0].1.summary();
        assert_eq!(b.components[0].rms_m, 0.0158);
        assert_eq!(b.rms_u_tvu_m, 0.0387);
    }

    #[test]
    fn merging_equals_adding_in_one() {
        let orders = s44_orders();
        let mut one = QaAccumulator::new(5, 2, 2);
        let mut a = QaAccumulator::new(5, 2, 2);
        let mut b = QaAccumulator::new(5, 2, 2);
        for i in 0..50 {
            let r = i as f64 / 25.0;
            let v = [0.01, 0.001 * i as f64, 0.002, 0.0, 0.003, 0.004];
            let w = [r <= 1.0; 5];
            let line = format!("L{}", i % 3);
            let mut row = judged_row(i % 2, &line, &w, r, v);
            row.at = Some((0, i as f64, 0.0, 7.0));
            row.drying = i % 7 == 0;
            one.add(&row);
            if i < 20 { &mut a } else { &mut b }.add(&row);
        }
        a.merge(b);
        one.settle();
        a.settle();
        let sum = |acc: &QaAccumulator| {
            let z = &acc.zones[1];
            summarise_group("x", &z.0, Some(&z.1), &z.2, &orders, 5, 2, 0.95)
        };
        let (s1, s2) = (sum(&one), sum(&a));
        assert_eq!(s1.orders, s2.orders);
        assert_eq!(s1.p95_ratio_chosen, s2.p95_ratio_chosen);
        assert_eq!(s1.by_status, s2.by_status);
        assert_eq!(s1.drying_heights, s2.drying_heights);
        let (b1, b2) = (s1.budget.unwrap(), s2.budget.unwrap());
        for (c1, c2) in b1.components.iter().zip(&b2.components) {
            assert!((c1.mean_share - c2.mean_share).abs() < 1e-12);
            assert_eq!(c1.p95_share, c2.p95_share);
            assert_eq!(c1.rms_m, c2.rms_m);
        }
        assert_eq!(one.lines.len(), a.lines.len());
        assert_eq!(one.sorted_cells(), a.sorted_cells());
    }
}
