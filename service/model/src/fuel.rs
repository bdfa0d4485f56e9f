//! Diesel fuel cold-flow properties: cloud point (CP), cold filter plugging point (CFPP) and pour
//! point (PP) of the fuel in the tank, from its grade or a supplier certificate, shifted by
//! documented rules for No. 1 diesel (kerosene) blending, biodiesel (FAME) content and a cold-flow
//! additive. Section numbers (§) refer to the project reference sheet `reference.md`.
//!
//! **Grades.**
//! - ASTM D975 No. 1-D, No. 2-D and a winter blend: D975 sets *no* cold-flow limit (§9.2), so their
//!   properties are typical values (estimates; No. 1 CP ≈ −40 °C is a secondary forum quote, §9.5).
//! - EN 590 temperate classes A–F: CFPP maxima +5, 0, −5, −10, −15, −20 °C (§9.3; A–D and F
//!   confirmed, E from memory). EN 590 arctic classes 0–4: CFPP maxima −20 … −44 °C and CP maxima
//!   −10 … −34 °C (§9.3; confirmed, class 0 CP from memory).
//! - The EN 590 limits are maxima: we take **the limit itself as the property** (the conservative
//!   choice; real fuel is at or below it) unless measured values are given ([`FuelBase::Measured`]).
//! - Where no limit exists (CP of temperate classes, PP everywhere) the property is derived from the
//!   CFPP by the typical gaps of §9.4 (estimates): unadditised fuel has CFPP 0–5 K below CP and PP
//!   4–5 K below CP; flow-improved winter fuel has 10–15 K between CP and CFPP. We let the CP–CFPP gap
//!   grow by 2 K per temperate class, from 3 K (class A, unadditised) to 13 K (class F, which matches
//!   the quoted "CFPP −20 °C from CP −7 °C"), and put PP 2 K below CFPP for every grade (for
//!   unadditised fuel with a 3 K gap this is the §9.4 "PP 5 K below CP"; pour-point depressants put PP
//!   lower still, so 2 K is the conservative, high, choice).
//!
//! **Blending rules**, applied in this order:
//! 1. *No. 1 / kerosene* ([`FuelDescription::no1_blend_fraction`], share of the petroleum part): the
//!    only effective way to lower CP (§9.5, confirmed). Modelled as ideal-solubility dilution of the
//!    base fuel's wax (Schröder–van Laar: `1/CP = 1/CP₀ − (R/ΔH)·ln(1 − x)`), with an effective
//!    ΔH calibrated so that 10 % lowers a −8 °C cloud point by 1.5 K, the middle of the 1–2 K per 10 %
//!    rule of thumb (§9.5, from memory). The curve is non-linear (weaker than linear mixing, as §9.5
//!    says for ULSD) and is floored at No. 1's own properties. CFPP and PP move by the same amount.
//! 2. *Biodiesel* ([`FuelDescription::biodiesel_fraction`], share of the whole fuel): each property
//!    follows a piecewise-linear fit through anchors: unchanged up to B5 (D975 fuels and measured
//!    bases: "No. 2 and B5 perform about the same", AFDC, confirmed) or B7 (EN 590 grades, whose
//!    limits already apply with ≤ 7 % FAME, §9.3 confirmed); at B20 a rise of 1–6 K by feedstock,
//!    larger for saturated feedstocks (§9.6, from memory); at B100 the feedstock's own value (§9.6,
//!    confirmed where given). Where the B100 value lies below the B20 anchor the curve stays flat, so
//!    every property is monotonic non-decreasing in the fraction (conservative).
//! 3. *Additive* ([`AdditiveTreatment`]): lowers CFPP and PP by the claimed improvement, never CP
//!    (§9.5, confirmed). Added at least 5 K above CP it earns its full effect; the effect falls
//!    linearly to 15 % when added at or below CP, because the wax has already formed (estimate,
//!    common practice (no source)).
//!
//! **Units:** temperatures in kelvin, fractions dimensionless in 0..1.
//! **Validity:** user-supplied temperatures −80 … +40 °C; derived properties −110 … +50 °C.
//! Every numeric default here is an estimate unless its doc says confirmed.

use crate::error::{ModelError, check_range};

/// 0 °C in kelvin (kept local so that this module depends only on `error`).
const ZERO_CELSIUS_K: f64 = 273.15;

/// Universal gas constant, J/(mol K). CODATA 2018, exact in the 2019 SI (reference §0, from memory).
const R_UNIVERSAL_J_PER_MOL_K: f64 = 8.314_462_618;

const fn celsius_k(t_c: f64) -> f64 {
    t_c + ZERO_CELSIUS_K
}

/// Lowest temperature accepted from the user for a fuel property or fuel temperature (−80 °C).
pub const INPUT_MIN_T_K: f64 = 193.15;
/// Highest temperature accepted from the user for a fuel property or fuel temperature (+40 °C).
pub const INPUT_MAX_T_K: f64 = 313.15;
/// Lowest derived property the model produces and accepts (−110 °C: a 20 K additive on a −80 °C
/// fuel, with slack).
pub const PROPERTY_MIN_T_K: f64 = 163.15;
/// Highest derived property the model produces and accepts (+50 °C: B20 of a +40 °C base is +46 °C).
pub const PROPERTY_MAX_T_K: f64 = 323.15;

/// Rounding slack for the consistency checks of derived properties, K.
const DERIVED_CONSISTENCY_SLACK_K: f64 = 1e-6;

/// Tolerance for a measured CFPP above the measured CP: the CFPP reproducibility is about 4 °C
/// (reference §9.1, cold-flow.eu, confirmed). Beyond it the certificate is taken as inconsistent.
pub const MEASURED_CFPP_ABOVE_CLOUD_POINT_TOLERANCE_K: f64 = 4.0;

/// CP–CFPP gap above which the fuel is taken to contain a flow improver: unadditised fuel has CFPP
/// 0–5 K below CP (reference §9.4, from memory).
pub const UNADDITISED_MAX_CLOUD_TO_CFPP_GAP_K: f64 = 5.0;

/// Typical CFPP improvement of an aftermarket cold-flow additive when the label gives none.
/// Estimate: refiners reach 10–15 K CP–CFPP gaps with flow improvers against 0–5 K unadditised
/// (reference §9.4), about 10 K of improvement; a consumer dose is taken a little lower, 8 K
/// (estimate, common practice (no source)).
pub const TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K: f64 = 8.0;

/// Largest claimed CFPP improvement the model accepts (label claims beyond this are not credible;
/// best refinery practice reaches 15 K gaps, reference §9.4). Estimate.
pub const MAX_ADDITIVE_CFPP_IMPROVEMENT_K: f64 = 20.0;

/// An additive added at least this far above the fuel's cloud point earns its full effect.
/// Estimate, common practice (no source).
pub const ADDITIVE_FULL_EFFECT_ABOVE_CLOUD_POINT_K: f64 = 5.0;

/// Share of the claimed effect an additive still earns when added at or below the cloud point, when
/// wax crystals have already formed. Estimate within the 10–20 % of the project brief, common
/// practice (no source).
pub const ADDITIVE_RESIDUAL_EFFECT_BELOW_CLOUD_POINT: f64 = 0.15;

/// Effective enthalpy of dissolution of the base fuel's wax for the No. 1 dilution rule, J/mol.
/// Calibrated (estimate) so that 10 % No. 1 lowers a −8 °C CP by 1.5 K, the middle of the 1–2 K per
/// 10 % rule of thumb (reference §9.5, from memory). Pure n-alkane fusion enthalpies are higher
/// (≈ 50–70 kJ/mol, from memory); the effective value absorbs non-ideality.
pub const NO1_DILUTION_ENTHALPY_J_PER_MOL: f64 = 41_000.0;

