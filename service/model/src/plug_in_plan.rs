//! The depot's plug-in plan: with fewer outlets (and optionally less circuit power) than cold
//! vehicles, choose which vehicles get a block heater tonight so as to minimise the expected
//! number of no-starts at their departures.
//!
//! Each candidate brings its no-start probability without a heater and with its heater from its
//! recommended plug-in time (both from the model); the benefit of plugging it in is the difference.
//! Expected no-starts are additive over vehicles, so the problem is a 0/1 knapsack:
//! - outlets only (every heater takes one outlet): the N largest benefits are optimal (unit weights);
//! - outlets and a circuit power limit (heaters overlap before the departures, so the circuit must
//!   carry every chosen heater at once — conservative): dynamic programming over (outlets used,
//!   power in 50 W units) is exact; beyond [`EXACT_STATE_LIMIT`] states a ratio-greedy heuristic
//!   runs and the gap to the fractional-relaxation upper bound is reported.
//!
//! One outlet serves one vehicle per night (outlet sharing on timers is not modelled).

/// One vehicle that could be plugged in.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlugInCandidate {
    /// No-start probability without the heater.
    pub p_without: f64,
    /// No-start probability with the heater from `plug_in_s`.
    pub p_with: f64,
    /// Heater power, W.
    pub heater_w: f64,
    /// Recommended plug-in time, s.
    pub plug_in_s: f64,
    /// Start margin without the heater, K (for the coldest-first comparison).
    pub margin_without_k: f64,
}

impl PlugInCandidate {
    fn benefit(&self) -> f64 {
        (self.p_without - self.p_with).max(0.0)
    }
}

/// The depot's limits.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct DepotLimits {
    /// Outlets available.
    pub outlets: u32,
    /// Total power the outlets' circuits may carry at once, W (None = no limit).
    pub circuit_limit_w: Option<f64>,
}

/// How the plan was found.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PlanMethod {
    /// Provably optimal.
    Exact,
    /// Ratio-greedy heuristic (see `gap_bound`).
    Heuristic,
}

/// The plan.
#[derive(Debug, Clone, PartialEq)]
pub struct PlugInPlan {
    /// Indices of the chosen candidates, in input order.
    pub chosen: Vec<usize>,
    /// Expected no-starts if nobody is plugged in.
    pub expected_no_starts_without: f64,
    /// Expected no-starts with the plan.
    pub expected_no_starts_with: f64,
    /// How the plan was found.
    pub method: PlanMethod,
    /// Upper bound on how many more expected no-starts an optimal plan could avoid (0 when exact).
    pub gap_bound: f64,
}

/// Largest DP table (outlets × power units) solved exactly.
pub const EXACT_STATE_LIMIT: usize = 20_000_000;
const POWER_UNIT_W: f64 = 50.0;

fn finish(
    c: &[PlugInCandidate],
    mut chosen: Vec<usize>,
    method: PlanMethod,
    gap_bound: f64,
) -> PlugInPlan {
    chosen.sort_unstable();
    let without: f64 = c.iter().map(|x| x.p_without).sum();
    let gain: f64 = chosen.iter().map(|&i| c[i].benefit()).sum();
    PlugInPlan {
        chosen,
        expected_no_starts_without: without,
        expected_no_starts_with: without - gain,
        method,
        gap_bound,
    }
}

/// Chooses the vehicles to plug in.
pub fn plan(c: &[PlugInCandidate], limits: &DepotLimits) -> PlugInPlan {
    let n_out = (limits.outlets as usize).min(c.len());
    let useful: Vec<usize> = (0..c.len()).filter(|&i| c[i].benefit() > 0.0).collect();
    match limits.circuit_limit_w {
        None => {
            let mut order = useful;
            order.sort_by(|&a, &b| c[b].benefit().total_cmp(&c[a].benefit()).then(a.cmp(&b)));
            order.truncate(n_out);
            finish(c, order, PlanMethod::Exact, 0.0)
        }
        Some(limit_w) => {
            let cap = (limit_w.max(0.0) / POWER_UNIT_W).floor() as usize;
            if (n_out + 1) * (cap + 1) <= EXACT_STATE_LIMIT
                && useful.len() * (n_out + 1) * (cap + 1) <= 40 * EXACT_STATE_LIMIT
            {
                finish(c, knapsack(c, &useful, n_out, cap), PlanMethod::Exact, 0.0)
            } else {
                let (chosen, bound) = greedy(c, &useful, n_out, limit_w);
                let got: f64 = chosen.iter().map(|&i| c[i].benefit()).sum();
                finish(c, chosen, PlanMethod::Heuristic, (bound - got).max(0.0))
            }
        }
    }
}

