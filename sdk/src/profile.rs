//! The vehicle profile builder: everything about a vehicle that does not change overnight
//! (engine, start aids, battery, oil, fuel, shelter), checked at build time and produced as the
//! API's `VehicleProfile` message.

use startmargin_proto::v1 as api;

use crate::validate::{BuildError, Checker};
use crate::{BiodieselFeedstock, CombustionSystem, FilterMount, FuelGrade, GlowPlugHealth};

/// A checked vehicle profile, ready to send. Build one with [`VehicleProfile::builder`].
#[derive(Debug, Clone, PartialEq)]
pub struct VehicleProfile(api::VehicleProfile);

impl VehicleProfile {
    /// Starts a profile for the caller's vehicle id.
    ///
    /// ```
    /// use startmargin_sdk::{FuelGrade, GlowPlugHealth, VehicleProfile};
    ///
    /// let profile = VehicleProfile::builder("plow-07")
    ///     .archetype("heavy-di-i6")
    ///     .battery(1_900.0, 24.0)
    ///     .state_of_charge_pct(80.0)
    ///     .oil("15W-40")
    ///     .fuel_grade(FuelGrade::UsWinterBlend)
    ///     .tank_l(300.0)
    ///     .intake_heater_kw(2.5) // listing aids lists them all: keep the intake heater
    ///     .block_heater_w(1_500.0)
    ///     .build()?;
    /// assert_eq!(profile.vehicle_id(), "plow-07");
    /// assert_eq!(profile.as_pb().engine.as_ref().unwrap().archetype_id, "heavy-di-i6");
    ///
    /// // Bad input is reported field by field, with the API's field paths.
    /// let err = VehicleProfile::builder("van-2")
    ///     .archetype("compact-di-i4")
    ///     .battery(-5.0, 13.0)
    ///     .oil("15W-40")
    ///     .fuel_grade(FuelGrade::UsNo2)
    ///     .tank_l(80.0)
    ///     .glow_plugs(GlowPlugHealth::RelayStuck)
    ///     .build()
    ///     .unwrap_err();
    /// let fields: Vec<_> = err.violations.iter().map(|v| v.field.as_str()).collect();
    /// assert_eq!(fields, ["vehicle.battery.capacity_cca", "vehicle.battery.nominal_v"]);
    /// # Ok::<(), startmargin_sdk::BuildError>(())
    /// ```
    pub fn builder(vehicle_id: impl Into<String>) -> VehicleProfileBuilder {
        VehicleProfileBuilder {
            vehicle_id: vehicle_id.into(),
            engine: api::EngineSpec::default(),
            aids: None,
            battery: None,
            state_of_charge_pct: None,
            battery_health_pct: None,
            oil: None,
            fuel: api::FuelSpec::default(),
            sheltered: false,
        }
    }

    /// Wraps a profile message as it is, unchecked (the server still validates it).
    pub fn from_pb_unchecked(pb: api::VehicleProfile) -> Self {
        Self(pb)
    }

    /// The caller's vehicle id.
    pub fn vehicle_id(&self) -> &str {
        &self.0.vehicle_id
    }

    /// The message that will be sent.
    pub fn as_pb(&self) -> &api::VehicleProfile {
        &self.0
    }

    /// The message, by value.
    pub fn into_pb(self) -> api::VehicleProfile {
        self.0
    }
}

impl From<VehicleProfile> for api::VehicleProfile {
    fn from(p: VehicleProfile) -> Self {
        p.0
    }
}

/// Builder of a [`VehicleProfile`]. Required: an engine (an archetype or the full geometry), a
/// battery, an oil grade, a fuel (grade or measured cold-flow properties) and the tank capacity.
///
/// Start aids: call none of the aid setters to keep the archetype's aids; call any of them and
/// the profile lists the vehicle's full set of aids (the archetype's no longer apply), so set
/// every aid the vehicle has, e.g. `.intake_heater_kw(2.5).block_heater_w(1_500.0)`.
#[derive(Debug, Clone)]
pub struct VehicleProfileBuilder {
    vehicle_id: String,
    engine: api::EngineSpec,
    aids: Option<api::StartAids>,
    battery: Option<(f64, f64)>,
    state_of_charge_pct: Option<f64>,
    battery_health_pct: Option<f64>,
    oil: Option<String>,
    fuel: api::FuelSpec,
    sheltered: bool,
}

