//! Quality assessment of reduced soundings against survey orders: accumulators that can be
//! filled in parallel and merged, and the summary a reviewer reads.
//!
//! Owns: [`QaAccumulator`] (per-order counts overall, per zone and per line; histograms of
//! U95/allowed; budget shares of each component of u_tvu²) and [`QaSummary`] (the stable JSON
//! report body; schema `docs/qa-report.schema.json`).
//!
//! A survey (zone, line) *meets* an order when the share of its soundings whose U95 TVU is within
//! the order's allowed TVU is at least the acceptance share (95 % by default: common practice).
//! Percentiles come from fixed-width histograms: shares to 0.01, ratios to 0.05.

use std::collections::BTreeMap;

use serde::Serialize;

use super::uncertainty::SurveyOrder;

/// Components of u_tvu², in order.
pub const BUDGET_COMPONENTS: [&str; 6] = ["sounding", "gauge", "datum", "range", "timing", "zone"];

const SHARE_BINS: usize = 100;
/// Width of a U95/allowed histogram bin.
pub const RATIO_BIN_WIDTH: f64 = 0.05;
/// Number of U95/allowed bins (0 to 3; the last also holds everything above).
pub const RATIO_BINS: usize = 60;

/// Counts for one group of soundings (the survey, a zone or a line).
#[derive(Debug, Clone)]
pub struct GroupQa {
    /// Soundings assessed.
    pub n: u64,
    /// Soundings within each order's limit (orders in the accumulator's order).
    pub within: Vec<u64>,
    /// Histogram of U95/allowed for the chosen order.
    pub ratio_hist: [u64; RATIO_BINS],
}

impl GroupQa {
    fn new(n_orders: usize) -> Self {
        GroupQa {
            n: 0,
            within: vec![0; n_orders],
            ratio_hist: [0; RATIO_BINS],
        }
    }
    fn merge(&mut self, o: &GroupQa) {
        self.n += o.n;
        for (a, b) in self.within.iter_mut().zip(&o.within) {
            *a += b;
        }
        for (a, b) in self.ratio_hist.iter_mut().zip(&o.ratio_hist) {
            *a += b;
        }
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
    share_hist: [[u64; SHARE_BINS]; 6],
}

impl Default for BudgetQa {
    fn default() -> Self {
        BudgetQa {
            n: 0,
            share_sum: [0; 6],
            share_hist: [[0; SHARE_BINS]; 6],
        }
    }
}

impl BudgetQa {
    fn add(&mut self, var_m2: &[f64; 6]) {
        let total: f64 = var_m2.iter().sum();
        if total <= 0.0 {
            return;
        }
        self.n += 1;
        for (k, v) in var_m2.iter().enumerate() {
            let s = v / total;
            self.share_sum[k] += (s * SHARE_UNITS).round() as u64;
            let b = ((s * SHARE_BINS as f64) as usize).min(SHARE_BINS - 1);
            self.share_hist[k][b] += 1;
        }
    }
    fn merge(&mut self, o: &BudgetQa) {
        self.n += o.n;
        for k in 0..6 {
            self.share_sum[k] += o.share_sum[k];
            for (a, b) in self.share_hist[k].iter_mut().zip(&o.share_hist[k]) {
                *a += b;
            }
        }
    }
    fn summary(&self) -> BudgetSummary {
        let components: Vec<ComponentShare> = BUDGET_COMPONENTS
            .iter()
            .enumerate()
            .map(|(k, name)| ComponentShare {
                component: name,
                mean_share: if self.n > 0 {
                    self.share_sum[k] as f64 / SHARE_UNITS / self.n as f64
                } else {
                    0.0
                },
                p95_share: percentile_of_hist(&self.share_hist[k], 0.95, 1.0 / SHARE_BINS as f64),
            })
            .collect();
        let dominant = components
            .iter()
            .filter(|_| self.n > 0)
            .max_by(|a, b| a.mean_share.total_cmp(&b.mean_share))
            .map(|c| c.component)
            .unwrap_or("none");
        BudgetSummary {
            soundings: self.n,
            components,
            dominant_component: dominant,
        }
    }
}

/// Upper edge of the bin where the cumulative share first reaches `p`.
fn percentile_of_hist(hist: &[u64], p: f64, width: f64) -> f64 {
    let n: u64 = hist.iter().sum();
    if n == 0 {
        return 0.0;
    }
    let target = (p * n as f64).ceil() as u64;
    let mut cum = 0;
    for (i, c) in hist.iter().enumerate() {
        cum += c;
        if cum >= target {
            return (i + 1) as f64 * width;
        }
    }
    hist.len() as f64 * width
}

/// One reduced sounding's place on the QA map.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MapSample {
    /// Index of the soundings group (for its CRS).
    pub group: usize,
    /// Easting/longitude in the group's CRS.
    pub x: f64,
    /// Northing/latitude in the group's CRS.
    pub y: f64,
    /// U95 TVU / allowed TVU for the chosen order.
    pub ratio: f64,
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
    /// Per zone (index = zone index).
    pub zones: Vec<(GroupQa, BudgetQa)>,
    /// Per survey line.
    pub lines: BTreeMap<String, GroupQa>,
    /// A thinned sample of soundings for the map.
    pub samples: Vec<MapSample>,
}