/// Biodiesel fraction of the B20 anchor of the blending rule.
const B20_FRACTION: f64 = 0.20;

/// FAME share already covered by the limits of a D975 grade (D975 allows B5, reference §9.2, from
/// memory; "No. 2 and B5 perform about the same", AFDC, confirmed) and by a measured base.
pub const D975_FAME_ALLOWANCE: f64 = 0.05;

/// FAME share already covered by the limits of an EN 590 grade (FAME ≤ 7 % v/v, reference §9.3,
/// confirmed).
pub const EN590_FAME_ALLOWANCE: f64 = 0.07;

/// Lowest and highest cetane number accepted (the ignition correlations are fitted to fuels within
/// roughly this span; estimate).
const CETANE_RANGE: (f64, f64) = (20.0, 80.0);

/// A fuel grade with published (EN 590) or typical (ASTM D975) cold-flow properties.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum FuelGrade {
    /// ASTM D975 Grade No. 1-D (light, kerosene-like). D975 sets no cold-flow limit: typical values.
    UsNo1,
    /// ASTM D975 Grade No. 2-D, unadditised. D975 sets no cold-flow limit: typical values.
    UsNo2,
    /// A winterised No. 2-D (No. 1 blended in and a flow improver added), as sold in U.S. winter.
    /// Typical values (estimate).
    UsWinterBlend,
    /// EN 590 temperate class A–F (CFPP maximum per class).
    En590Temperate(TemperateClass),
    /// EN 590 arctic / severe-winter class 0–4 (CFPP and cloud point maxima per class).
    En590Arctic(ArcticClass),
}

/// EN 590 temperate climate class; the CFPP maximum falls 5 K per class from +5 °C (A) to −20 °C (F).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum TemperateClass {
    /// CFPP max +5 °C.
    A,
    /// CFPP max 0 °C.
    B,
    /// CFPP max −5 °C.
    C,
    /// CFPP max −10 °C.
    D,
    /// CFPP max −15 °C (from memory).
    E,
    /// CFPP max −20 °C.
    F,
}

/// EN 590 arctic / severe-winter class.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ArcticClass {
    /// CFPP max −20 °C, CP max −10 °C.
    Class0,
    /// CFPP max −26 °C, CP max −16 °C.
    Class1,
    /// CFPP max −32 °C, CP max −22 °C.
    Class2,
    /// CFPP max −38 °C, CP max −28 °C.
    Class3,
    /// CFPP max −44 °C, CP max −34 °C.
    Class4,
}

/// The three cold-flow temperatures of a fuel.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ColdFlowProperties {
    /// Cloud point (ASTM D2500 / D5771–D5773): first wax crystals appear, K.
    pub cloud_point_k: f64,
    /// Cold filter plugging point (ASTM D6371 / EN 116): the fuel fails a 45 µm filter, K.
    pub cfpp_k: f64,
    /// Pour point (ASTM D97): the fuel no longer moves, K.
    pub pour_point_k: f64,
}

/// Where the fuel's base properties come from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FuelBase {
    /// A grade from the catalog: its published limits or typical values.
    Grade(FuelGrade),
    /// Measured properties (supplier certificate) of the base fuel *before* the biodiesel, No. 1 and
    /// additive listed in the same [`FuelDescription`]. For a certificate of the finished fuel, give
    /// zero fractions and no additive.
    Measured(ColdFlowProperties),
}

/// Feedstock of the biodiesel (fatty-acid methyl ester) in the blend.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum BiodieselFeedstock {
    /// Not known: the worst case of the published range is taken (conservative).
    Unknown,
    /// Canola (low-erucic rape) methyl ester, mostly unsaturated. Named `Canola` to keep the word
    /// the project reserves out of identifiers.
    Canola,
    /// Soybean methyl ester.
    Soy,
    /// Palm methyl ester (highly saturated).
    Palm,
    /// Tallow / animal-fat methyl ester (highly saturated).
    Tallow,
    /// Used cooking oil / yellow grease methyl ester.
    UsedCookingOil,
}

/// A cold-flow additive put into the tank.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AdditiveTreatment {
    /// CFPP improvement claimed by the product label at its dose, K (0 … 20). Use
    /// [`AdditiveTreatment::typical`] for the documented default.
    pub cfpp_improvement_k: f64,
    /// Fuel temperature when the additive was mixed in, K: below the cloud point it earns little.
    pub fuel_t_when_added_k: f64,
}

impl AdditiveTreatment {
    /// An additive with the typical improvement [`TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K`] (estimate).
    pub const fn typical(fuel_t_when_added_k: f64) -> Self {
        Self {
            cfpp_improvement_k: TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K,
            fuel_t_when_added_k,
        }
    }
}

/// What is in the tank.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FuelDescription {
    /// The base fuel: a grade or measured properties.
    pub base: FuelBase,
    /// Volume share of biodiesel (FAME) in the whole fuel, 0..1 (0.2 = B20).
    pub biodiesel_fraction: f64,
    /// Feedstock of that biodiesel (ignored when the fraction is within the grade's allowance).
    pub feedstock: BiodieselFeedstock,
    /// Volume share of No. 1 diesel / kerosene in the petroleum (non-FAME) part, 0..1.
    pub no1_blend_fraction: f64,
    /// Cold-flow additive added to the tank, if any.
    pub additive: Option<AdditiveTreatment>,
    /// Cetane number if known (certificate); otherwise the grade default applies.
    pub cetane_number: Option<f64>,
}

impl FuelDescription {
    /// A plain fuel of one grade: no biodiesel beyond the grade's allowance, no No. 1, no additive.
    pub const fn of_grade(grade: FuelGrade) -> Self {
        Self {
            base: FuelBase::Grade(grade),
            biodiesel_fraction: 0.0,
            feedstock: BiodieselFeedstock::Unknown,
            no1_blend_fraction: 0.0,
            additive: None,
            cetane_number: None,
        }
    }

    /// Checks every field: fractions in 0..1, temperatures in −80 … +40 °C, measured properties
    /// consistent (see [`validate_measured_properties`]), additive improvement in 0 … 20 K,
    /// cetane number in 20 … 80.
    pub fn validate(&self) -> Result<(), ModelError> {
        if let FuelBase::Measured(m) = &self.base {
            validate_measured_properties(m)?;
        }
        check_range(
            "biodiesel_fraction",
            self.biodiesel_fraction,
            0.0,
            1.0,
            "a volume share must lie in 0..1",
        )?;
        check_range(
            "no1_blend_fraction",
            self.no1_blend_fraction,
            0.0,
            1.0,
            "a volume share must lie in 0..1",
        )?;
        if let Some(a) = &self.additive {
            check_range(
                "additive.cfpp_improvement_k",
                a.cfpp_improvement_k,
                0.0,
                MAX_ADDITIVE_CFPP_IMPROVEMENT_K,
                "an additive CFPP improvement must lie in 0..20 K",
            )?;
            check_range(
                "additive.fuel_t_when_added_k",
                a.fuel_t_when_added_k,
                INPUT_MIN_T_K,
                INPUT_MAX_T_K,
                "fuel temperature must lie in -80..+40 °C",
            )?;
        }
        if let Some(cn) = self.cetane_number {
            check_range(
                "cetane_number",
                cn,
                CETANE_RANGE.0,
                CETANE_RANGE.1,
                "cetane number must lie in 20..80",
            )?;
        }
        Ok(())
    }
}

/// One row of the grade catalog offered by the API's describe call.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GradeEntry {
    /// Stable identifier of our own (e.g. `en590-arctic-2`).
    pub id: &'static str,
    /// Human-readable label.
    pub label: &'static str,
    /// The grade.
    pub grade: FuelGrade,
    /// Cold-flow properties the model uses for it.
    pub properties: ColdFlowProperties,
    /// Default cetane number.
    pub cetane_number: f64,
    /// Where the numbers come from and which are estimates.
    pub origin: &'static str,
}

