//! Gel (wax) risk of the fuel over the night: the sampled fuel temperature paths of the tank, the
//! fuel line and the filter (from the soak model) against the fuel's cloud point (CP), cold filter
//! plugging point (CFPP) and pour point (PP) from [`crate::fuel`]. Section numbers (§) refer to the
//! project reference sheet `reference.md`.
//!
//! **Method.** Temperatures are interpolated linearly between samples. The outlook reports the
//! lowest temperature of any point and where and when it occurs, the time during which *any* point is
//! at or below CP (exact for the piecewise-linear paths), the first crossings of CP and CFPP, and the
//! margins to CFPP and PP. The risk level is our own scale, from the margins and the soak time
//! below CP, because a long soak below CP plugs filters before CFPP in real vehicles (§9.4):
//!
//! | level | condition (first that holds, from the top) |
//! |---|---|
//! | [`GelRiskLevel::NoFlow`] | lowest ≤ CFPP or ≤ PP: fuel will not pass the filter, no start |
//! | [`GelRiskLevel::FilterAtRisk`] | lowest ≤ CFPP + 4 K, or ≤ CP for ≥ 6 h |
//! | [`GelRiskLevel::WaxForming`] | lowest ≤ CP |
//! | [`GelRiskLevel::Watch`] | lowest ≤ CP + 3 K |
//! | [`GelRiskLevel::Clear`] | otherwise |
//!
//! The 4 K is the CFPP reproducibility (§9.1, cold-flow.eu, confirmed). The 3 K watch band and the
//! 6 h soak are estimates, common practice (no source). The lowest temperature over the whole
//! window counts even if the fuel warms before departure: wax needs warming well above CP to
//! redissolve (conservative).
//!
//! **Design rule.** ASTM D975 guidance (§9.2, wording from memory): choose fuel whose CP is at or
//! below the tenth-percentile minimum ambient temperature of the place and month, or whose CFPP (or
//! LTFT) is, when flow improvers are present ([`meets_design_low`]). [`fuel_advice`] follows it.
//!
//! **Units:** kelvin, seconds on the caller's time axis (hours only where the name says so).
//! **Validity:** sample temperatures −100 … +100 °C, times within ±10¹⁰ s.

use crate::error::{ModelError, check_range};
use crate::fuel::{
    ADDITIVE_FULL_EFFECT_ABOVE_CLOUD_POINT_K, AdditiveTreatment, ColdFlowProperties, FuelBase,
    FuelDescription, FuelGrade, INPUT_MAX_T_K, INPUT_MIN_T_K, cold_flow_properties, grade_catalog,
    implies_flow_improver, validate_properties,
};

/// Above CP by at most this much the level is [`GelRiskLevel::Watch`], K. Estimate, common practice
/// (no source).
pub const CLOUD_POINT_WATCH_MARGIN_K: f64 = 3.0;

/// Within this much above CFPP the level is [`GelRiskLevel::FilterAtRisk`], K: the CFPP
/// reproducibility is about 4 °C (reference §9.1, cold-flow.eu, confirmed).
pub const CFPP_WARNING_MARGIN_K: f64 = 4.0;

/// Time at or below CP after which a filter is taken to be at risk before CFPP is reached, s
/// (reference §9.4 names the effect; the 6 h is an estimate, common practice (no source)).
pub const LONG_SOAK_BELOW_CLOUD_POINT_S: f64 = 6.0 * 3600.0;

/// Lowest fuel temperature sample accepted (−100 °C).
pub const SAMPLE_MIN_T_K: f64 = 173.15;
/// Highest fuel temperature sample accepted (+100 °C: heated or return fuel).
pub const SAMPLE_MAX_T_K: f64 = 373.15;
/// Largest magnitude of a time accepted, s (keeps differences of times finite and precise).
pub const MAX_ABS_TIME_S: f64 = 1e10;

const SECONDS_PER_HOUR: f64 = 3600.0;

/// Fuel temperatures at one instant, from the soak model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FuelTemperatureSample {
    /// Time on the caller's axis, s.
    pub at_s: f64,
    /// Bulk fuel in the tank, K.
    pub tank_t_k: f64,
    /// Fuel in the supply line, K.
    pub line_t_k: f64,
    /// Fuel in the main filter, K.
    pub filter_t_k: f64,
}

impl FuelTemperatureSample {
    /// The three points in tie-break order: at equal temperature the filter limits first (it is
    /// where wax plugs), then the line.
    fn points(&self) -> [(FuelPoint, f64); 3] {
        [
            (FuelPoint::Filter, self.filter_t_k),
            (FuelPoint::Line, self.line_t_k),
            (FuelPoint::Tank, self.tank_t_k),
        ]
    }

    fn lowest_t_k(&self) -> f64 {
        self.filter_t_k.min(self.line_t_k).min(self.tank_t_k)
    }
}

/// Gel risk on our own ordered scale (see the module doc for the thresholds).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum GelRiskLevel {
    /// Fuel stays more than 3 K above its cloud point.
    Clear,
    /// Fuel comes within 3 K of its cloud point.
    Watch,
    /// Fuel reaches its cloud point: wax crystals form.
    WaxForming,
    /// Fuel comes within 4 K of its CFPP, or spends 6 h or more at or below its cloud point.
    FilterAtRisk,
    /// Fuel reaches its CFPP or pour point: it will not pass the filter; no start.
    NoFlow,
}

/// A point of the fuel system.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum FuelPoint {
    /// Fuel tank.
    Tank,
    /// Supply line.
    Line,
    /// Main fuel filter.
    Filter,
}