impl QaAccumulator {
    /// An empty accumulator.
    pub fn new(n_orders: usize, chosen: usize, n_zones: usize) -> Self {
        QaAccumulator {
            n_orders,
            chosen,
            overall: GroupQa::new(n_orders),
            overall_budget: BudgetQa::default(),
            zones: vec![(GroupQa::new(n_orders), BudgetQa::default()); n_zones],
            lines: BTreeMap::new(),
            samples: Vec::new(),
        }
    }

    /// Sums the zones into the survey totals (every sounding lies in exactly one zone); call
    /// before reading `overall`.
    pub fn settle(&mut self) {
        let mut overall = GroupQa::new(self.n_orders);
        let mut budget = BudgetQa::default();
        for (g, b) in &self.zones {
            overall.merge(g);
            budget.merge(b);
        }
        self.overall = overall;
        self.overall_budget = budget;
    }

    /// Adds one reduced sounding: its zone, line, whether it is within each order (the
    /// per-order [`WrittenVerdict`](super::uncertainty::WrittenVerdict)s' `within`), its
    /// U95/allowed ratio for the chosen order, and the variance components of u_tvu² (m²,
    /// [`BUDGET_COMPONENTS`] order).
    pub fn add(
        &mut self,
        zone: usize,
        line: &str,
        within: &[bool],
        chosen_ratio: f64,
        var_m2: &[f64; 6],
    ) {
        let bin = ((chosen_ratio / RATIO_BIN_WIDTH) as usize).min(RATIO_BINS - 1);
        let bump = |g: &mut GroupQa| {
            g.n += 1;
            for (w, yes) in g.within.iter_mut().zip(within) {
                *w += u64::from(*yes);
            }
            g.ratio_hist[bin] += 1;
        };
        bump(&mut self.zones[zone].0);
        if !self.lines.contains_key(line) {
            self.lines
                .insert(line.to_string(), GroupQa::new(self.n_orders));
        }
        bump(self.lines.get_mut(line).expect("inserted above"));
        self.zones[zone].1.add(var_m2);
    }

    /// Merges another accumulator into this one (samples appended in order).
    pub fn merge(&mut self, o: QaAccumulator) {
        for (a, b) in self.zones.iter_mut().zip(&o.zones) {
            a.0.merge(&b.0);
            a.1.merge(&b.1);
        }
        for (k, g) in o.lines {
            match self.lines.get_mut(&k) {
                Some(a) => a.merge(&g),
                None => {
                    self.lines.insert(k, g);
                }
            }
        }
        self.samples.extend(o.samples);
    }
}

/// Share within one order.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct OrderShare {
    /// Order name.
    pub order: String,
    /// Soundings whose U95 TVU is within the order's limit (as the rows' `within_order` judges
    /// it for the chosen order).
    pub soundings_within: u64,
    /// Share of soundings whose U95 TVU is within the order's limit (0–1).
    pub share_within: f64,
    /// Whether the share reaches the acceptance share.
    pub met: bool,
}

/// One component's share of u_tvu².
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ComponentShare {
    /// Component name.
    pub component: &'static str,
    /// Mean over soundings of the component's share of u_tvu² (0–1).
    pub mean_share: f64,
    /// 95th percentile over soundings of that share (to 0.01).
    pub p95_share: f64,
}

/// The uncertainty budget of a group.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct BudgetSummary {
    /// Soundings in the budget.
    pub soundings: u64,
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
    /// Share within the chosen order.
    pub share_within_chosen: f64,
    /// 95th percentile of U95/allowed for the chosen order (to 0.05; above 1: exceeds).
    pub p95_ratio_chosen: f64,
    /// Whether the chosen order is met.
    pub meets_chosen: bool,
    /// Acceptance share minus share within the chosen order, when it fails (0–1).
    pub shortfall: Option<f64>,
    /// The uncertainty budget (survey and zones only).
    pub budget: Option<BudgetSummary>,
}