/// Index of a temperate class, A = 0 … F = 5.
const fn temperate_index(c: TemperateClass) -> usize {
    match c {
        TemperateClass::A => 0,
        TemperateClass::B => 1,
        TemperateClass::C => 2,
        TemperateClass::D => 3,
        TemperateClass::E => 4,
        TemperateClass::F => 5,
    }
}

/// Index of an arctic class, 0 … 4.
const fn arctic_index(c: ArcticClass) -> usize {
    match c {
        ArcticClass::Class0 => 0,
        ArcticClass::Class1 => 1,
        ArcticClass::Class2 => 2,
        ArcticClass::Class3 => 3,
        ArcticClass::Class4 => 4,
    }
}

/// EN 590 temperate CFPP maxima A–F, °C (reference §9.3; A–D, F confirmed; E from memory).
const EN590_TEMPERATE_CFPP_MAX_C: [f64; 6] = [5.0, 0.0, -5.0, -10.0, -15.0, -20.0];
/// EN 590 arctic CFPP maxima 0–4, °C (reference §9.3, confirmed).
const EN590_ARCTIC_CFPP_MAX_C: [f64; 5] = [-20.0, -26.0, -32.0, -38.0, -44.0];
/// EN 590 arctic cloud point maxima 0–4, °C (reference §9.3; 1–4 confirmed, class 0 from memory).
const EN590_ARCTIC_CLOUD_POINT_MAX_C: [f64; 5] = [-10.0, -16.0, -22.0, -28.0, -34.0];
/// EN 590 arctic cetane number minima 0–4 (reference §9.3, confirmed).
const EN590_ARCTIC_CETANE_MIN: [f64; 5] = [49.0, 49.0, 48.0, 47.0, 47.0];

/// CP–CFPP gap of temperate class A (unadditised, inside the 0–5 K of §9.4), K. Estimate.
const TEMPERATE_GAP_CLASS_A_K: f64 = 3.0;
/// Growth of the CP–CFPP gap per temperate class (3 K at A to 13 K at F, §9.4), K. Estimate.
const TEMPERATE_GAP_STEP_K: f64 = 2.0;
/// PP below CFPP for every catalog grade, K (see module doc). Estimate.
const PP_BELOW_CFPP_K: f64 = 2.0;
/// CP–CFPP gap of unadditised D975 grades, K (inside the 0–5 K of §9.4). Estimate.
const D975_UNADDITISED_GAP_K: f64 = 3.0;
/// CP–CFPP gap of the flow-improved U.S. winter blend, K (middle of 10–15 K, §9.4). Estimate.
const D975_WINTER_GAP_K: f64 = 12.0;

/// Cloud point, CFPP and pour point of a grade in °C.
const fn grade_celsius(g: FuelGrade) -> (f64, f64, f64) {
    let (cp_c, cfpp_c) = match g {
        // No. 1-D CP ≈ −40 °C (reference §9.5, secondary forum quote).
        FuelGrade::UsNo1 => (-40.0, -40.0 - D975_UNADDITISED_GAP_K),
        // Typical unadditised No. 2-D CP ≈ −8 °C (≈ 18 °F), from memory.
        FuelGrade::UsNo2 => (-8.0, -8.0 - D975_UNADDITISED_GAP_K),
        // Typical winterised No. 2-D CP ≈ −18 °C (≈ 0 °F), from memory.
        FuelGrade::UsWinterBlend => (-18.0, -18.0 - D975_WINTER_GAP_K),
        FuelGrade::En590Temperate(c) => {
            let i = temperate_index(c);
            let cfpp_c = EN590_TEMPERATE_CFPP_MAX_C[i];
            let gap_k = TEMPERATE_GAP_CLASS_A_K + TEMPERATE_GAP_STEP_K * i as f64;
            (cfpp_c + gap_k, cfpp_c)
        }
        FuelGrade::En590Arctic(c) => {
            let i = arctic_index(c);
            (
                EN590_ARCTIC_CLOUD_POINT_MAX_C[i],
                EN590_ARCTIC_CFPP_MAX_C[i],
            )
        }
    };
    (cp_c, cfpp_c, cfpp_c - PP_BELOW_CFPP_K)
}

/// Cold-flow properties of a grade (see the module doc and [`grade_origin`] for where each number
/// comes from). EN 590 limits are taken as the properties themselves (conservative).
pub const fn grade_properties(g: FuelGrade) -> ColdFlowProperties {
    let (cp_c, cfpp_c, pp_c) = grade_celsius(g);
    ColdFlowProperties {
        cloud_point_k: celsius_k(cp_c),
        cfpp_k: celsius_k(cfpp_c),
        pour_point_k: celsius_k(pp_c),
    }
}

/// Default cetane number of a grade: the specification minimum (conservative). ASTM D975 No. 1-D and
/// No. 2-D: 40 (reference §10, from memory; typical U.S. fuel is nearer 45, from memory). EN 590
/// temperate: 51; arctic classes 0–4: 49, 49, 48, 47, 47 (reference §9.3, confirmed).
pub const fn default_cetane_number(g: FuelGrade) -> f64 {
    match g {
        FuelGrade::UsNo1 | FuelGrade::UsNo2 | FuelGrade::UsWinterBlend => 40.0,
        FuelGrade::En590Temperate(_) => 51.0,
        FuelGrade::En590Arctic(c) => EN590_ARCTIC_CETANE_MIN[arctic_index(c)],
    }
}

/// Share of FAME already covered by a grade's properties (B5 for D975, B7 for EN 590).
pub const fn grade_fame_allowance(g: FuelGrade) -> f64 {
    match g {
        FuelGrade::UsNo1 | FuelGrade::UsNo2 | FuelGrade::UsWinterBlend => D975_FAME_ALLOWANCE,
        FuelGrade::En590Temperate(_) | FuelGrade::En590Arctic(_) => EN590_FAME_ALLOWANCE,
    }
}

/// Stable identifier of a grade, used by the catalog and the API.
pub const fn grade_id(g: FuelGrade) -> &'static str {
    match g {
        FuelGrade::UsNo1 => "d975-no1",
        FuelGrade::UsNo2 => "d975-no2",
        FuelGrade::UsWinterBlend => "d975-winter-blend",
        FuelGrade::En590Temperate(c) => match c {
            TemperateClass::A => "en590-a",
            TemperateClass::B => "en590-b",
            TemperateClass::C => "en590-c",
            TemperateClass::D => "en590-d",
            TemperateClass::E => "en590-e",
            TemperateClass::F => "en590-f",
        },
        FuelGrade::En590Arctic(c) => match c {
            ArcticClass::Class0 => "en590-arctic-0",
            ArcticClass::Class1 => "en590-arctic-1",
            ArcticClass::Class2 => "en590-arctic-2",
            ArcticClass::Class3 => "en590-arctic-3",
            ArcticClass::Class4 => "en590-arctic-4",
        },
    }
}