impl VehicleProfileBuilder {
    // ---- engine ----

    /// Built-in engine archetype id (see `Client::describe_model`), e.g. `"heavy-di-i6"`. Any
    /// engine field set below overrides the archetype's value.
    pub fn archetype(mut self, archetype_id: impl Into<String>) -> Self {
        self.engine.archetype_id = archetype_id.into();
        self
    }

    /// Cylinder bore, mm.
    pub fn bore_mm(mut self, v: f64) -> Self {
        self.engine.bore_mm = Some(v);
        self
    }

    /// Piston stroke, mm.
    pub fn stroke_mm(mut self, v: f64) -> Self {
        self.engine.stroke_mm = Some(v);
        self
    }

    /// Connecting rod length between centres, mm.
    pub fn con_rod_mm(mut self, v: f64) -> Self {
        self.engine.con_rod_mm = Some(v);
        self
    }

    /// Geometric compression ratio (e.g. 17.5).
    pub fn compression_ratio(mut self, v: f64) -> Self {
        self.engine.compression_ratio = Some(v);
        self
    }

    /// Number of cylinders.
    pub fn cylinders(mut self, n: u32) -> Self {
        self.engine.cylinders = Some(n);
        self
    }

    /// Intake valve closing, crank degrees after bottom dead centre.
    pub fn ivc_deg_abdc(mut self, v: f64) -> Self {
        self.engine.ivc_deg_abdc = Some(v);
        self
    }

    /// Combustion system.
    pub fn combustion_system(mut self, c: CombustionSystem) -> Self {
        self.engine.combustion_system = c as i32;
        self
    }

    /// Lowest cranking speed at which this engine starts, rpm.
    pub fn min_start_speed_rpm(mut self, v: f64) -> Self {
        self.engine.min_start_speed_rpm = Some(v);
        self
    }

    /// A cylinder's cranking compression-gauge reading, kPa gauge (the model fits leakage to it).
    pub fn measured_compression_kpa(mut self, v: f64) -> Self {
        self.engine.measured_compression_kpa = Some(v);
        self
    }

    /// Rated starter power, kW.
    pub fn starter_power_kw(mut self, v: f64) -> Self {
        self.engine.starter_power_kw = Some(v);
        self
    }

    /// Engine heat capacity (metal, coolant, oil), kJ/K.
    pub fn heat_capacity_kj_per_k(mut self, v: f64) -> Self {
        self.engine.heat_capacity_kj_per_k = Some(v);
        self
    }

    /// Cool-down time constant fitted from this vehicle's own coolant log after key-off, hours.
    pub fn cooldown_time_constant_h(mut self, v: f64) -> Self {
        self.engine.cooldown_time_constant_h = Some(v);
        self
    }

    // ---- start aids ----
    //
    // Without any of these calls the profile carries no aids message and the server takes the
    // archetype's aids. Once one is called, the aids message describes the vehicle's FULL set:
    // an aid not set is taken as absent, even when the archetype has it.

    fn aids_mut(&mut self) -> &mut api::StartAids {
        self.aids.get_or_insert_with(api::StartAids::default)
    }

    /// Glow plugs are fitted, in the given health (e.g. `GlowPlugHealth::RelayStuck`). Lists the
    /// full set of aids from here on (see the builder's doc).
    pub fn glow_plugs(mut self, health: GlowPlugHealth) -> Self {
        let aids = self.aids_mut();
        aids.glow_plugs_fitted = true;
        aids.glow_plug_health = health as i32;
        self
    }