/// Summarises a group.
pub fn summarise_group(
    id: &str,
    g: &GroupQa,
    budget: Option<&BudgetQa>,
    orders: &[SurveyOrder],
    n_builtin: usize,
    chosen: usize,
    acceptance: f64,
) -> GroupSummary {
    let share = |k: usize| {
        if g.n > 0 {
            g.within[k] as f64 / g.n as f64
        } else {
            0.0
        }
    };
    let ords: Vec<OrderShare> = orders
        .iter()
        .enumerate()
        .map(|(k, o)| OrderShare {
            order: o.name.clone(),
            soundings_within: g.within[k],
            share_within: share(k),
            met: g.n > 0 && share(k) >= acceptance,
        })
        .collect();
    let strictest = ords[..n_builtin]
        .iter()
        .find(|o| o.met)
        .map(|o| o.order.clone());
    let sc = share(chosen);
    let meets = g.n > 0 && sc >= acceptance;
    GroupSummary {
        id: id.to_string(),
        soundings: g.n,
        orders: ords,
        strictest_order_met: strictest,
        share_within_chosen: sc,
        p95_ratio_chosen: percentile_of_hist(&g.ratio_hist, 0.95, RATIO_BIN_WIDTH),
        meets_chosen: meets,
        shortfall: if meets { None } else { Some(acceptance - sc) },
        budget: budget.map(BudgetQa::summary),
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
        let total: f64 = s.components.iter().map(|c| c.mean_share).sum();
        // Shares are summed in units of 1e-9: six roundings of at most 0.5e-9 each.
        assert!((total - 1.0).abs() < 3.1e-9, "{total}");
        assert_eq!(s.dominant_component, "timing");
    }

    #[test]
    fn an_empty_group_has_no_dominant_component() {
        assert_eq!(BudgetQa::default().summary().dominant_component, "none");
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
            acc.add(
                0,
                if i % 2 == 0 { "L1" } else { "L2" },
                &within,
                0.52,
                &[1.0, 0.0, 0.0, 0.0, 0.0, 0.0],
            );
        }
        acc.settle();
        let s = summarise_group(
            "survey",
            &acc.overall,
            Some(&acc.overall_budget),
            &orders,
            5,
            2,
            0.95,
        );
        assert_eq!(s.strictest_order_met.as_deref(), Some("exclusive"));
        let s = summarise_group("survey", &acc.overall, None, &orders, 5, 0, 0.97);
        assert_eq!(s.strictest_order_met.as_deref(), Some("1a"));
        assert!(!s.meets_chosen);
        assert!((s.shortfall.unwrap() - 0.01).abs() < 1e-12);
        // The 4 bad soundings are 2 per line: each line 48/50 = 0.96 within exclusive. The
        // ratio histogram is kept for the accumulator's chosen order (1a: ratio 0.52, in the
        // bin [0.50, 0.55)).
        let l1 = summarise_group("L1", &acc.lines["L1"], None, &orders, 5, 0, 0.95);
        assert!((l1.share_within_chosen - 0.96).abs() < 1e-12);
        assert!(
            (l1.p95_ratio_chosen - 0.55).abs() < 1e-12,
            "{}",
            l1.p95_ratio_chosen
        );
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
            one.add(i % 2, &format!("L{}", i % 3), &w, r, &v);
            if i < 20 { &mut a } else { &mut b }.add(i % 2, &format!("L{}", i % 3), &w, r, &v);
        }
        a.merge(b);
        one.settle();
        let s1 = summarise_group(
            "x",
            &one.zones[1].0,
            Some(&one.zones[1].1),
            &orders,
            5,
            2,
            0.95,
        );
        let s2 = summarise_group("x", &a.zones[1].0, Some(&a.zones[1].1), &orders, 5, 2, 0.95);
        assert_eq!(s1.orders, s2.orders);
        assert_eq!(s1.p95_ratio_chosen, s2.p95_ratio_chosen);
        let (b1, b2) = (s1.budget.unwrap(), s2.budget.unwrap());
        for (c1, c2) in b1.components.iter().zip(&b2.components) {
            assert!((c1.mean_share - c2.mean_share).abs() < 1e-12);
            assert_eq!(c1.p95_share, c2.p95_share);
        }
        assert_eq!(one.lines.len(), a.lines.len());
    }
}