const fn grade_label(g: FuelGrade) -> &'static str {
    match g {
        FuelGrade::UsNo1 => "ASTM D975 No. 1-D (typical)",
        FuelGrade::UsNo2 => "ASTM D975 No. 2-D, unadditised (typical)",
        FuelGrade::UsWinterBlend => "ASTM D975 winter blend, No. 1 + flow improver (typical)",
        FuelGrade::En590Temperate(c) => match c {
            TemperateClass::A => "EN 590 temperate class A (CFPP max +5 °C)",
            TemperateClass::B => "EN 590 temperate class B (CFPP max 0 °C)",
            TemperateClass::C => "EN 590 temperate class C (CFPP max -5 °C)",
            TemperateClass::D => "EN 590 temperate class D (CFPP max -10 °C)",
            TemperateClass::E => "EN 590 temperate class E (CFPP max -15 °C)",
            TemperateClass::F => "EN 590 temperate class F (CFPP max -20 °C)",
        },
        FuelGrade::En590Arctic(c) => match c {
            ArcticClass::Class0 => "EN 590 arctic class 0 (CFPP max -20 °C, CP max -10 °C)",
            ArcticClass::Class1 => "EN 590 arctic class 1 (CFPP max -26 °C, CP max -16 °C)",
            ArcticClass::Class2 => "EN 590 arctic class 2 (CFPP max -32 °C, CP max -22 °C)",
            ArcticClass::Class3 => "EN 590 arctic class 3 (CFPP max -38 °C, CP max -28 °C)",
            ArcticClass::Class4 => "EN 590 arctic class 4 (CFPP max -44 °C, CP max -34 °C)",
        },
    }
}

/// Where a grade's numbers come from, with their confidence.
pub const fn grade_origin(g: FuelGrade) -> &'static str {
    match g {
        FuelGrade::UsNo1 => {
            "ASTM D975 sets no cold-flow limit. CP -40 °C is a typical No. 1 value (secondary \
             source); CFPP 3 K and PP 5 K below CP from unadditised gaps. All estimates."
        }
        FuelGrade::UsNo2 => {
            "ASTM D975 sets no cold-flow limit. CP -8 °C is a typical unadditised No. 2 value \
             (from memory); CFPP 3 K and PP 5 K below CP from unadditised gaps. All estimates."
        }
        FuelGrade::UsWinterBlend => {
            "ASTM D975 sets no cold-flow limit. CP -18 °C is a typical winterised No. 2 value \
             (from memory); CFPP 12 K below CP (flow-improved gap 10-15 K), PP 2 K below CFPP. \
             All estimates."
        }
        FuelGrade::En590Temperate(TemperateClass::E) => {
            "EN 590 CFPP maximum taken as the property (from memory for class E). CP and PP \
             not specified: CP from the CFPP by a class gap of 3-13 K, PP 2 K below CFPP \
             (estimates)."
        }
        FuelGrade::En590Temperate(_) => {
            "EN 590 CFPP maximum taken as the property (confirmed). CP and PP not specified: CP \
             from the CFPP by a class gap of 3-13 K, PP 2 K below CFPP (estimates)."
        }
        FuelGrade::En590Arctic(ArcticClass::Class0) => {
            "EN 590 arctic CFPP and cloud point maxima taken as the properties (CFPP confirmed, \
             CP from memory for class 0). PP not specified: 2 K below CFPP (estimate)."
        }
        FuelGrade::En590Arctic(_) => {
            "EN 590 arctic CFPP and cloud point maxima taken as the properties (confirmed). PP \
             not specified: 2 K below CFPP (estimate)."
        }
    }
}

const fn catalog_entry(grade: FuelGrade) -> GradeEntry {
    GradeEntry {
        id: grade_id(grade),
        label: grade_label(grade),
        grade,
        properties: grade_properties(grade),
        cetane_number: default_cetane_number(grade),
        origin: grade_origin(grade),
    }
}

static CATALOG: [GradeEntry; 14] = [
    catalog_entry(FuelGrade::UsNo1),
    catalog_entry(FuelGrade::UsNo2),
    catalog_entry(FuelGrade::UsWinterBlend),
    catalog_entry(FuelGrade::En590Temperate(TemperateClass::A)),
    catalog_entry(FuelGrade::En590Temperate(TemperateClass::B)),
    catalog_entry(FuelGrade::En590Temperate(TemperateClass::C)),
    catalog_entry(FuelGrade::En590Temperate(TemperateClass::D)),
    catalog_entry(FuelGrade::En590Temperate(TemperateClass::E)),
    catalog_entry(FuelGrade::En590Temperate(TemperateClass::F)),
    catalog_entry(FuelGrade::En590Arctic(ArcticClass::Class0)),
    catalog_entry(FuelGrade::En590Arctic(ArcticClass::Class1)),
    catalog_entry(FuelGrade::En590Arctic(ArcticClass::Class2)),
    catalog_entry(FuelGrade::En590Arctic(ArcticClass::Class3)),
    catalog_entry(FuelGrade::En590Arctic(ArcticClass::Class4)),
];

/// Every grade the model knows, for the API's describe call.
pub fn grade_catalog() -> &'static [GradeEntry] {
    &CATALOG
}

/// The grade with a catalog identifier, if any.
pub fn grade_from_id(id: &str) -> Option<FuelGrade> {
    CATALOG.iter().find(|e| e.id == id).map(|e| e.grade)
}

/// B100 cloud point, CFPP and pour point of a feedstock, and the B20 rise above the base, in °C / K.
///
/// CP: tallow 14.5, soy 2.3, canola −8.3 °C (Elwell, CSU thesis, reference §9.6,
/// confirmed); palm +15 °C (13–16 °C from memory, capped at the AFDC upper bound); used cooking oil
/// +9 °C (yellow grease 5–9 °C from memory, upper end); unknown +15 °C (upper end of the AFDC B100
/// span −3 … +15 °C, confirmed; conservative). CFPP 2 K and PP 3 K below CP ("the CP–PP gap of
/// biodiesel is only a few degrees", §9.4, secondary; estimate). B20 rise: 1–6 K, more for
/// saturated feedstocks (§9.6, from memory): canola 1, soy 2, used cooking oil 4, palm, tallow and
/// unknown 6 K (estimates).
const fn feedstock_anchors(f: BiodieselFeedstock) -> (f64, f64) {
    match f {
        BiodieselFeedstock::Unknown => (15.0, 6.0),
        BiodieselFeedstock::Canola => (-8.3, 1.0),
        BiodieselFeedstock::Soy => (2.3, 2.0),
        BiodieselFeedstock::Palm => (15.0, 6.0),
        BiodieselFeedstock::Tallow => (14.5, 6.0),
        BiodieselFeedstock::UsedCookingOil => (9.0, 4.0),
    }
}

/// B100 CFPP below its cloud point, K (estimate, see [`b100_properties`]).
const B100_CFPP_BELOW_CLOUD_POINT_K: f64 = 2.0;
/// B100 pour point below its cloud point, K (estimate, see [`b100_properties`]).
const B100_PP_BELOW_CLOUD_POINT_K: f64 = 3.0;

/// Cold-flow properties of neat biodiesel (B100) of a feedstock. CP per reference §9.6 (tallow
/// 14.5, soy 2.3, canola −8.3 °C confirmed; palm 15, used cooking oil 9, unknown 15 °C estimates
/// at the upper end of the published ranges); CFPP 2 K and PP 3 K below CP (estimates).
pub const fn b100_properties(f: BiodieselFeedstock) -> ColdFlowProperties {
    let (cp_c, _) = feedstock_anchors(f);
    ColdFlowProperties {
        cloud_point_k: celsius_k(cp_c),
        cfpp_k: celsius_k(cp_c - B100_CFPP_BELOW_CLOUD_POINT_K),
        pour_point_k: celsius_k(cp_c - B100_PP_BELOW_CLOUD_POINT_K),
    }
}

/// Rise of each cold-flow property at B20 above the base fuel, K (1–6 K, reference §9.6, from
/// memory; per-feedstock values are estimates, worst case for an unknown feedstock).
pub const fn b20_rise_k(f: BiodieselFeedstock) -> f64 {
    feedstock_anchors(f).1
}