    /// Preheat time given before cranking, s.
    pub fn glow_preheat_s(mut self, v: f64) -> Self {
        self.aids_mut().glow_preheat_s = Some(v);
        self
    }

    /// Intake-air heater power, kW (0 = none).
    pub fn intake_heater_kw(mut self, v: f64) -> Self {
        self.aids_mut().intake_heater_kw = Some(v);
        self
    }

    /// Block (coolant) heater power, W (0 = none). Its use overnight is planned per night with
    /// `VehicleNight::block_heater_plan`.
    pub fn block_heater_w(mut self, v: f64) -> Self {
        self.aids_mut().block_heater_w = Some(v);
        self
    }

    /// The full aids message, replacing any aid set before.
    pub fn aids(mut self, aids: api::StartAids) -> Self {
        self.aids = Some(aids);
        self
    }

    // ---- battery ----

    /// Starting battery: rated cold cranking amps (SAE J537) and nominal system voltage (12 or 24 V).
    pub fn battery(mut self, capacity_cca: f64, nominal_v: f64) -> Self {
        self.battery = Some((capacity_cca, nominal_v));
        self
    }

    /// Battery state of charge, %, when known.
    pub fn state_of_charge_pct(mut self, v: f64) -> Self {
        self.state_of_charge_pct = Some(v);
        self
    }

    /// Battery health, % of a new battery's capability, when known.
    pub fn battery_health_pct(mut self, v: f64) -> Self {
        self.battery_health_pct = Some(v);
        self
    }

    // ---- oil ----

    /// SAE J300 oil grade, e.g. `"15W-40"`, `"5W-30"` or `"30"`.
    pub fn oil(mut self, sae_grade: impl Into<String>) -> Self {
        self.oil = Some(sae_grade.into());
        self
    }

    // ---- fuel ----

    /// Fuel grade with published cold-flow limits.
    pub fn fuel_grade(mut self, grade: FuelGrade) -> Self {
        self.fuel.grade = grade as i32;
        self
    }

    /// Cold-flow properties from the supplier's certificate, °C; they take precedence over the grade.
    pub fn measured_cold_flow(
        mut self,
        cloud_point_c: f64,
        cfpp_c: f64,
        pour_point_c: f64,
    ) -> Self {
        self.fuel.measured = Some(api::MeasuredColdFlow {
            cloud_point_c,
            cfpp_c,
            pour_point_c,
        });
        self
    }

    /// Biodiesel (FAME) share, % by volume (B20 = 20).
    pub fn biodiesel_pct(mut self, v: f64) -> Self {
        self.fuel.biodiesel_pct = v;
        self
    }

    /// Feedstock of the biodiesel share.
    pub fn biodiesel_feedstock(mut self, f: BiodieselFeedstock) -> Self {
        self.fuel.biodiesel_feedstock = f as i32;
        self
    }

    /// Share of No. 1 diesel or kerosene blended in, % by volume.
    pub fn no1_blend_pct(mut self, v: f64) -> Self {
        self.fuel.no1_blend_pct = v;
        self
    }

    /// A cold-flow additive treatment: the CFPP improvement the product claims, K (`None` takes a
    /// typical value), and the fuel temperature when it was added, °C.
    pub fn additive(mut self, cfpp_improvement_k: Option<f64>, fuel_c_when_added: f64) -> Self {
        self.fuel.additive = Some(api::AdditiveTreatment {
            cfpp_improvement_k,
            fuel_c_when_added: Some(fuel_c_when_added),
        });
        self
    }

    /// Cetane number, when known.
    pub fn cetane_number(mut self, v: f64) -> Self {
        self.fuel.cetane_number = Some(v);
        self
    }

    /// Fuel tank capacity, litres.
    pub fn tank_l(mut self, v: f64) -> Self {
        self.fuel.tank_capacity_l = v;
        self
    }

    /// Where the fuel filter sits.
    pub fn filter_mount(mut self, m: FilterMount) -> Self {
        self.fuel.filter_mount = m as i32;
        self
    }