/// The fuel's cold-flow outlook over the window up to departure.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GelOutlook {
    /// Lowest temperature of any point, K.
    pub lowest_t_k: f64,
    /// When it occurs (earliest if repeated), s.
    pub lowest_at_s: f64,
    /// Where it occurs.
    pub limiting_point: FuelPoint,
    /// Time during which any point is at or below the cloud point, hours.
    pub hours_below_cloud_point: f64,
    /// Lowest temperature minus CFPP, K (negative: the fuel fails the filter).
    pub margin_to_cfpp_k: f64,
    /// Lowest temperature minus pour point, K (negative: the fuel no longer moves).
    pub margin_to_pour_point_k: f64,
    /// First time any point reaches the cloud point, s (the first sample time if already there).
    pub crosses_cloud_point_at_s: Option<f64>,
    /// First time any point reaches the CFPP, s (the first sample time if already there).
    pub crosses_cfpp_at_s: Option<f64>,
    /// Risk level.
    pub level: GelRiskLevel,
    /// Fuel will not pass the filter: no start whatever the start margin.
    pub blocks_start: bool,
}

/// Risk level from the lowest fuel temperature and the time spent at or below CP (module doc).
pub fn gel_risk_level(
    props: &ColdFlowProperties,
    lowest_t_k: f64,
    time_below_cloud_point_s: f64,
) -> GelRiskLevel {
    if lowest_t_k <= props.cfpp_k || lowest_t_k <= props.pour_point_k {
        GelRiskLevel::NoFlow
    } else if lowest_t_k <= props.cfpp_k + CFPP_WARNING_MARGIN_K
        || (lowest_t_k <= props.cloud_point_k
            && time_below_cloud_point_s >= LONG_SOAK_BELOW_CLOUD_POINT_S)
    {
        GelRiskLevel::FilterAtRisk
    } else if lowest_t_k <= props.cloud_point_k {
        GelRiskLevel::WaxForming
    } else if lowest_t_k <= props.cloud_point_k + CLOUD_POINT_WATCH_MARGIN_K {
        GelRiskLevel::Watch
    } else {
        GelRiskLevel::Clear
    }
}

fn validate_sample(s: &FuelTemperatureSample) -> Result<(), ModelError> {
    const WHY: &str = "fuel temperature must lie in -100..+100 °C";
    check_range(
        "sample.at_s",
        s.at_s,
        -MAX_ABS_TIME_S,
        MAX_ABS_TIME_S,
        "time must be finite, within ±1e10 s",
    )?;
    check_range(
        "sample.tank_t_k",
        s.tank_t_k,
        SAMPLE_MIN_T_K,
        SAMPLE_MAX_T_K,
        WHY,
    )?;
    check_range(
        "sample.line_t_k",
        s.line_t_k,
        SAMPLE_MIN_T_K,
        SAMPLE_MAX_T_K,
        WHY,
    )?;
    check_range(
        "sample.filter_t_k",
        s.filter_t_k,
        SAMPLE_MIN_T_K,
        SAMPLE_MAX_T_K,
        WHY,
    )?;
    Ok(())
}

/// The sample linearly interpolated at `at_s` between `a` and `b` (`a.at_s ≤ at_s < b.at_s`).
fn interpolate(
    a: &FuelTemperatureSample,
    b: &FuelTemperatureSample,
    at_s: f64,
) -> FuelTemperatureSample {
    let w = (at_s - a.at_s) / (b.at_s - a.at_s);
    let lerp = |x: f64, y: f64| x + w * (y - x);
    FuelTemperatureSample {
        at_s,
        tank_t_k: lerp(a.tank_t_k, b.tank_t_k),
        line_t_k: lerp(a.line_t_k, b.line_t_k),
        filter_t_k: lerp(a.filter_t_k, b.filter_t_k),
    }
}

/// Time within the segment a→b during which the lowest of the three linear paths is at or below
/// `threshold_k`. Each path is below on an interval anchored at one end of the segment, so the
/// union is the longest left-anchored plus the longest right-anchored interval.
fn time_at_or_below(a: &FuelTemperatureSample, b: &FuelTemperatureSample, threshold_k: f64) -> f64 {
    let dt_s = b.at_s - a.at_s;
    let (mut left_s, mut right_s) = (0.0f64, 0.0f64);
    for ((_, va), (_, vb)) in a.points().into_iter().zip(b.points()) {
        match (va <= threshold_k, vb <= threshold_k) {
            (true, true) => return dt_s,
            (true, false) => left_s = left_s.max(dt_s * (threshold_k - va) / (vb - va)),
            (false, true) => right_s = right_s.max(dt_s * (threshold_k - vb) / (va - vb)),
            (false, false) => {}
        }
    }
    (left_s + right_s).min(dt_s)
}

/// First time within a→b at which any path reaches `threshold_k`, given that all start above it.
fn first_crossing(
    a: &FuelTemperatureSample,
    b: &FuelTemperatureSample,
    threshold_k: f64,
) -> Option<f64> {
    let dt_s = b.at_s - a.at_s;
    let mut first: Option<f64> = None;
    for ((_, va), (_, vb)) in a.points().into_iter().zip(b.points()) {
        if va > threshold_k && vb <= threshold_k {
            let t_s = a.at_s + dt_s * (va - threshold_k) / (va - vb);
            first = Some(first.map_or(t_s, |f| f.min(t_s)));
        }
    }
    first
}

/// Running state of the scan over the samples.
struct Scan {
    cloud_point_k: f64,
    cfpp_k: f64,
    lowest_t_k: f64,
    lowest_at_s: f64,
    limiting_point: FuelPoint,
    below_cloud_point_s: f64,
    crosses_cloud_point_at_s: Option<f64>,
    crosses_cfpp_at_s: Option<f64>,
}