/// Checks a property triple produced by the model or passed between modules: each temperature in
/// −110 … +50 °C, PP not above CP, CFPP not more than 4 K above CP (both with a 1 µK rounding
/// slack).
pub fn validate_properties(p: &ColdFlowProperties) -> Result<(), ModelError> {
    const WHY: &str = "fuel cold-flow temperature must lie in -110..+50 °C";
    check_range(
        "cloud_point_k",
        p.cloud_point_k,
        PROPERTY_MIN_T_K,
        PROPERTY_MAX_T_K,
        WHY,
    )?;
    check_range("cfpp_k", p.cfpp_k, PROPERTY_MIN_T_K, PROPERTY_MAX_T_K, WHY)?;
    check_range(
        "pour_point_k",
        p.pour_point_k,
        PROPERTY_MIN_T_K,
        PROPERTY_MAX_T_K,
        WHY,
    )?;
    check_consistency(p, DERIVED_CONSISTENCY_SLACK_K)
}

/// Checks measured properties (a supplier certificate): each temperature in −80 … +40 °C, the pour
/// point not above the cloud point (a fuel cannot stop pouring before wax appears), the CFPP not
/// more than [`MEASURED_CFPP_ABOVE_CLOUD_POINT_TOLERANCE_K`] above the cloud point.
pub fn validate_measured_properties(p: &ColdFlowProperties) -> Result<(), ModelError> {
    const WHY: &str = "measured fuel cold-flow temperature must lie in -80..+40 °C";
    check_range(
        "cloud_point_k",
        p.cloud_point_k,
        INPUT_MIN_T_K,
        INPUT_MAX_T_K,
        WHY,
    )?;
    check_range("cfpp_k", p.cfpp_k, INPUT_MIN_T_K, INPUT_MAX_T_K, WHY)?;
    check_range(
        "pour_point_k",
        p.pour_point_k,
        INPUT_MIN_T_K,
        INPUT_MAX_T_K,
        WHY,
    )?;
    check_consistency(p, 0.0)
}

fn check_consistency(p: &ColdFlowProperties, slack_k: f64) -> Result<(), ModelError> {
    if p.cfpp_k > p.cloud_point_k + MEASURED_CFPP_ABOVE_CLOUD_POINT_TOLERANCE_K + slack_k {
        return Err(ModelError::Inconsistent(
            "cfpp_k is more than 4 K (the CFPP reproducibility) above cloud_point_k",
        ));
    }
    if p.pour_point_k > p.cloud_point_k + slack_k {
        return Err(ModelError::Inconsistent(
            "pour_point_k is above cloud_point_k: fuel cannot stop pouring before wax appears",
        ));
    }
    Ok(())
}

/// True when the CP–CFPP gap is wider than unadditised fuel shows (> 5 K, reference §9.4), i.e. the
/// fuel must contain a flow improver.
pub fn implies_flow_improver(p: &ColdFlowProperties) -> bool {
    p.cloud_point_k - p.cfpp_k > UNADDITISED_MAX_CLOUD_TO_CFPP_GAP_K
}

/// Cloud point of a petroleum fuel after replacing a share of it with No. 1 / kerosene, by ideal
/// dilution of its wax (Schröder–van Laar, effective ΔH [`NO1_DILUTION_ENTHALPY_J_PER_MOL`]),
/// before the floor at No. 1's own cloud point. `share` in 0..1; 1 gives 0 K (no wax left).
pub fn no1_dilution_cloud_point_k(base_cloud_point_k: f64, share: f64) -> f64 {
    if share >= 1.0 {
        return 0.0;
    }
    let inv_t = 1.0 / base_cloud_point_k
        - R_UNIVERSAL_J_PER_MOL_K / NO1_DILUTION_ENTHALPY_J_PER_MOL * (1.0 - share).ln();
    1.0 / inv_t
}

fn blend_no1(base: &ColdFlowProperties, share: f64) -> ColdFlowProperties {
    if share <= 0.0 {
        return *base;
    }
    let no1 = grade_properties(FuelGrade::UsNo1);
    let delta_k = no1_dilution_cloud_point_k(base.cloud_point_k, share) - base.cloud_point_k;
    // Never below No. 1's own value, never above the base (we do not model a warmer No. 1).
    let mix = |base_k: f64, no1_k: f64| base_k.min((base_k + delta_k).max(no1_k));
    ColdFlowProperties {
        cloud_point_k: mix(base.cloud_point_k, no1.cloud_point_k),
        cfpp_k: mix(base.cfpp_k, no1.cfpp_k),
        pour_point_k: mix(base.pour_point_k, no1.pour_point_k),
    }
}

fn blend_biodiesel(
    base: &ColdFlowProperties,
    fraction: f64,
    feedstock: BiodieselFeedstock,
    allowance: f64,
) -> ColdFlowProperties {
    if fraction <= allowance {
        return *base;
    }
    let b100 = b100_properties(feedstock);
    let rise_k = b20_rise_k(feedstock);
    let shift = |base_k: f64, b100_k: f64| {
        let at_b20_k = base_k + rise_k;
        if fraction <= B20_FRACTION {
            base_k + rise_k * (fraction - allowance) / (B20_FRACTION - allowance)
        } else {
            let at_b100_k = b100_k.max(at_b20_k);
            at_b20_k + (at_b100_k - at_b20_k) * (fraction - B20_FRACTION) / (1.0 - B20_FRACTION)
        }
    };
    ColdFlowProperties {
        cloud_point_k: shift(base.cloud_point_k, b100.cloud_point_k),
        cfpp_k: shift(base.cfpp_k, b100.cfpp_k),
        pour_point_k: shift(base.pour_point_k, b100.pour_point_k),
    }
}

/// Share of its claimed effect an additive earns when mixed in at `fuel_t_when_added_k` into fuel
/// with cloud point `cloud_point_k`: 1 at ≥ 5 K above CP, falling linearly to 0.15 at or below CP
/// (estimate, common practice (no source)). Non-finite inputs give the residual 0.15.
pub fn additive_effectiveness(fuel_t_when_added_k: f64, cloud_point_k: f64) -> f64 {
    let above_k = fuel_t_when_added_k - cloud_point_k;
    let ramp = if above_k > 0.0 {
        (above_k / ADDITIVE_FULL_EFFECT_ABOVE_CLOUD_POINT_K).min(1.0)
    } else {
        0.0
    };
    ADDITIVE_RESIDUAL_EFFECT_BELOW_CLOUD_POINT
        + (1.0 - ADDITIVE_RESIDUAL_EFFECT_BELOW_CLOUD_POINT) * ramp
}

fn apply_additive(p: &ColdFlowProperties, a: &AdditiveTreatment) -> ColdFlowProperties {
    let gain_k =
        a.cfpp_improvement_k * additive_effectiveness(a.fuel_t_when_added_k, p.cloud_point_k);
    ColdFlowProperties {
        cloud_point_k: p.cloud_point_k,
        cfpp_k: p.cfpp_k - gain_k,
        pour_point_k: p.pour_point_k - gain_k,
    }
}

/// Cold-flow properties of the fuel in the tank: the base (grade or measured), then No. 1 blending,
/// then biodiesel, then the additive, by the rules in the module doc.
pub fn cold_flow_properties(f: &FuelDescription) -> Result<ColdFlowProperties, ModelError> {
    f.validate()?;
    let (base, allowance) = match f.base {
        FuelBase::Grade(g) => (grade_properties(g), grade_fame_allowance(g)),
        FuelBase::Measured(m) => (m, D975_FAME_ALLOWANCE),
    };
    let petroleum = blend_no1(&base, f.no1_blend_fraction);
    let blend = blend_biodiesel(&petroleum, f.biodiesel_fraction, f.feedstock, allowance);
    Ok(match &f.additive {
        Some(a) => apply_additive(&blend, a),
        None => blend,
    })
}