    // ---- parking ----

    /// Parked in a shelter (open-sided shed, wind break).
    pub fn sheltered(mut self, sheltered: bool) -> Self {
        self.sheltered = sheltered;
        self
    }

    /// Checks the fields and produces the profile; every bad field is reported.
    pub fn build(self) -> Result<VehicleProfile, BuildError> {
        let mut c = Checker::default();
        if self.vehicle_id.trim().is_empty() {
            c.fail("vehicle.vehicle_id", "must not be empty");
        }
        check_engine(&mut c, &self.engine);
        if let Some(aids) = &self.aids {
            c.opt(
                "vehicle.aids.glow_preheat_s",
                aids.glow_preheat_s,
                Checker::non_negative,
            );
            c.opt(
                "vehicle.aids.intake_heater_kw",
                aids.intake_heater_kw,
                Checker::non_negative,
            );
            c.opt(
                "vehicle.aids.block_heater_w",
                aids.block_heater_w,
                Checker::non_negative,
            );
        }
        let battery = match self.battery {
            None => {
                c.fail(
                    "vehicle.battery",
                    "required: call .battery(capacity_cca, nominal_v)",
                );
                None
            }
            Some((capacity_cca, nominal_v)) => {
                c.positive("vehicle.battery.capacity_cca", capacity_cca);
                if nominal_v != 12.0 && nominal_v != 24.0 {
                    c.fail(
                        "vehicle.battery.nominal_v",
                        format!("must be 12 or 24, got {nominal_v}"),
                    );
                }
                Some(api::BatterySpec {
                    capacity_cca,
                    nominal_v,
                    state_of_charge_pct: self.state_of_charge_pct,
                    health_pct: self.battery_health_pct,
                })
            }
        };
        c.opt(
            "vehicle.battery.state_of_charge_pct",
            self.state_of_charge_pct,
            Checker::percent,
        );
        c.opt(
            "vehicle.battery.health_pct",
            self.battery_health_pct,
            Checker::percent,
        );
        let oil = match self.oil {
            None => {
                c.fail(
                    "vehicle.oil.sae_grade",
                    "required: call .oil(\"15W-40\") or similar",
                );
                None
            }
            Some(g) => {
                if !looks_like_sae_grade(&g) {
                    c.fail(
                        "vehicle.oil.sae_grade",
                        format!(
                            "must be an SAE J300 grade such as \"15W-40\" or \"30\", got {g:?}"
                        ),
                    );
                }
                Some(api::OilSpec { sae_grade: g })
            }
        };
        check_fuel(&mut c, &self.fuel);
        let pb = api::VehicleProfile {
            vehicle_id: self.vehicle_id,
            engine: Some(self.engine),
            aids: self.aids,
            battery,
            oil,
            fuel: Some(self.fuel),
            sheltered: self.sheltered,
        };
        c.finish(VehicleProfile(pb))
    }
}

fn check_engine(c: &mut Checker, e: &api::EngineSpec) {
    let p = "vehicle.engine";
    let geometry_complete = e.bore_mm.is_some()
        && e.stroke_mm.is_some()
        && e.con_rod_mm.is_some()
        && e.compression_ratio.is_some()
        && e.cylinders.is_some();
    if e.archetype_id.trim().is_empty() && !geometry_complete {
        c.fail(
            format!("{p}.archetype_id"),
            "give an archetype id, or the full geometry (bore_mm, stroke_mm, con_rod_mm, \
             compression_ratio, cylinders)",
        );
    }
    for (name, v) in [
        ("bore_mm", e.bore_mm),
        ("stroke_mm", e.stroke_mm),
        ("con_rod_mm", e.con_rod_mm),
        ("compression_ratio", e.compression_ratio),
        ("min_start_speed_rpm", e.min_start_speed_rpm),
        ("measured_compression_kpa", e.measured_compression_kpa),
        ("starter_power_kw", e.starter_power_kw),
        ("heat_capacity_kj_per_k", e.heat_capacity_kj_per_k),
        ("cooldown_time_constant_h", e.cooldown_time_constant_h),
    ] {
        c.opt(&format!("{p}.{name}"), v, Checker::positive);
    }
    c.opt(
        &format!("{p}.ivc_deg_abdc"),
        e.ivc_deg_abdc,
        Checker::finite,
    );
    if e.cylinders == Some(0) {
        c.fail(format!("{p}.cylinders"), "must be at least 1");
    }
}