impl Scan {
    fn start(props: &ColdFlowProperties, first: &FuelTemperatureSample) -> Self {
        let reached = |thr: f64| (first.lowest_t_k() <= thr).then_some(first.at_s);
        let mut scan = Scan {
            cloud_point_k: props.cloud_point_k,
            cfpp_k: props.cfpp_k,
            lowest_t_k: f64::INFINITY,
            lowest_at_s: first.at_s,
            limiting_point: FuelPoint::Filter,
            below_cloud_point_s: 0.0,
            crosses_cloud_point_at_s: reached(props.cloud_point_k),
            crosses_cfpp_at_s: reached(props.cfpp_k),
        };
        scan.visit(first);
        scan
    }

    fn visit(&mut self, s: &FuelTemperatureSample) {
        for (point, t_k) in s.points() {
            if t_k < self.lowest_t_k {
                self.lowest_t_k = t_k;
                self.lowest_at_s = s.at_s;
                self.limiting_point = point;
            }
        }
    }

    fn segment(&mut self, a: &FuelTemperatureSample, b: &FuelTemperatureSample) {
        self.below_cloud_point_s += time_at_or_below(a, b, self.cloud_point_k);
        if self.crosses_cloud_point_at_s.is_none() {
            self.crosses_cloud_point_at_s = first_crossing(a, b, self.cloud_point_k);
        }
        if self.crosses_cfpp_at_s.is_none() {
            self.crosses_cfpp_at_s = first_crossing(a, b, self.cfpp_k);
        }
        self.visit(b);
    }
}

/// The fuel's cold-flow outlook. Samples must be in time order (equal times allowed); the outlook
/// covers samples up to and including `departure_s`, interpolating the last segment at departure.
///
/// Errors: empty or unordered samples, or departure before the first sample → `Inconsistent`;
/// departure after the last sample → `ForecastTooShort`; non-finite or out-of-range numbers or
/// inconsistent properties → `OutOfRange` / `Inconsistent`.
pub fn gel_outlook(
    props: &ColdFlowProperties,
    samples: &[FuelTemperatureSample],
    departure_s: f64,
) -> Result<GelOutlook, ModelError> {
    validate_properties(props)?;
    check_range(
        "departure_s",
        departure_s,
        -MAX_ABS_TIME_S,
        MAX_ABS_TIME_S,
        "time must be finite, within ±1e10 s",
    )?;
    let (Some(first), Some(last)) = (samples.first(), samples.last()) else {
        return Err(ModelError::Inconsistent("no fuel temperature samples"));
    };
    let mut previous_at_s = f64::NEG_INFINITY;
    for s in samples {
        validate_sample(s)?;
        if s.at_s < previous_at_s {
            return Err(ModelError::Inconsistent(
                "fuel temperature samples are not in time order",
            ));
        }
        previous_at_s = s.at_s;
    }
    if departure_s < first.at_s {
        return Err(ModelError::Inconsistent(
            "departure_s is before the first fuel temperature sample",
        ));
    }
    if departure_s > last.at_s {
        return Err(ModelError::ForecastTooShort {
            covered_until_s: last.at_s,
            requested_s: departure_s,
        });
    }

    let mut scan = Scan::start(props, first);
    for pair in samples.windows(2) {
        let (a, b) = (&pair[0], &pair[1]);
        if b.at_s > departure_s {
            scan.segment(a, &interpolate(a, b, departure_s));
            break;
        }
        scan.segment(a, b);
    }

    let level = gel_risk_level(props, scan.lowest_t_k, scan.below_cloud_point_s);
    Ok(GelOutlook {
        lowest_t_k: scan.lowest_t_k,
        lowest_at_s: scan.lowest_at_s,
        limiting_point: scan.limiting_point,
        hours_below_cloud_point: scan.below_cloud_point_s / SECONDS_PER_HOUR,
        margin_to_cfpp_k: scan.lowest_t_k - props.cfpp_k,
        margin_to_pour_point_k: scan.lowest_t_k - props.pour_point_k,
        crosses_cloud_point_at_s: scan.crosses_cloud_point_at_s,
        crosses_cfpp_at_s: scan.crosses_cfpp_at_s,
        level,
        blocks_start: level == GelRiskLevel::NoFlow,
    })
}

/// ASTM D975 guidance (reference §9.2, wording from memory): the fuel suits a place and month when
/// its cloud point is at or below the tenth-percentile minimum ambient temperature, or, when flow
/// improvers are present, its CFPP (standing in for LTFT) is. Non-finite inputs give `false`.
pub fn meets_design_low(
    props: &ColdFlowProperties,
    tenth_percentile_low_t_k: f64,
    has_flow_improver: bool,
) -> bool {
    props.cloud_point_k <= tenth_percentile_low_t_k
        || (has_flow_improver && props.cfpp_k <= tenth_percentile_low_t_k)
}

/// What the driver or fleet can do about the fuel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum FuelAdviceKind {
    /// Add a cold-flow additive now, while the fuel is well above its cloud point.
    TreatWithAdditiveNow,
    /// Blend No. 1 diesel / kerosene into the tank (lowers the cloud point).
    BlendNo1,
    /// Fill with a winter or arctic grade at the next fill.
    SwitchToWinterGrade,
    /// Keep the fuel warm: plug in, fuel or filter heater.
    WarmFuel,
    /// Park sheltered from wind and sky (garage, wind break).
    ParkSheltered,
}

/// One piece of fuel advice with its expected effect.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FuelAdvice {
    /// What to do.
    pub kind: FuelAdviceKind,
    /// Expected change of the CFPP, K (negative is better; 0 for actions on temperature).
    pub expected_cfpp_change_k: f64,
    /// Expected change of the cloud point, K (negative is better; 0 for actions on temperature).
    pub expected_cloud_point_change_k: f64,
    /// Act before this time, s (the fuel reaches its cloud point then), if there is a deadline.
    pub act_before_s: Option<f64>,
    /// The grade suggested by [`FuelAdviceKind::SwitchToWinterGrade`].
    pub suggested_grade: Option<FuelGrade>,
    /// The No. 1 share of the petroleum part suggested by [`FuelAdviceKind::BlendNo1`].
    pub suggested_no1_blend_fraction: Option<f64>,
    /// Why and how.
    pub note: &'static str,
}

