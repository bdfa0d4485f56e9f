//! Fuel grade and gel level enums between the API and the model.

use startmargin_model::fuel::{ArcticClass, FuelGrade, TemperateClass};
use startmargin_model::gel_risk::GelRiskLevel;
use startmargin_proto::v1 as pb;

/// Every grade with its API value, in the API's order.
pub(crate) const GRADES: &[(pb::FuelGrade, FuelGrade)] = &[
    (pb::FuelGrade::UsNo1, FuelGrade::UsNo1),
    (pb::FuelGrade::UsNo2, FuelGrade::UsNo2),
    (pb::FuelGrade::UsWinterBlend, FuelGrade::UsWinterBlend),
    (
        pb::FuelGrade::En590ClassA,
        FuelGrade::En590Temperate(TemperateClass::A),
    ),
    (
        pb::FuelGrade::En590ClassB,
        FuelGrade::En590Temperate(TemperateClass::B),
    ),
    (
        pb::FuelGrade::En590ClassC,
        FuelGrade::En590Temperate(TemperateClass::C),
    ),
    (
        pb::FuelGrade::En590ClassD,
        FuelGrade::En590Temperate(TemperateClass::D),
    ),
    (
        pb::FuelGrade::En590ClassE,
        FuelGrade::En590Temperate(TemperateClass::E),
    ),
    (
        pb::FuelGrade::En590ClassF,
        FuelGrade::En590Temperate(TemperateClass::F),
    ),
    (
        pb::FuelGrade::En590Arctic0,
        FuelGrade::En590Arctic(ArcticClass::Class0),
    ),
    (
        pb::FuelGrade::En590Arctic1,
        FuelGrade::En590Arctic(ArcticClass::Class1),
    ),
    (
        pb::FuelGrade::En590Arctic2,
        FuelGrade::En590Arctic(ArcticClass::Class2),
    ),
    (
        pb::FuelGrade::En590Arctic3,
        FuelGrade::En590Arctic(ArcticClass::Class3),
    ),
    (
        pb::FuelGrade::En590Arctic4,
        FuelGrade::En590Arctic(ArcticClass::Class4),
    ),
];

/// API grade value → model grade: `Ok(None)` for unspecified, `Err(())` for an unknown value.
pub(crate) fn grade_from_pb(value: i32) -> Result<Option<FuelGrade>, ()> {
    let g = pb::FuelGrade::try_from(value).map_err(|_| ())?;
    if g == pb::FuelGrade::Unspecified {
        return Ok(None);
    }
    GRADES
        .iter()
        .find(|(p, _)| *p == g)
        .map(|(_, m)| Some(*m))
        .ok_or(())
}

/// Model gel level → API enum.
pub(crate) fn gel_level_to_pb(l: GelRiskLevel) -> pb::GelLevel {
    match l {
        GelRiskLevel::Clear => pb::GelLevel::Clear,
        GelRiskLevel::Watch => pb::GelLevel::Watch,
        GelRiskLevel::WaxForming => pb::GelLevel::WaxForming,
        GelRiskLevel::FilterAtRisk => pb::GelLevel::FilterAtRisk,
        GelRiskLevel::NoFlow => pb::GelLevel::NoFlow,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_api_grade_maps_to_a_model_grade() {
        for v in 1..=14 {
            assert!(matches!(grade_from_pb(v), Ok(Some(_))), "grade {v}");
        }
        assert_eq!(grade_from_pb(0), Ok(None));
        assert_eq!(grade_from_pb(99), Err(()));
    }
}