fn check_fuel(c: &mut Checker, f: &api::FuelSpec) {
    let p = "vehicle.fuel";
    if f.grade == FuelGrade::Unspecified as i32 && f.measured.is_none() {
        c.fail(
            format!("{p}.grade"),
            "required: call .fuel_grade(..) or .measured_cold_flow(..)",
        );
    }
    if let Some(m) = &f.measured {
        c.finite(&format!("{p}.measured.cloud_point_c"), m.cloud_point_c);
        c.finite(&format!("{p}.measured.cfpp_c"), m.cfpp_c);
        c.finite(&format!("{p}.measured.pour_point_c"), m.pour_point_c);
    }
    c.percent(&format!("{p}.biodiesel_pct"), f.biodiesel_pct);
    c.percent(&format!("{p}.no1_blend_pct"), f.no1_blend_pct);
    if f.biodiesel_pct + f.no1_blend_pct > 100.0 {
        c.fail(
            format!("{p}.no1_blend_pct"),
            "biodiesel_pct and no1_blend_pct together must not exceed 100",
        );
    }
    if let Some(a) = &f.additive {
        c.opt(
            &format!("{p}.additive.cfpp_improvement_k"),
            a.cfpp_improvement_k,
            Checker::non_negative,
        );
        if let Some(t) = a.fuel_c_when_added {
            c.finite(&format!("{p}.additive.fuel_c_when_added"), t);
        }
    }
    c.opt(
        &format!("{p}.cetane_number"),
        f.cetane_number,
        Checker::positive,
    );
    c.positive(&format!("{p}.tank_capacity_l"), f.tank_capacity_l);
}