fn units(w: f64) -> usize {
    (w / POWER_UNIT_W).ceil() as usize
}

/// Exact 0/1 knapsack with a cardinality limit, by DP with a choice table for reconstruction.
fn knapsack(c: &[PlugInCandidate], items: &[usize], n_out: usize, cap: usize) -> Vec<usize> {
    let width = cap + 1;
    let mut best = vec![0.0_f64; (n_out + 1) * width];
    let mut took = vec![false; items.len() * (n_out + 1) * width];
    for (k, &i) in items.iter().enumerate() {
        let w = units(c[i].heater_w);
        let b = c[i].benefit();
        for m in (1..=n_out).rev() {
            for p in (w..=cap).rev() {
                let cand = best[(m - 1) * width + p - w] + b;
                if cand > best[m * width + p] {
                    best[m * width + p] = cand;
                    took[(k * (n_out + 1) + m) * width + p] = true;
                }
            }
        }
    }
    let (mut m, mut p) = (n_out, cap);
    let mut chosen = Vec::new();
    for k in (0..items.len()).rev() {
        if m > 0 && took[(k * (n_out + 1) + m) * width + p] {
            chosen.push(items[k]);
            p -= units(c[items[k]].heater_w);
            m -= 1;
        }
    }
    chosen
}

/// Ratio-greedy plus the fractional upper bound (LP relaxation of the power constraint).
fn greedy(c: &[PlugInCandidate], items: &[usize], n_out: usize, limit_w: f64) -> (Vec<usize>, f64) {
    let mut order = items.to_vec();
    let ratio = |i: usize| c[i].benefit() / c[i].heater_w.max(1.0);
    order.sort_by(|&a, &b| ratio(b).total_cmp(&ratio(a)).then(a.cmp(&b)));
    let (mut used_w, mut chosen, mut bound, mut bound_w, mut bound_n) =
        (0.0, Vec::new(), 0.0, 0.0, 0usize);
    for &i in &order {
        if chosen.len() < n_out && used_w + c[i].heater_w <= limit_w {
            used_w += c[i].heater_w;
            chosen.push(i);
        }
        if bound_n < n_out && bound_w < limit_w {
            let frac = ((limit_w - bound_w) / c[i].heater_w.max(1.0)).min(1.0);
            bound += frac * c[i].benefit();
            bound_w += frac * c[i].heater_w;
            bound_n += 1;
        }
    }
    // The bound must also respect the outlet count alone.
    let mut by_benefit: Vec<f64> = items.iter().map(|&i| c[i].benefit()).collect();
    by_benefit.sort_by(|a, b| b.total_cmp(a));
    let outlet_bound: f64 = by_benefit.iter().take(n_out).sum();
    (chosen, bound.min(outlet_bound).max(0.0))
}

