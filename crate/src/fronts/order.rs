//! Where bursts start, whether or not a front fits: the order in which sites activated, the
//! leading sites, how fast the burst recruited the rest, and over the recording how often
//! each site leads and how alike the activation order is from burst to burst.
//!
//! Leader sites that fire first in most population bursts are a known feature of cultured
//! networks (Eckmann et al. 2008, New J Phys 10:015011); the consistency of the order between
//! bursts is measured by Spearman's rank correlation of the activation times of the sites
//! active in both bursts.

use super::{Activation, BurstResult};
pub use crate::stats::spearman;
use serde::{Deserialize, Serialize};

/// Settings of the order measures.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct OrderSettings {
    /// The leading sites of a burst are its first this fraction of active sites (at least
    /// one; common practice, no source).
    pub leading_fraction: f64,
    /// Each burst's order is compared with that of at most this many following bursts, so
    /// that the work stays linear in the number of bursts.
    pub compare_with_next: usize,
    /// Two bursts are compared only when at least this many sites are active in both.
    pub min_common_sites: usize,
}

impl Default for OrderSettings {
    fn default() -> Self {
        OrderSettings {
            leading_fraction: 0.05,
            compare_with_next: 50,
            min_common_sites: 4,
        }
    }
}

/// How one burst spread over the sites.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BurstOrder {
    /// Sites that activated (set-aside outliers excluded).
    pub active_sites: usize,
    /// The first `leading_fraction` of them, earliest first.
    pub leading_sites: Vec<String>,
    /// Time from the first activation until 10%, 50% and 90% of the active sites had
    /// activated, ms; `None` with fewer than two active sites.
    pub recruitment_ms: Option<[f64; 3]>,
}

/// The activations that count for the order: all but set-aside outliers, earliest first
/// (ties kept in site order).
fn ordered(activations: &[Activation]) -> Vec<&Activation> {
    let mut v: Vec<&Activation> = activations
        .iter()
        .filter(|a| !a.status.set_aside())
        .collect();
    v.sort_by(|a, b| a.time_s.total_cmp(&b.time_s));
    v
}

/// The burst's activation times after its first, ms, earliest first (set-aside outliers
/// excluded): what its recruitment curve is drawn from.
pub fn times_after_first_ms(activations: &[Activation]) -> Vec<f64> {
    let v = ordered(activations);
    let first = v.first().map_or(0.0, |a| a.time_s);
    v.iter().map(|a| (a.time_s - first) * 1e3).collect()
}

/// The order of one burst's activations.
pub fn burst_order(activations: &[Activation], settings: &OrderSettings) -> BurstOrder {
    let v = ordered(activations);
    let n = v.len();
    let leading = ((settings.leading_fraction * n as f64).ceil() as usize)
        .max(1)
        .min(n);
    let recruitment_ms = (n >= 2).then(|| {
        let at = |q: f64| {
            // The k-th activation with k = ceil(q n), counted from 1.
            let k = ((q * n as f64).ceil() as usize).clamp(1, n);
            (v[k - 1].time_s - v[0].time_s) * 1e3
        };
        [at(0.1), at(0.5), at(0.9)]
    });
    BurstOrder {
        active_sites: n,
        leading_sites: v[..leading].iter().map(|a| a.site.clone()).collect(),
        recruitment_ms,
    }
}

/// How often one site leads.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LeaderCount {
    pub site: String,
    pub x_um: f64,
    pub y_um: f64,
    /// Bursts in which the site activated.
    pub bursts_active: usize,
    /// Bursts in which it was among the leading sites.
    pub bursts_leading: usize,
    /// bursts_leading over all bursts, with its Wilson 95% interval.
    pub lead_fraction: f64,
    pub lead_fraction_ci95: Option<[f64; 2]>,
    /// Median over its active bursts of its rank fraction: 0 first, 1 last.
    pub median_rank_fraction: Option<f64>,
}

/// How alike the activation order is from burst to burst.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OrderConsistency {
    /// Pairs of bursts compared.
    pub pairs: usize,
    /// Mean and median Spearman correlation of the activation times of the sites active in
    /// both bursts of a pair; 1 = the same order every time, 0 = no relation.
    pub mean_spearman: Option<f64>,
    pub median_spearman: Option<f64>,
}

/// Every site that activated in some burst, with how often it led, most frequent leader
/// first. `sites` are (id, x, y) of all sites, in the recording's order.
pub fn leaders(bursts: &[BurstResult], sites: &[(String, f64, f64)]) -> Vec<LeaderCount> {
    let total = bursts.len();
    let index: std::collections::HashMap<&str, usize> = sites
        .iter()
        .enumerate()
        .map(|(i, s)| (s.0.as_str(), i))
        .collect();
    // One pass over the bursts: (bursts active, bursts leading, rank fractions) per site.
    let mut tally: Vec<(usize, usize, Vec<f64>)> = vec![(0, 0, Vec::new()); sites.len()];
    for b in bursts {
        let v = ordered(&b.activations);
        for (k, a) in v.iter().enumerate() {
            if let Some(&i) = index.get(a.site.as_str()) {
                tally[i].0 += 1;
                if v.len() > 1 {
                    tally[i].2.push(k as f64 / (v.len() - 1) as f64);
                }
            }
        }
        for site in &b.order.leading_sites {
            if let Some(&i) = index.get(site.as_str()) {
                tally[i].1 += 1;
            }
        }
    }
    let mut rows: Vec<LeaderCount> = sites
        .iter()
        .zip(tally)
        .filter(|(_, (active, _, _))| *active > 0)
        .map(|((site, x, y), (active, leading, ranks))| LeaderCount {
            site: site.clone(),
            x_um: *x,
            y_um: *y,
            bursts_active: active,
            bursts_leading: leading,
            lead_fraction: if total > 0 {
                leading as f64 / total as f64
            } else {
                0.0
            },
            lead_fraction_ci95: crate::stats::wilson_interval(leading, total, 0.95),
            median_rank_fraction: crate::stats::median(&ranks),
        })
        .collect();
    rows.sort_by(|a, b| {
        b.bursts_leading
            .cmp(&a.bursts_leading)
            .then(a.site.cmp(&b.site))
    });
    rows
}

/// Spearman correlation of the activation order between each burst and the next
/// `compare_with_next` bursts, over the sites active in both (set-aside outliers excluded).
pub fn order_consistency(bursts: &[BurstResult], settings: &OrderSettings) -> OrderConsistency {
    let times: Vec<std::collections::HashMap<&str, f64>> = bursts
        .iter()
        .map(|b| {
            ordered(&b.activations)
                .into_iter()
                .map(|a| (a.site.as_str(), a.time_s))
                .collect()
        })
        .collect();
    let mut rhos = Vec::new();
    for i in 0..times.len() {
        for j in i + 1..times.len().min(i + 1 + settings.compare_with_next) {
            let (mut x, mut y) = (Vec::new(), Vec::new());
            // Iterate in a fixed order so that the result does not depend on hashing.
            for a in &bursts[i].activations {
                if let (Some(&ti), Some(&tj)) =
                    (times[i].get(a.site.as_str()), times[j].get(a.site.as_str()))
                {
                    x.push(ti);
                    y.push(tj);
                }
            }
            if x.len() >= settings.min_common_sites.max(2) {
                if let Some(r) = spearman(&x, &y) {
                    rhos.push(r);
                }
            }
        }
    }
    OrderConsistency {
        pairs: rhos.len(),
        mean_spearman: crate::stats::mean(&rhos),
        median_spearman: crate::stats::median(&rhos),
    }
}