/// Syntax only (`NNW-NN`, `NNW` or `NN`); the server knows which grades exist.
fn looks_like_sae_grade(g: &str) -> bool {
    let digits = |s: &str| !s.is_empty() && s.len() <= 2 && s.bytes().all(|b| b.is_ascii_digit());
    match g.split_once('-') {
        Some((w, hot)) => w.strip_suffix(['W', 'w']).is_some_and(digits) && digits(hot),
        None => digits(g) || g.strip_suffix(['W', 'w']).is_some_and(digits),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn minimal() -> VehicleProfileBuilder {
        VehicleProfile::builder("v1")
            .archetype("compact-di-i4")
            .battery(650.0, 12.0)
            .oil("5W-40")
            .fuel_grade(FuelGrade::En590ClassB)
            .tank_l(70.0)
    }

    #[test]
    fn minimal_profile_leaves_aids_to_the_archetype() {
        let p = minimal().build().unwrap().into_pb();
        assert_eq!(p.vehicle_id, "v1");
        assert!(p.aids.is_none());
        let b = p.battery.unwrap();
        assert_eq!(
            (b.capacity_cca, b.nominal_v, b.state_of_charge_pct),
            (650.0, 12.0, None)
        );
        assert_eq!(p.oil.unwrap().sae_grade, "5W-40");
        let f = p.fuel.unwrap();
        assert_eq!(f.grade, FuelGrade::En590ClassB as i32);
        assert_eq!(f.tank_capacity_l, 70.0);
    }

    #[test]
    fn every_setter_lands_in_its_field() {
        let p = minimal()
            .compression_ratio(18.0)
            .measured_compression_kpa(2_400.0)
            .cooldown_time_constant_h(3.5)
            .combustion_system(CombustionSystem::DirectInjection)
            .glow_plugs(GlowPlugHealth::RelayStuck)
            .glow_preheat_s(12.0)
            .block_heater_w(1_000.0)
            .state_of_charge_pct(55.0)
            .battery_health_pct(70.0)
            .biodiesel_pct(20.0)
            .biodiesel_feedstock(BiodieselFeedstock::Soy)
            .additive(Some(6.0), 4.0)
            .filter_mount(FilterMount::Frame)
            .sheltered(true)
            .build()
            .unwrap()
            .into_pb();
        let e = p.engine.unwrap();
        assert_eq!(e.compression_ratio, Some(18.0));
        assert_eq!(e.measured_compression_kpa, Some(2_400.0));
        assert_eq!(e.cooldown_time_constant_h, Some(3.5));
        assert_eq!(e.combustion_system(), CombustionSystem::DirectInjection);
        let a = p.aids.unwrap();
        assert!(a.glow_plugs_fitted);
        assert_eq!(a.glow_plug_health(), GlowPlugHealth::RelayStuck);
        assert_eq!(
            (a.glow_preheat_s, a.block_heater_w),
            (Some(12.0), Some(1_000.0))
        );
        let b = p.battery.unwrap();
        assert_eq!(
            (b.state_of_charge_pct, b.health_pct),
            (Some(55.0), Some(70.0))
        );
        let f = p.fuel.unwrap();
        assert_eq!(f.biodiesel_feedstock(), BiodieselFeedstock::Soy);
        assert_eq!(f.additive.unwrap().cfpp_improvement_k, Some(6.0));
        assert_eq!(f.filter_mount(), FilterMount::Frame);
        assert!(p.sheltered);
    }

    #[test]
    fn missing_parts_are_named() {
        let err = VehicleProfile::builder(" ").build().unwrap_err();
        let fields: Vec<_> = err.violations.iter().map(|v| v.field.as_str()).collect();
        assert_eq!(
            fields,
            [
                "vehicle.vehicle_id",
                "vehicle.engine.archetype_id",
                "vehicle.battery",
                "vehicle.oil.sae_grade",
                "vehicle.fuel.grade",
                "vehicle.fuel.tank_capacity_l",
            ]
        );
    }

    #[test]
    fn full_geometry_replaces_the_archetype() {
        let b = VehicleProfile::builder("custom")
            .bore_mm(100.0)
            .stroke_mm(120.0)
            .con_rod_mm(200.0)
            .compression_ratio(17.0)
            .cylinders(4)
            .battery(800.0, 12.0)
            .oil("10W-30")
            .measured_cold_flow(-12.0, -18.0, -27.0)
            .tank_l(150.0);
        assert!(b.clone().build().is_ok());
        let err = b.cylinders(0).build().unwrap_err();
        assert_eq!(err.violations[0].field, "vehicle.engine.cylinders");
    }

    #[test]
    fn hostile_numbers_are_rejected() {
        let err = minimal()
            .bore_mm(f64::NAN)
            .state_of_charge_pct(120.0)
            .biodiesel_pct(-1.0)
            .block_heater_w(f64::INFINITY)
            .build()
            .unwrap_err();
        let fields: Vec<_> = err.violations.iter().map(|v| v.field.as_str()).collect();
        assert_eq!(
            fields,
            [
                "vehicle.engine.bore_mm",
                "vehicle.aids.block_heater_w",
                "vehicle.battery.state_of_charge_pct",
                "vehicle.fuel.biodiesel_pct",
            ]
        );
    }

    #[test]
    fn oil_grade_syntax() {
        for ok in ["15W-40", "5W-30", "0W-20", "30", "10W"] {
            assert!(looks_like_sae_grade(ok), "{ok}");
        }
        for bad in ["", "W-40", "15W40x", "15-40", "abc", "100W-40"] {
            assert!(!looks_like_sae_grade(bad), "{bad}");
        }
    }
}