/// No. 1 shares offered by [`FuelAdviceKind::BlendNo1`] (one additive supplier reports ULSD needs
/// ≥ 50 % for a significant effect, reference §9.5, secondary).
const NO1_SHARES: [f64; 5] = [0.1, 0.2, 0.3, 0.4, 0.5];

/// Smallest cloud-point change worth advising, K.
const MIN_USEFUL_CHANGE_K: f64 = 0.5;

const fn is_en590(g: FuelGrade) -> bool {
    matches!(g, FuelGrade::En590Temperate(_) | FuelGrade::En590Arctic(_))
}

/// Fuel advice for the outlook, in the order of [`FuelAdviceKind`]; `out` is cleared first.
///
/// Triggers: additive (none yet) when the level is [`GelRiskLevel::FilterAtRisk`] or worse or the
/// D975 design rule fails; No. 1 blending when the fuel reaches CP or the rule fails (the smallest
/// share of 10–50 % bringing CP to the target, else 50 %); a winter grade at the next fill when the
/// rule fails or the level is `FilterAtRisk` or worse (the warmest grade of the same family that
/// meets the target, else the coldest that helps); warming when the fuel reaches CP; sheltered
/// parking from `Watch` up. The target is the colder of the design low and tonight's lowest fuel
/// temperature. Expected changes come from [`cold_flow_properties`] on the changed description.
pub fn fuel_advice(
    f: &FuelDescription,
    props: &ColdFlowProperties,
    outlook: &GelOutlook,
    design_low_t_k: Option<f64>,
    out: &mut Vec<FuelAdvice>,
) -> Result<(), ModelError> {
    out.clear();
    validate_properties(props)?;
    check_range(
        "outlook.lowest_t_k",
        outlook.lowest_t_k,
        SAMPLE_MIN_T_K,
        SAMPLE_MAX_T_K,
        "fuel temperature must lie in -100..+100 °C",
    )?;
    if let Some(t_k) = design_low_t_k {
        check_range(
            "design_low_t_k",
            t_k,
            INPUT_MIN_T_K,
            INPUT_MAX_T_K,
            "design low must lie in -80..+40 °C",
        )?;
    }
    let current = cold_flow_properties(f)?;
    let has_improver = f.additive.is_some() || implies_flow_improver(props);
    let design_ok = design_low_t_k.is_none_or(|t_k| meets_design_low(props, t_k, has_improver));
    let target_t_k = design_low_t_k.map_or(outlook.lowest_t_k, |t_k| t_k.min(outlook.lowest_t_k));
    let level = outlook.level;
    let deadline_s = outlook.crosses_cloud_point_at_s;
    let advice = |kind, to: &ColdFlowProperties, note| FuelAdvice {
        kind,
        expected_cfpp_change_k: to.cfpp_k - current.cfpp_k,
        expected_cloud_point_change_k: to.cloud_point_k - current.cloud_point_k,
        act_before_s: deadline_s,
        suggested_grade: None,
        suggested_no1_blend_fraction: None,
        note,
    };

    if f.additive.is_none() && (level >= GelRiskLevel::FilterAtRisk || !design_ok) {
        // Assume the treatment is done in time, at least 5 K above CP.
        let added_t_k =
            (current.cloud_point_k + ADDITIVE_FULL_EFFECT_ABOVE_CLOUD_POINT_K).min(INPUT_MAX_T_K);
        let treated = FuelDescription {
            additive: Some(AdditiveTreatment::typical(added_t_k)),
            ..*f
        };
        out.push(advice(
            FuelAdviceKind::TreatWithAdditiveNow,
            &cold_flow_properties(&treated)?,
            "Add a cold-flow additive while the fuel is at least 5 K above its cloud point; added \
             below it the additive earns little. It lowers CFPP and pour point, not the cloud point.",
        ));
    }

    if (level >= GelRiskLevel::WaxForming || !design_ok) && f.biodiesel_fraction < 1.0 {
        let mut chosen = None;
        for share in NO1_SHARES.into_iter().filter(|&s| s > f.no1_blend_fraction) {
            let blended = cold_flow_properties(&FuelDescription {
                no1_blend_fraction: share,
                ..*f
            })?;
            chosen = Some((share, blended));
            if blended.cloud_point_k <= target_t_k {
                break;
            }
        }
        if let Some((share, blended)) = chosen
            && current.cloud_point_k - blended.cloud_point_k >= MIN_USEFUL_CHANGE_K
        {
            out.push(FuelAdvice {
                suggested_no1_blend_fraction: Some(share),
                ..advice(
                    FuelAdviceKind::BlendNo1,
                    &blended,
                    "Blend No. 1 diesel or kerosene in before the fuel clouds: the only effective way \
                     to lower the cloud point (about 1-2 K per 10 %, weaker for ULSD).",
                )
            });
        }
    }

    if !design_ok || level >= GelRiskLevel::FilterAtRisk {
        let mut meeting: Option<(FuelGrade, ColdFlowProperties)> = None;
        let mut coldest: Option<(FuelGrade, ColdFlowProperties)> = None;
        for entry in grade_catalog() {
            if let FuelBase::Grade(g) = f.base
                && is_en590(g) != is_en590(entry.grade)
            {
                continue;
            }
            let candidate = FuelDescription {
                base: FuelBase::Grade(entry.grade),
                additive: None,
                ..*f
            };
            let p = cold_flow_properties(&candidate)?;
            if p.cfpp_k > current.cfpp_k - MIN_USEFUL_CHANGE_K {
                continue;
            }
            if meets_design_low(&p, target_t_k, implies_flow_improver(&p))
                && meeting.is_none_or(|(_, m)| p.cfpp_k > m.cfpp_k)
            {
                meeting = Some((entry.grade, p));
            }
            if coldest.is_none_or(|(_, m)| p.cfpp_k < m.cfpp_k) {
                coldest = Some((entry.grade, p));
            }
        }
        if let Some((grade, p)) = meeting.or(coldest) {
            out.push(FuelAdvice {
                act_before_s: None,
                suggested_grade: Some(grade),
                ..advice(
                    FuelAdviceKind::SwitchToWinterGrade,
                    &p,
                    "At the next fill, choose a grade whose cloud point (or CFPP, with a flow \
                     improver) is at or below the tenth-percentile low of the place and month \
                     (ASTM D975 guidance).",
                )
            });
        }
    }

    if level >= GelRiskLevel::WaxForming {
        out.push(advice(
            FuelAdviceKind::WarmFuel,
            &current,
            "Keep the fuel above its cloud point: plug in the engine, fuel or filter heater \
             before the fuel reaches it. The temperature effect comes from the soak model.",
        ));
    }

    if level >= GelRiskLevel::Watch {
        out.push(advice(
            FuelAdviceKind::ParkSheltered,
            &current,
            "Park out of the wind and under cover to slow the fuel's cooling.",
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fuel::{ArcticClass, BiodieselFeedstock, TemperateClass, grade_properties};
    use proptest::prelude::*;

    fn c(t_c: f64) -> f64 {
        t_c + 273.15
    }

    fn uniform(at_h: f64, t_c: f64) -> FuelTemperatureSample {
        FuelTemperatureSample {
            at_s: at_h * 3600.0,
            tank_t_k: c(t_c),
            line_t_k: c(t_c),
            filter_t_k: c(t_c),
        }
    }

    fn props(cp_c: f64, cfpp_c: f64, pp_c: f64) -> ColdFlowProperties {
        ColdFlowProperties {
            cloud_point_k: c(cp_c),
            cfpp_k: c(cfpp_c),
            pour_point_k: c(pp_c),
        }
    }

    /// 14 hourly samples of a clear night: tank lags the line and filter (illustrative path).
    fn night(low_c: f64) -> [FuelTemperatureSample; 14] {
        core::array::from_fn(|i| {
            let h = i as f64;
            let fall = (h / 10.0).min(1.0);
            let air_c = 5.0 + (low_c - 5.0) * fall;
            FuelTemperatureSample {
                at_s: h * 3600.0,
                tank_t_k: c(air_c + 4.0 * (1.0 - fall) + 1.5),
                line_t_k: c(air_c + 0.3),
                filter_t_k: c(air_c + 0.5),
            }
        })
    }

    #[test]
    fn crossing_and_time_below_are_interpolated_linearly() {
        // Hand-computed: one path falls 0 → −10 °C over 1 h, CP −5 °C, CFPP −8 °C.
        // CP crossing at (0 − −5)/(0 − −10) h = 0.5 h = 1800 s; CFPP at 0.8 h = 2880 s; at or below
        // CP for the remaining 0.5 h.
        let p = props(-5.0, -8.0, -12.0);
        let o = gel_outlook(&p, &[uniform(0.0, 0.0), uniform(1.0, -10.0)], 3600.0).unwrap();
        assert!((o.crosses_cloud_point_at_s.unwrap() - 1800.0).abs() < 1e-9);
        assert!((o.crosses_cfpp_at_s.unwrap() - 2880.0).abs() < 1e-9);
        assert!((o.hours_below_cloud_point - 0.5).abs() < 1e-12);
        assert!((o.lowest_t_k - c(-10.0)).abs() < 1e-12);
        assert!((o.margin_to_cfpp_k - -2.0).abs() < 1e-9);
        assert!((o.margin_to_pour_point_k - 2.0).abs() < 1e-9);
        assert_eq!(o.level, GelRiskLevel::NoFlow);
        assert!(o.blocks_start);
    }

    #[test]
    fn time_below_is_the_union_over_points() {
        // Hand-computed over one 1 h segment, CP 0 °C: the filter is below for the first 0.25 h
        // (−1 → +3 °C), the tank for the last 0.5 h (+2 → −2 °C), the line never (+5 °C):
        // the union is 0.75 h. The tank first reaches CP at 0.5 h.
        let p = props(0.0, -10.0, -15.0);
        let a = FuelTemperatureSample {
            at_s: 0.0,
            tank_t_k: c(2.0),
            line_t_k: c(5.0),
            filter_t_k: c(-1.0),
        };
        let b = FuelTemperatureSample {
            at_s: 3600.0,
            tank_t_k: c(-2.0),
            line_t_k: c(5.0),
            filter_t_k: c(3.0),
        };
        let o = gel_outlook(&p, &[a, b], 3600.0).unwrap();
        assert!((o.hours_below_cloud_point - 0.75).abs() < 1e-12);
        // Already at or below CP at the first sample: the crossing is reported at that sample.
        assert_eq!(o.crosses_cloud_point_at_s, Some(0.0));
        assert_eq!(o.limiting_point, FuelPoint::Tank);
        assert_eq!(o.lowest_at_s, 3600.0);
        assert_eq!(o.level, GelRiskLevel::WaxForming);
    }

    #[test]
    fn departure_truncates_the_window_by_interpolation() {
        // Hand-computed: 0 °C at 0 h, −20 °C at 4 h; departure at 1 h → lowest −5 °C.
        let p = props(-8.0, -15.0, -18.0);
        let s = [uniform(0.0, 0.0), uniform(4.0, -20.0)];
        let o = gel_outlook(&p, &s, 3600.0).unwrap();
        assert!((o.lowest_t_k - c(-5.0)).abs() < 1e-9);
        assert_eq!(o.lowest_at_s, 3600.0);
        assert_eq!(o.crosses_cloud_point_at_s, None);
        assert_eq!(o.level, GelRiskLevel::Watch); // −5 °C is within 3 K of CP −8 °C
        // Departure exactly at a sample time includes that sample; later samples are ignored.
        let s3 = [uniform(0.0, 0.0), uniform(1.0, -2.0), uniform(2.0, -30.0)];
        let o = gel_outlook(&p, &s3, 3600.0).unwrap();
        assert!((o.lowest_t_k - c(-2.0)).abs() < 1e-9);
        assert_eq!(o.level, GelRiskLevel::Clear);
    }

    #[test]
    fn levels_follow_documented_thresholds() {
        let p = props(-10.0, -20.0, -25.0);
        let level = |t_c: f64, hours: f64| gel_risk_level(&p, c(t_c), hours * 3600.0);
        assert_eq!(level(-6.9, 0.0), GelRiskLevel::Clear);
        assert_eq!(level(-7.0, 0.0), GelRiskLevel::Watch);
        assert_eq!(level(-10.0, 1.0), GelRiskLevel::WaxForming);
        assert_eq!(level(-12.0, 6.0), GelRiskLevel::FilterAtRisk); // long soak, reference.md §9.4
        assert_eq!(level(-16.0, 0.0), GelRiskLevel::FilterAtRisk); // within 4 K of CFPP
        assert_eq!(level(-20.0, 0.0), GelRiskLevel::NoFlow);
        // A pour point above the CFPP (possible for some FAME) also stops the fuel.
        let q = props(-5.0, -15.0, -8.0);
        assert_eq!(gel_risk_level(&q, c(-9.0), 0.0), GelRiskLevel::NoFlow);
    }

    #[test]
    fn winter_diesel_flows_in_a_freezer_where_vegetable_biodiesel_is_solid() {
        // Common practice (no source): winterised pump diesel still flows after a night in a
        // freezer near −19 °C (−3 °F) while a vegetable-oil sample is solid. B100 pour points of
        // vegetable feedstocks lie well above −19 °C (reference.md §9.6: B100 PP about −5 … +10 °C,
        // AFDC, confirmed).
        let freezer: [FuelTemperatureSample; 11] =
            core::array::from_fn(|i| uniform(i as f64, -19.0));
        for grade in [
            FuelGrade::UsWinterBlend,
            FuelGrade::En590Temperate(TemperateClass::F),
            FuelGrade::En590Arctic(ArcticClass::Class0),
        ] {
            let o = gel_outlook(&grade_properties(grade), &freezer, 36_000.0).unwrap();
            assert!(o.margin_to_pour_point_k > 0.0, "{grade:?}");
            assert!(!o.blocks_start, "{grade:?}");
        }
        for feedstock in [
            BiodieselFeedstock::Soy,
            BiodieselFeedstock::Canola,
            BiodieselFeedstock::Palm,
        ] {
            let f = FuelDescription {
                biodiesel_fraction: 1.0,
                feedstock,
                ..FuelDescription::of_grade(FuelGrade::UsNo2)
            };
            let o = gel_outlook(&cold_flow_properties(&f).unwrap(), &freezer, 36_000.0).unwrap();
            assert!(o.margin_to_pour_point_k < 0.0, "{feedstock:?}");
            assert!(o.blocks_start);
        }
    }

    #[test]
    fn d975_design_rule() {
        // reference.md §9.2 (ASTM D975 Appendix X5, wording from memory): CP at or below the
        // tenth-percentile minimum; with flow improvers, CFPP/LTFT may be used instead.
        let p = props(-10.0, -22.0, -25.0);
        assert!(meets_design_low(&p, c(-10.0), false));
        assert!(!meets_design_low(&p, c(-12.0), false));
        assert!(meets_design_low(&p, c(-20.0), true));
        assert!(!meets_design_low(&p, c(-23.0), true));
        assert!(!meets_design_low(&p, f64::NAN, true));
    }

    #[test]
    fn advice_follows_the_design_rule() {
        // A plain No. 2 in a place with a −20 °C tenth-percentile low fails the D975 rule
        // (reference.md §9.2): advise an additive, No. 1 blending and a winter grade that meets it.
        let f = FuelDescription::of_grade(FuelGrade::UsNo2);
        let p = cold_flow_properties(&f).unwrap();
        let o = gel_outlook(&p, &night(0.0), 13.0 * 3600.0).unwrap();
        assert_eq!(o.level, GelRiskLevel::Clear);
        let mut out = Vec::new();
        fuel_advice(&f, &p, &o, Some(c(-20.0)), &mut out).unwrap();
        let kinds: Vec<_> = out.iter().map(|a| a.kind).collect();
        assert_eq!(
            kinds,
            [
                FuelAdviceKind::TreatWithAdditiveNow,
                FuelAdviceKind::BlendNo1,
                FuelAdviceKind::SwitchToWinterGrade
            ]
        );
        let additive = out[0];
        assert!(
            (additive.expected_cfpp_change_k - -crate::fuel::TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K)
                .abs()
                < 1e-9
        );
        assert_eq!(additive.expected_cloud_point_change_k, 0.0); // reference.md §9.5, confirmed
        let no1 = out[1];
        assert!(no1.expected_cloud_point_change_k < 0.0);
        assert_eq!(no1.suggested_no1_blend_fraction, Some(0.5)); // 50 % does not reach −20 °C
        let switch = out[2];
        let g = switch.suggested_grade.unwrap();
        assert_eq!(g, FuelGrade::UsWinterBlend);
        assert!(meets_design_low(&grade_properties(g), c(-20.0), true));
        // The winter blend itself meets the rule with its flow improver: no advice on a clear night.
        let w = FuelDescription::of_grade(FuelGrade::UsWinterBlend);
        let pw = cold_flow_properties(&w).unwrap();
        let ow = gel_outlook(&pw, &night(0.0), 13.0 * 3600.0).unwrap();
        fuel_advice(&w, &pw, &ow, Some(c(-25.0)), &mut out).unwrap();
        assert!(out.is_empty());
    }

    #[test]
    fn advice_for_a_gelling_night() {
        // EN 590 class C (CFPP −5 °C) on a −15 °C night: fuel will not flow.
        let f = FuelDescription::of_grade(FuelGrade::En590Temperate(TemperateClass::C));
        let p = cold_flow_properties(&f).unwrap();
        let o = gel_outlook(&p, &night(-15.0), 13.0 * 3600.0).unwrap();
        assert!(o.blocks_start);
        let mut out = Vec::new();
        fuel_advice(&f, &p, &o, None, &mut out).unwrap();
        let warm = out
            .iter()
            .find(|a| a.kind == FuelAdviceKind::WarmFuel)
            .unwrap();
        assert_eq!(warm.act_before_s, o.crosses_cloud_point_at_s);
        assert_eq!(warm.expected_cfpp_change_k, 0.0);
        let switch = out
            .iter()
            .find(|a| a.kind == FuelAdviceKind::SwitchToWinterGrade)
            .unwrap();
        let g = switch.suggested_grade.unwrap();
        assert!(matches!(
            g,
            FuelGrade::En590Temperate(_) | FuelGrade::En590Arctic(_)
        ));
        assert!(switch.expected_cfpp_change_k < 0.0);
        assert!(out.iter().any(|a| a.kind == FuelAdviceKind::ParkSheltered));
        // Already treated: no second additive.
        let treated = FuelDescription {
            additive: Some(AdditiveTreatment::typical(c(10.0))),
            ..f
        };
        let pt = cold_flow_properties(&treated).unwrap();
        let ot = gel_outlook(&pt, &night(-15.0), 13.0 * 3600.0).unwrap();
        fuel_advice(&treated, &pt, &ot, None, &mut out).unwrap();
        assert!(
            out.iter()
                .all(|a| a.kind != FuelAdviceKind::TreatWithAdditiveNow)
        );
    }

    #[test]
    fn hostile_inputs_are_rejected_not_panicked() {
        let p = props(-10.0, -20.0, -25.0);
        let s = [uniform(0.0, 0.0), uniform(1.0, -5.0)];
        assert!(matches!(
            gel_outlook(&p, &[], 0.0),
            Err(ModelError::Inconsistent(_))
        ));
        assert!(matches!(
            gel_outlook(&p, &[s[1], s[0]], 3600.0),
            Err(ModelError::Inconsistent(_))
        ));
        assert!(matches!(
            gel_outlook(&p, &s, -1.0),
            Err(ModelError::Inconsistent(_))
        ));
        assert!(matches!(
            gel_outlook(&p, &s, 7200.0),
            Err(ModelError::ForecastTooShort { .. })
        ));
        for bad in [f64::NAN, f64::INFINITY, -1e300] {
            assert!(matches!(
                gel_outlook(&p, &s, bad),
                Err(ModelError::OutOfRange { .. })
            ));
            let mut t = s;
            t[1].filter_t_k = bad;
            assert!(matches!(
                gel_outlook(&p, &t, 3600.0),
                Err(ModelError::OutOfRange { .. })
            ));
            let mut t = s;
            t[0].at_s = bad;
            assert!(gel_outlook(&p, &t, 3600.0).is_err());
            let q = ColdFlowProperties { cfpp_k: bad, ..p };
            assert!(matches!(
                gel_outlook(&q, &s, 3600.0),
                Err(ModelError::OutOfRange { .. })
            ));
        }
        assert!(matches!(
            gel_outlook(&p, &[uniform(0.0, -273.0)], 0.0),
            Err(ModelError::OutOfRange { .. })
        ));
        let inconsistent = props(-10.0, -20.0, -5.0);
        assert!(matches!(
            gel_outlook(&inconsistent, &s, 3600.0),
            Err(ModelError::Inconsistent(_))
        ));
        let o = gel_outlook(&p, &s, 3600.0).unwrap();
        let f = FuelDescription::of_grade(FuelGrade::UsNo2);
        let mut out = Vec::new();
        assert!(fuel_advice(&f, &p, &o, Some(f64::NAN), &mut out).is_err());
        assert!(fuel_advice(&f, &inconsistent, &o, None, &mut out).is_err());
        let bad_f = FuelDescription {
            biodiesel_fraction: 2.0,
            ..f
        };
        assert!(fuel_advice(&bad_f, &p, &o, None, &mut out).is_err());
        let bad_o = GelOutlook {
            lowest_t_k: f64::NAN,
            ..o
        };
        assert!(fuel_advice(&f, &p, &bad_o, None, &mut out).is_err());
        assert!(out.is_empty());
    }

    fn grade_strategy() -> impl Strategy<Value = FuelGrade> {
        (0usize..14).prop_map(|i| grade_catalog()[i].grade)
    }

    fn feedstock_strategy() -> impl Strategy<Value = BiodieselFeedstock> {
        prop_oneof![
            Just(BiodieselFeedstock::Unknown),
            Just(BiodieselFeedstock::Canola),
            Just(BiodieselFeedstock::Soy),
            Just(BiodieselFeedstock::Palm),
            Just(BiodieselFeedstock::Tallow),
            Just(BiodieselFeedstock::UsedCookingOil),
        ]
    }

    /// 14 hourly samples with independent temperatures per point in −45 … +15 °C.
    fn path_strategy() -> impl Strategy<Value = Vec<FuelTemperatureSample>> {
        prop::collection::vec((-45.0f64..15.0, -45.0f64..15.0, -45.0f64..15.0), 14).prop_map(|v| {
            v.into_iter()
                .enumerate()
                .map(|(i, (a, b, d))| FuelTemperatureSample {
                    at_s: i as f64 * 3600.0,
                    tank_t_k: c(a),
                    line_t_k: c(b),
                    filter_t_k: c(d),
                })
                .collect()
        })
    }

    /// Mostly plausible times, sometimes any bit pattern.
    fn loose_time_s() -> impl Strategy<Value = f64> {
        prop_oneof![3 => -1e5f64..1e5, 1 => any::<f64>()]
    }

    /// Mostly plausible temperatures (some out of range), sometimes any bit pattern.
    fn loose_t_k() -> impl Strategy<Value = f64> {
        prop_oneof![3 => 150.0f64..400.0, 1 => any::<f64>()]
    }

    fn level_of(
        f: &FuelDescription,
        path: &[FuelTemperatureSample],
        departure_s: f64,
    ) -> GelRiskLevel {
        gel_outlook(&cold_flow_properties(f).unwrap(), path, departure_s)
            .unwrap()
            .level
    }

    fixed_proptest! {
        // A colder path (every point no warmer at every sample) never lowers the risk level, nor
        // raises the lowest temperature or shortens the time below CP (monotonicity of the rules).
        #[test]
        fn colder_path_never_lowers_risk(
            grade in grade_strategy(), path in path_strategy(),
            cooling in prop::collection::vec((0.0f64..10.0, 0.0f64..10.0, 0.0f64..10.0), 14),
            departure_h in 0.0f64..13.0,
        ) {
            let p = grade_properties(grade);
            let colder: Vec<_> = path.iter().zip(&cooling).map(|(s, (a, b, d))| FuelTemperatureSample {
                tank_t_k: s.tank_t_k - a, line_t_k: s.line_t_k - b, filter_t_k: s.filter_t_k - d, ..*s
            }).collect();
            let warm = gel_outlook(&p, &path, departure_h * 3600.0).unwrap();
            let cold = gel_outlook(&p, &colder, departure_h * 3600.0).unwrap();
            prop_assert!(cold.level >= warm.level);
            prop_assert!(cold.lowest_t_k <= warm.lowest_t_k);
            prop_assert!(cold.hours_below_cloud_point >= warm.hours_below_cloud_point - 1e-9);
            prop_assert!(cold.hours_below_cloud_point <= departure_h + 1e-9);
        }

        // More biodiesel never lowers the risk level (CP/CFPP/PP non-decreasing, reference.md §9.6).
        #[test]
        fn more_biodiesel_never_lowers_risk(
            grade in grade_strategy(), feedstock in feedstock_strategy(), path in path_strategy(),
            a in 0.0f64..=1.0, b in 0.0f64..=1.0,
        ) {
            let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
            let mk = |x| FuelDescription {
                biodiesel_fraction: x, feedstock, ..FuelDescription::of_grade(grade)
            };
            prop_assert!(
                level_of(&mk(hi), &path, 46_800.0) >= level_of(&mk(lo), &path, 46_800.0)
            );
        }

        // No. 1 blending (reference.md §9.5) and a timely additive never raise the risk level.
        #[test]
        fn no1_and_timely_additive_never_raise_risk(
            grade in grade_strategy(), feedstock in feedstock_strategy(), path in path_strategy(),
            bio in 0.0f64..=1.0, no1 in 0.0f64..=1.0,
            improvement in 0.0f64..=20.0, above in 5.0f64..20.0,
        ) {
            let plain = FuelDescription {
                biodiesel_fraction: bio, feedstock, ..FuelDescription::of_grade(grade)
            };
            let base_level = level_of(&plain, &path, 46_800.0);
            let blended = FuelDescription { no1_blend_fraction: no1, ..plain };
            prop_assert!(level_of(&blended, &path, 46_800.0) <= base_level);
            let cp_k = cold_flow_properties(&plain).unwrap().cloud_point_k;
            let added_t_k = (cp_k + above).min(INPUT_MAX_T_K);
            let treated = FuelDescription {
                additive: Some(AdditiveTreatment {
                    cfpp_improvement_k: improvement,
                    fuel_t_when_added_k: added_t_k,
                }),
                ..plain
            };
            prop_assert!(level_of(&treated, &path, 46_800.0) <= base_level);
        }

        // Arbitrary numbers never panic: an outlook with finite fields or an error. Samples are
        // sorted by time so that plausible draws reach the whole scan.
        #[test]
        fn arbitrary_samples_never_panic(
            raw in prop::collection::vec((loose_time_s(), loose_t_k(), loose_t_k(), loose_t_k()), 0..6),
            departure in loose_time_s(),
        ) {
            let mut s: Vec<_> = raw
                .into_iter()
                .map(|(at_s, tank_t_k, line_t_k, filter_t_k)| FuelTemperatureSample {
                    at_s, tank_t_k, line_t_k, filter_t_k,
                })
                .collect();
            s.sort_by(|a, b| a.at_s.total_cmp(&b.at_s));
            let p = props(-10.0, -20.0, -25.0);
            if let Ok(o) = gel_outlook(&p, &s, departure) {
                prop_assert!(o.lowest_t_k.is_finite() && o.hours_below_cloud_point.is_finite());
                prop_assert!(o.hours_below_cloud_point >= 0.0);
                let f = FuelDescription::of_grade(FuelGrade::UsNo2);
                let mut out = Vec::new();
                prop_assert!(fuel_advice(&f, &p, &o, None, &mut out).is_ok());
            }
        }
    }
}