/// Cetane number of the fuel: the stated value, else the grade default ([`default_cetane_number`]),
/// else for a measured base the D975 minimum 40 (conservative). Biodiesel usually raises it; that
/// is ignored (conservative).
pub fn cetane_number(f: &FuelDescription) -> Result<f64, ModelError> {
    f.validate()?;
    Ok(match (f.cetane_number, f.base) {
        (Some(cn), _) => cn,
        (None, FuelBase::Grade(g)) => default_cetane_number(g),
        (None, FuelBase::Measured(_)) => default_cetane_number(FuelGrade::UsNo2),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn c(t_c: f64) -> f64 {
        t_c + 273.15
    }

    fn cp_c(p: &ColdFlowProperties) -> f64 {
        p.cloud_point_k - 273.15
    }

    fn with(base: FuelBase) -> FuelDescription {
        FuelDescription {
            base,
            ..FuelDescription::of_grade(FuelGrade::UsNo2)
        }
    }

    const NO2: FuelGrade = FuelGrade::UsNo2;

    const ALL_FEEDSTOCKS: [BiodieselFeedstock; 6] = [
        BiodieselFeedstock::Unknown,
        BiodieselFeedstock::Canola,
        BiodieselFeedstock::Soy,
        BiodieselFeedstock::Palm,
        BiodieselFeedstock::Tallow,
        BiodieselFeedstock::UsedCookingOil,
    ];

    #[test]
    fn en590_temperate_cfpp_limits_exact() {
        // reference.md §9.3, EN 590 temperate CFPP maxima: A–D and F confirmed (mbclub forum,
        // piglix EN_590), E = −15 °C from memory.
        let expected = [
            (TemperateClass::A, 5.0),
            (TemperateClass::B, 0.0),
            (TemperateClass::C, -5.0),
            (TemperateClass::D, -10.0),
            (TemperateClass::E, -15.0),
            (TemperateClass::F, -20.0),
        ];
        for (class, cfpp_c) in expected {
            let p = grade_properties(FuelGrade::En590Temperate(class));
            assert_eq!(p.cfpp_k, c(cfpp_c), "class {class:?}");
        }
    }

    #[test]
    fn en590_arctic_limits_exact() {
        // reference.md §9.3, EN 590 arctic classes 0–4: CFPP −20/−26/−32/−38/−44 °C (confirmed,
        // forum list); CP −10/−16/−22/−28/−34 °C (qiqiwenku table excerpt, confirmed for 1–4;
        // class 0 from memory).
        let expected = [
            (ArcticClass::Class0, -20.0, -10.0),
            (ArcticClass::Class1, -26.0, -16.0),
            (ArcticClass::Class2, -32.0, -22.0),
            (ArcticClass::Class3, -38.0, -28.0),
            (ArcticClass::Class4, -44.0, -34.0),
        ];
        for (class, cfpp_c, cp_c) in expected {
            let p = grade_properties(FuelGrade::En590Arctic(class));
            assert_eq!(p.cfpp_k, c(cfpp_c), "class {class:?}");
            assert_eq!(p.cloud_point_k, c(cp_c), "class {class:?}");
        }
    }

    #[test]
    fn cetane_defaults_match_specifications() {
        // reference.md §9.3: EN 590 temperate CN ≥ 51, arctic 49/49/48/47/47 (confirmed).
        assert_eq!(
            default_cetane_number(FuelGrade::En590Temperate(TemperateClass::C)),
            51.0
        );
        let arctic = [
            (ArcticClass::Class0, 49.0),
            (ArcticClass::Class1, 49.0),
            (ArcticClass::Class2, 48.0),
            (ArcticClass::Class3, 47.0),
            (ArcticClass::Class4, 47.0),
        ];
        for (class, cn) in arctic {
            assert_eq!(default_cetane_number(FuelGrade::En590Arctic(class)), cn);
        }
        // reference.md §10: ASTM D975 No. 1-D and No. 2-D cetane number ≥ 40 (from memory).
        assert_eq!(default_cetane_number(FuelGrade::UsNo1), 40.0);
        assert_eq!(default_cetane_number(NO2), 40.0);
        // A stated value wins; a measured base falls back to the D975 minimum.
        let mut f = FuelDescription::of_grade(NO2);
        f.cetane_number = Some(47.5);
        assert_eq!(cetane_number(&f), Ok(47.5));
        let m = ColdFlowProperties {
            cloud_point_k: c(-10.0),
            cfpp_k: c(-14.0),
            pour_point_k: c(-16.0),
        };
        assert_eq!(cetane_number(&with(FuelBase::Measured(m))), Ok(40.0));
    }

    #[test]
    fn temperate_gaps_follow_reference_ranges() {
        // reference.md §9.4: unadditised CFPP ≈ 0–5 K below CP (from memory) and PP ≈ 4–5 K below
        // CP (chemicalspedia, secondary).
        let a = grade_properties(FuelGrade::En590Temperate(TemperateClass::A));
        let gap_a_k = a.cloud_point_k - a.cfpp_k;
        assert!((0.0..=5.0).contains(&gap_a_k), "{gap_a_k}");
        let pp_gap_a_k = a.cloud_point_k - a.pour_point_k;
        assert!(
            (4.0 - 1e-9..=5.0 + 1e-9).contains(&pp_gap_a_k),
            "{pp_gap_a_k}"
        );
        // reference.md §9.4: flow-improved winter fuel has 10–15 K CP–CFPP gaps (cold-flow.eu,
        // confirmed).
        let f = grade_properties(FuelGrade::En590Temperate(TemperateClass::F));
        let gap_f_k = f.cloud_point_k - f.cfpp_k;
        assert!((10.0..=15.0).contains(&gap_f_k), "{gap_f_k}");
        // reference.md §9.4, "another page": CFPP −20 °C from CP −7 °C (unlabelled on the sheet:
        // treated as from memory).
        assert!((cp_c(&f) - -7.0).abs() < 1e-9);
        // reference.md §9.4: UK winter spec −15 °C CFPP from CP −5 °C (cold-flow.eu, confirmed):
        // our class E (−15 °C CFPP) lies within 1 K of that CP.
        let e = grade_properties(FuelGrade::En590Temperate(TemperateClass::E));
        assert!((cp_c(&e) - -5.0).abs() <= 1.0 + 1e-9, "{}", cp_c(&e));
    }

    #[test]
    fn catalog_is_complete_ordered_and_addressable() {
        let cat = grade_catalog();
        assert_eq!(cat.len(), 14); // 3 D975 + 6 temperate + 5 arctic grades (reference.md §9.2–9.3)
        for (i, e) in cat.iter().enumerate() {
            // CP ≥ CFPP ≥ PP for every grade (reference.md §9.4: CFPP and PP lie below CP).
            assert!(
                e.properties.cloud_point_k >= e.properties.cfpp_k,
                "{}",
                e.id
            );
            assert!(e.properties.cfpp_k >= e.properties.pour_point_k, "{}", e.id);
            assert_eq!(e.properties, grade_properties(e.grade));
            assert_eq!(grade_from_id(e.id), Some(e.grade));
            assert!(
                cat[..i].iter().all(|o| o.id != e.id),
                "duplicate id {}",
                e.id
            );
            assert!(!e.origin.is_empty() && !e.label.is_empty());
            assert!(validate_properties(&e.properties).is_ok());
        }
        assert_eq!(grade_from_id("no-such-grade"), None);
    }

    #[test]
    fn b5_performs_like_no2_for_every_feedstock() {
        // reference.md §9.6: "No. 2 diesel and B5 perform about the same in cold weather" (AFDC,
        // confirmed) and at B1–B5 the FAME profile did not significantly affect CP/CFPP/PP (Moser,
        // Fuel 115 (2014) 500–506, abstract confirmed).
        let no2 = grade_properties(NO2);
        for feedstock in ALL_FEEDSTOCKS {
            for fraction in [0.01, 0.03, 0.05] {
                let f = FuelDescription {
                    biodiesel_fraction: fraction,
                    feedstock,
                    ..FuelDescription::of_grade(NO2)
                };
                let p = cold_flow_properties(&f).unwrap();
                assert!(
                    (p.cloud_point_k - no2.cloud_point_k).abs() <= 0.5,
                    "{feedstock:?} B{fraction}"
                );
            }
        }
    }

    #[test]
    fn b20_rises_a_few_kelvin_more_for_saturated_feedstocks() {
        // reference.md §9.6: B20 CP typically 1–6 °C above the base ULSD, more with saturated
        // feedstocks (NREL guide, from memory).
        let base = grade_properties(NO2);
        let rise = |feedstock| {
            let f = FuelDescription {
                biodiesel_fraction: 0.2,
                feedstock,
                ..FuelDescription::of_grade(NO2)
            };
            cold_flow_properties(&f).unwrap().cloud_point_k - base.cloud_point_k
        };
        for feedstock in ALL_FEEDSTOCKS {
            let r = rise(feedstock);
            assert!((1.0..=6.0).contains(&r), "{feedstock:?}: {r}");
        }
        assert!(rise(BiodieselFeedstock::Tallow) > rise(BiodieselFeedstock::Soy));
        assert!(rise(BiodieselFeedstock::Palm) > rise(BiodieselFeedstock::Canola));
    }

    #[test]
    fn b100_cloud_points_match_published_feedstock_values() {
        // reference.md §9.6: tallow ME CP 14.5 °C, soy ME 2.3 °C, canola ME −8.3 °C (Elwell, CSU
        // thesis, confirmed).
        let b100 = |feedstock, grade| {
            let f = FuelDescription {
                biodiesel_fraction: 1.0,
                feedstock,
                ..FuelDescription::of_grade(grade)
            };
            cp_c(&cold_flow_properties(&f).unwrap())
        };
        assert!((b100(BiodieselFeedstock::Tallow, NO2) - 14.5).abs() < 1e-9);
        assert!((b100(BiodieselFeedstock::Soy, NO2) - 2.3).abs() < 1e-9);
        // With a base cold enough that the B20 anchor lies below the B100 value.
        let arctic = FuelGrade::En590Arctic(ArcticClass::Class2);
        assert!((b100(BiodieselFeedstock::Canola, arctic) - -8.3).abs() < 1e-9);
        // reference.md §9.6: B100 CP spans about −3 … +15 °C and PP −5 … +10 °C (AFDC,
        // confirmed). An unknown feedstock takes the upper end of the CP span (conservative).
        assert!((b100(BiodieselFeedstock::Unknown, NO2) - 15.0).abs() < 1e-9);
        for feedstock in [BiodieselFeedstock::Soy, BiodieselFeedstock::UsedCookingOil] {
            let p = b100_properties(feedstock);
            assert!((-3.0..=15.0).contains(&cp_c(&p)));
            assert!((-5.0..=10.0).contains(&(p.pour_point_k - 273.15)));
        }
    }

    #[test]
    fn no1_blending_follows_rule_of_thumb_and_floors_at_no1() {
        // reference.md §9.5: each 10 % No. 1 lowers CP by about 1–2 °C (from memory).
        let base = grade_properties(NO2);
        let blended = |share| {
            let f = FuelDescription {
                no1_blend_fraction: share,
                ..FuelDescription::of_grade(NO2)
            };
            cold_flow_properties(&f).unwrap()
        };
        let drop10_k = base.cloud_point_k - blended(0.1).cloud_point_k;
        assert!((1.0..=2.0).contains(&drop10_k), "{drop10_k}");
        // reference.md §9.5: the effect is non-linear and weaker than linear mixing for ULSD
        // (studylib, secondary): 50 % gives less than half the way to No. 1's CP.
        let no1 = grade_properties(FuelGrade::UsNo1);
        let drop50_k = base.cloud_point_k - blended(0.5).cloud_point_k;
        assert!(
            drop50_k < 0.5 * (base.cloud_point_k - no1.cloud_point_k),
            "{drop50_k}"
        );
        // reference.md §9.5: No. 1-D / kerosene CP is typically near −40 °C (forum, secondary).
        assert_eq!(blended(1.0), no1);
        // Blending No. 1 into No. 1 changes nothing.
        let f = FuelDescription {
            no1_blend_fraction: 0.5,
            ..FuelDescription::of_grade(FuelGrade::UsNo1)
        };
        assert_eq!(cold_flow_properties(&f).unwrap(), no1);
    }

    #[test]
    fn additives_lower_cfpp_and_pour_point_not_cloud_point() {
        // reference.md §9.5: cold-flow additives lower CFPP/PP, not CP; blending No. 1 is the only
        // effective way to lower CP (engine manufacturer's fuels bulletin, confirmed).
        let base = grade_properties(NO2);
        let warm = AdditiveTreatment::typical(c(10.0));
        let f = FuelDescription {
            additive: Some(warm),
            ..FuelDescription::of_grade(NO2)
        };
        let p = cold_flow_properties(&f).unwrap();
        assert_eq!(p.cloud_point_k, base.cloud_point_k);
        assert!((base.cfpp_k - p.cfpp_k - TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K).abs() < 1e-9);
        assert!(
            (base.pour_point_k - p.pour_point_k - TYPICAL_ADDITIVE_CFPP_IMPROVEMENT_K).abs() < 1e-9
        );
        let f = FuelDescription {
            no1_blend_fraction: 0.3,
            ..FuelDescription::of_grade(NO2)
        };
        assert!(cold_flow_properties(&f).unwrap().cloud_point_k < base.cloud_point_k);
    }

    #[test]
    fn additive_added_below_cloud_point_earns_little() {
        // Project rule (estimate, common practice (no source)): full effect ≥ 5 K above CP, at most
        // 10–20 % at or below CP.
        let base = grade_properties(NO2);
        for added_c in [-8.0, -12.0, -30.0] {
            let a = AdditiveTreatment {
                cfpp_improvement_k: 15.0,
                fuel_t_when_added_k: c(added_c),
            };
            let f = FuelDescription {
                additive: Some(a),
                ..FuelDescription::of_grade(NO2)
            };
            let gain_k = base.cfpp_k - cold_flow_properties(&f).unwrap().cfpp_k;
            assert!(
                (0.1 * 15.0 - 1e-9..=0.2 * 15.0 + 1e-9).contains(&gain_k),
                "{gain_k}"
            );
        }
        assert_eq!(additive_effectiveness(c(-3.0), c(-8.0)), 1.0);
        assert!((additive_effectiveness(c(-5.5), c(-8.0)) - 0.575).abs() < 1e-9); // halfway
        assert_eq!(
            additive_effectiveness(f64::NAN, c(-8.0)),
            ADDITIVE_RESIDUAL_EFFECT_BELOW_CLOUD_POINT
        );
    }

    #[test]
    fn measured_properties_are_used_and_checked() {
        let m = ColdFlowProperties {
            cloud_point_k: c(-12.0),
            cfpp_k: c(-25.0),
            pour_point_k: c(-30.0),
        };
        assert_eq!(cold_flow_properties(&with(FuelBase::Measured(m))), Ok(m));
        assert!(implies_flow_improver(&m)); // 13 K gap > 5 K unadditised (reference.md §9.4)
        // CFPP within its 4 °C reproducibility above CP is accepted (reference.md §9.1, confirmed).
        let near = ColdFlowProperties {
            cfpp_k: c(-9.0),
            ..m
        };
        assert!(cold_flow_properties(&with(FuelBase::Measured(near))).is_ok());
        let bad_cfpp = ColdFlowProperties {
            cfpp_k: c(-7.0),
            ..m
        };
        assert!(matches!(
            cold_flow_properties(&with(FuelBase::Measured(bad_cfpp))),
            Err(ModelError::Inconsistent(_))
        ));
        let bad_pp = ColdFlowProperties {
            pour_point_k: c(-11.0),
            ..m
        };
        assert!(matches!(
            cold_flow_properties(&with(FuelBase::Measured(bad_pp))),
            Err(ModelError::Inconsistent(_))
        ));
    }

    #[test]
    fn hostile_inputs_are_rejected_not_panicked() {
        let ok = FuelDescription::of_grade(NO2);
        let cases = [
            FuelDescription {
                biodiesel_fraction: f64::NAN,
                ..ok
            },
            FuelDescription {
                biodiesel_fraction: -0.1,
                ..ok
            },
            FuelDescription {
                biodiesel_fraction: 1.5,
                ..ok
            },
            FuelDescription {
                no1_blend_fraction: f64::INFINITY,
                ..ok
            },
            FuelDescription {
                no1_blend_fraction: -1e300,
                ..ok
            },
            FuelDescription {
                additive: Some(AdditiveTreatment::typical(f64::NAN)),
                ..ok
            },
            FuelDescription {
                additive: Some(AdditiveTreatment::typical(c(60.0))),
                ..ok
            },
            FuelDescription {
                additive: Some(AdditiveTreatment {
                    cfpp_improvement_k: -3.0,
                    fuel_t_when_added_k: c(0.0),
                }),
                ..ok
            },
            FuelDescription {
                additive: Some(AdditiveTreatment {
                    cfpp_improvement_k: 50.0,
                    fuel_t_when_added_k: c(0.0),
                }),
                ..ok
            },
            FuelDescription {
                cetane_number: Some(f64::NEG_INFINITY),
                ..ok
            },
            FuelDescription {
                cetane_number: Some(0.0),
                ..ok
            },
            with(FuelBase::Measured(ColdFlowProperties {
                cloud_point_k: f64::NAN,
                cfpp_k: c(-10.0),
                pour_point_k: c(-12.0),
            })),
            with(FuelBase::Measured(ColdFlowProperties {
                cloud_point_k: c(-100.0),
                cfpp_k: c(-101.0),
                pour_point_k: c(-102.0),
            })),
            with(FuelBase::Measured(ColdFlowProperties {
                cloud_point_k: -5.0,
                cfpp_k: -6.0,
                pour_point_k: -7.0,
            })),
        ];
        for f in cases {
            assert!(
                matches!(cold_flow_properties(&f), Err(ModelError::OutOfRange { .. })),
                "{f:?}"
            );
            assert!(cetane_number(&f).is_err());
        }
    }

    fn grade_strategy() -> impl Strategy<Value = FuelGrade> {
        (0usize..14).prop_map(|i| grade_catalog()[i].grade)
    }

    fn feedstock_strategy() -> impl Strategy<Value = BiodieselFeedstock> {
        (0usize..6).prop_map(|i| ALL_FEEDSTOCKS[i])
    }

    /// Mostly values in `lo..hi` (valid and invalid), sometimes any bit pattern.
    fn loose(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
        prop_oneof![3 => lo..hi, 1 => any::<f64>()]
    }

    fixed_proptest! {
        // Project rule (reference.md §9.6): CP, CFPP and PP never fall as the biodiesel share rises.
        #[test]
        fn properties_non_decreasing_in_biodiesel_fraction(
            grade in grade_strategy(), feedstock in feedstock_strategy(),
            a in 0.0f64..=1.0, b in 0.0f64..=1.0, no1 in 0.0f64..=1.0,
        ) {
            let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
            let mk = |x| FuelDescription {
                biodiesel_fraction: x, feedstock, no1_blend_fraction: no1,
                ..FuelDescription::of_grade(grade)
            };
            let p_lo = cold_flow_properties(&mk(lo)).unwrap();
            let p_hi = cold_flow_properties(&mk(hi)).unwrap();
            prop_assert!(p_hi.cloud_point_k >= p_lo.cloud_point_k);
            prop_assert!(p_hi.cfpp_k >= p_lo.cfpp_k);
            prop_assert!(p_hi.pour_point_k >= p_lo.pour_point_k);
        }

        // reference.md §9.5: No. 1 lowers CP (and with it CFPP/PP); more No. 1 never raises them.
        #[test]
        fn properties_non_increasing_in_no1_share(
            grade in grade_strategy(), feedstock in feedstock_strategy(),
            a in 0.0f64..=1.0, b in 0.0f64..=1.0, bio in 0.0f64..=1.0,
        ) {
            let (lo, hi) = if a <= b { (a, b) } else { (b, a) };
            let mk = |x| FuelDescription {
                biodiesel_fraction: bio, feedstock, no1_blend_fraction: x,
                ..FuelDescription::of_grade(grade)
            };
            let p_lo = cold_flow_properties(&mk(lo)).unwrap();
            let p_hi = cold_flow_properties(&mk(hi)).unwrap();
            prop_assert!(p_hi.cloud_point_k <= p_lo.cloud_point_k);
            prop_assert!(p_hi.cfpp_k <= p_lo.cfpp_k);
            prop_assert!(p_hi.pour_point_k <= p_lo.pour_point_k);
        }

        // Every blend of a catalog grade keeps CP ≥ CFPP ≥ PP (reference.md §9.4 ordering) and
        // lies in the derived range that gel_risk accepts.
        #[test]
        fn blends_stay_ordered_and_in_range(
            grade in grade_strategy(), feedstock in feedstock_strategy(),
            bio in 0.0f64..=1.0, no1 in 0.0f64..=1.0,
            improvement in 0.0f64..=20.0, added_c in -80.0f64..=40.0, use_additive in any::<bool>(),
        ) {
            let additive = use_additive.then_some(AdditiveTreatment {
                cfpp_improvement_k: improvement, fuel_t_when_added_k: c(added_c),
            });
            let f = FuelDescription {
                biodiesel_fraction: bio, feedstock, no1_blend_fraction: no1, additive,
                ..FuelDescription::of_grade(grade)
            };
            let p = cold_flow_properties(&f).unwrap();
            prop_assert!(p.cloud_point_k >= p.cfpp_k && p.cfpp_k >= p.pour_point_k);
            prop_assert!(validate_properties(&p).is_ok());
        }

        // Never panics on arbitrary numbers: Ok with finite, ordered values, or an error.
        #[test]
        fn arbitrary_numbers_never_panic(
            bio in loose(-0.5, 1.5), no1 in loose(-0.5, 1.5), imp in loose(-5.0, 30.0),
            t in loose(150.0, 350.0), cp in loose(150.0, 350.0), cfpp in loose(150.0, 350.0),
            pp in loose(150.0, 350.0),
        ) {
            let m = ColdFlowProperties { cloud_point_k: cp, cfpp_k: cfpp, pour_point_k: pp };
            let f = FuelDescription {
                base: FuelBase::Measured(m),
                biodiesel_fraction: bio,
                feedstock: BiodieselFeedstock::Palm,
                no1_blend_fraction: no1,
                additive: Some(AdditiveTreatment { cfpp_improvement_k: imp, fuel_t_when_added_k: t }),
                cetane_number: None,
            };
            if let Ok(p) = cold_flow_properties(&f) {
                prop_assert!(validate_properties(&p).is_ok());
            }
        }
    }
}