/// Coldest-first ordering (the rule of thumb the plan is compared with): plug in the vehicles with
/// the lowest margins until outlets or power run out.
pub fn coldest_first(c: &[PlugInCandidate], limits: &DepotLimits) -> PlugInPlan {
    let mut order: Vec<usize> = (0..c.len()).collect();
    order.sort_by(|&a, &b| {
        c[a].margin_without_k
            .total_cmp(&c[b].margin_without_k)
            .then(a.cmp(&b))
    });
    let (mut used_w, mut chosen) = (0.0, Vec::new());
    for i in order {
        if chosen.len() >= limits.outlets as usize {
            break;
        }
        if limits
            .circuit_limit_w
            .is_none_or(|l| used_w + c[i].heater_w <= l)
        {
            used_w += c[i].heater_w;
            chosen.push(i);
        }
    }
    finish(c, chosen, PlanMethod::Heuristic, f64::NAN)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A deterministic pseudo-random depot (LCG; invented test data).
    fn depot(n: usize, key: u64) -> Vec<PlugInCandidate> {
        let mut s = key;
        let mut next = || {
            s = s
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (s >> 11) as f64 / (1u64 << 53) as f64
        };
        (0..n)
            .map(|_| {
                let p_without = next();
                PlugInCandidate {
                    p_without,
                    p_with: p_without * next(),
                    heater_w: [400.0, 750.0, 1000.0, 1500.0][(next() * 4.0) as usize % 4],
                    plug_in_s: 0.0,
                    margin_without_k: 40.0 * (0.5 - p_without) + 10.0 * (next() - 0.5),
                }
            })
            .collect()
    }

    fn exhaustive(c: &[PlugInCandidate], l: &DepotLimits) -> f64 {
        let mut best = 0.0_f64;
        for mask in 0u32..(1 << c.len()) {
            let idx: Vec<usize> = (0..c.len()).filter(|i| mask & (1 << i) != 0).collect();
            if idx.len() > l.outlets as usize {
                continue;
            }
            let w: f64 = idx
                .iter()
                .map(|&i| (c[i].heater_w / POWER_UNIT_W).ceil() * POWER_UNIT_W)
                .sum();
            if l.circuit_limit_w.is_some_and(|lim| w > lim) {
                continue;
            }
            best = best.max(idx.iter().map(|&i| c[i].benefit()).sum());
        }
        best
    }

    #[test]
    fn plan_equals_exhaustive_search_on_small_depots() {
        for key in 0..40 {
            let c = depot(3 + (key as usize % 10), key);
            for limits in [
                DepotLimits {
                    outlets: 3,
                    circuit_limit_w: None,
                },
                DepotLimits {
                    outlets: 4,
                    circuit_limit_w: Some(2_500.0),
                },
                DepotLimits {
                    outlets: 12,
                    circuit_limit_w: Some(4_000.0),
                },
            ] {
                let p = plan(&c, &limits);
                let got = p.expected_no_starts_without - p.expected_no_starts_with;
                assert!(
                    (got - exhaustive(&c, &limits)).abs() < 1e-9,
                    "key {key} {limits:?}"
                );
                assert_eq!(p.method, PlanMethod::Exact);
            }
        }
    }

    #[test]
    fn more_outlets_never_raise_expected_no_starts() {
        let c = depot(12, 7);
        let mut last = f64::INFINITY;
        for outlets in 0..=12 {
            let p = plan(
                &c,
                &DepotLimits {
                    outlets,
                    circuit_limit_w: Some(6_000.0),
                },
            );
            assert!(p.expected_no_starts_with <= last + 1e-12);
            last = p.expected_no_starts_with;
        }
    }

    #[test]
    fn plan_never_worse_than_coldest_first() {
        for key in 0..20 {
            let c = depot(12, key);
            let l = DepotLimits {
                outlets: 4,
                circuit_limit_w: Some(3_000.0),
            };
            assert!(
                plan(&c, &l).expected_no_starts_with
                    <= coldest_first(&c, &l).expected_no_starts_with + 1e-12
            );
        }
    }

    #[test]
    fn heuristic_gap_bound_holds() {
        let c = depot(12, 3);
        let l = DepotLimits {
            outlets: 5,
            circuit_limit_w: Some(3_000.0),
        };
        let items: Vec<usize> = (0..c.len()).collect();
        let (chosen, bound) = greedy(&c, &items, 5, 3_000.0);
        let got: f64 = chosen.iter().map(|&i| c[i].benefit()).sum();
        let opt = exhaustive(&c, &l);
        assert!(
            got <= opt + 1e-12 && opt <= bound + 1e-9,
            "got {got} opt {opt} bound {bound}"
        );
    }
}
