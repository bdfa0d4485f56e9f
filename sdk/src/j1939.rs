//! SAE J1939 adapters: decode the raw values of the parameters (SPNs) the API takes, with their
//! published scaling, and pick them out of their parameter-group (PGN) frames.
//!
//! Scaling, offsets, lengths and byte positions are SAE J1939-71 as tabulated in reference.md
//! §14.1 (confirmed there):
//!
//! | SPN | parameter | PGN, bytes (1-based) | length | resolution | offset |
//! |---|---|---|---|---|---|
//! | 110 | engine coolant temperature | 65262 ET1, 1 | 1 byte | 1 °C/bit | −40 °C |
//! | 174 | engine fuel temperature 1 | 65262 ET1, 2 | 1 byte | 1 °C/bit | −40 °C |
//! | 175 | engine oil temperature 1 | 65262 ET1, 3–4 | 2 bytes | 0.03125 °C/bit | −273 °C |
//! | 171 | ambient air temperature | 65269 AMB, 4–5 | 2 bytes | 0.03125 °C/bit | −273 °C |
//! | 168 | battery potential / power input 1 | 65271 VEP1, 5–6 | 2 bytes | 0.05 V/bit | 0 |
//! | 96 | fuel level 1 | 65276 DD, 2 | 1 byte | 0.4 %/bit | 0 |
//!
//! Value conventions: multi-byte values are little-endian; valid data tops out at 0xFA / 0xFAFF;
//! 0xFE / 0xFExx means "error" (the sensor or its circuit reports a fault); 0xFF / 0xFFFF means
//! "not available". Other codes above the valid range (0xFB–0xFD, 0xFB00–0xFDFF, 0xFFxx) carry no
//! value either and decode as "not available". No value is ever clamped or invented: a reading
//! that is not a value leaves its telemetry field unset.

use std::fmt;

/// PGN 65262, Engine Temperature 1 (ET1): coolant, fuel and oil temperatures.
pub const PGN_ET1: u32 = 65_262;
/// PGN 65269, Ambient Conditions (AMB): ambient air temperature.
pub const PGN_AMB: u32 = 65_269;
/// PGN 65271, Vehicle Electrical Power 1 (VEP1): battery potential.
pub const PGN_VEP1: u32 = 65_271;
/// PGN 65276, Dash Display (DD): fuel level.
pub const PGN_DD: u32 = 65_276;

/// A parameter the API takes, by its J1939 suspect parameter number.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Spn {
    /// SPN 110, engine coolant temperature, °C.
    EngineCoolantTemperature,
    /// SPN 174, engine fuel temperature 1, °C.
    EngineFuelTemperature,
    /// SPN 175, engine oil temperature 1, °C.
    EngineOilTemperature,
    /// SPN 171, ambient air temperature, °C.
    AmbientAirTemperature,
    /// SPN 168, battery potential / power input 1, V.
    BatteryPotential,
    /// SPN 96, fuel level 1, % of tank.
    FuelLevel,
}

impl Spn {
    /// Every SPN this module decodes.
    pub const ALL: [Spn; 6] = [
        Spn::EngineCoolantTemperature,
        Spn::EngineFuelTemperature,
        Spn::EngineOilTemperature,
        Spn::AmbientAirTemperature,
        Spn::BatteryPotential,
        Spn::FuelLevel,
    ];

    /// The suspect parameter number.
    pub const fn number(self) -> u32 {
        match self {
            Self::EngineCoolantTemperature => 110,
            Self::EngineFuelTemperature => 174,
            Self::EngineOilTemperature => 175,
            Self::AmbientAirTemperature => 171,
            Self::BatteryPotential => 168,
            Self::FuelLevel => 96,
        }
    }

    /// The SPN with this number, when this module decodes it.
    pub fn from_number(n: u32) -> Option<Self> {
        Self::ALL.into_iter().find(|s| s.number() == n)
    }

    /// Length of the raw value, bytes.
    pub const fn len_bytes(self) -> usize {
        match self {
            Self::EngineCoolantTemperature | Self::EngineFuelTemperature | Self::FuelLevel => 1,
            _ => 2,
        }
    }

    /// Resolution, units per bit (°C, V or %).
    pub const fn resolution(self) -> f64 {
        match self {
            Self::EngineCoolantTemperature | Self::EngineFuelTemperature => 1.0,
            Self::EngineOilTemperature | Self::AmbientAirTemperature => 0.031_25,
            Self::BatteryPotential => 0.05,
            Self::FuelLevel => 0.4,
        }
    }

    /// Offset added after scaling (°C, V or %).
    pub const fn offset(self) -> f64 {
        match self {
            Self::EngineCoolantTemperature | Self::EngineFuelTemperature => -40.0,
            Self::EngineOilTemperature | Self::AmbientAirTemperature => -273.0,
            Self::BatteryPotential | Self::FuelLevel => 0.0,
        }
    }

    /// Decodes a raw value already assembled into an integer. A one-byte SPN given a value above
    /// 0xFF (not a one-byte code) decodes as [`SpnValue::Error`].
    ///
    /// ```
    /// use startmargin_sdk::j1939::{Spn, SpnValue};
    ///
    /// // SAE J1939-71 scaling as tabulated in reference.md §14.1: 1 °C/bit, −40 °C offset.
    /// assert_eq!(Spn::EngineCoolantTemperature.decode_raw(0x7A), SpnValue::Value(82.0));
    /// assert_eq!(Spn::EngineCoolantTemperature.decode_raw(0xFF), SpnValue::NotAvailable);
    /// assert_eq!(Spn::EngineCoolantTemperature.decode_raw(0xFE), SpnValue::Error);
    /// // 0.03125 °C/bit, −273 °C offset: 0x1F20 = 7968 → −24 °C.
    /// assert_eq!(Spn::AmbientAirTemperature.decode_raw(0x1F20), SpnValue::Value(-24.0));
    /// ```
    pub fn decode_raw(self, raw: u32) -> SpnValue {
        let (valid_max, error_lo, error_hi, all_ones) = if self.len_bytes() == 1 {
            (0xFA, 0xFE, 0xFE, 0xFF)
        } else {
            (0xFAFF, 0xFE00, 0xFEFF, 0xFFFF)
        };
        if raw > all_ones {
            SpnValue::Error
        } else if raw <= valid_max {
            SpnValue::Value(f64::from(raw) * self.resolution() + self.offset())
        } else if (error_lo..=error_hi).contains(&raw) {
            SpnValue::Error
        } else {
            SpnValue::NotAvailable
        }
    }

    /// Decodes the raw bytes of this SPN (little-endian, exactly [`Spn::len_bytes`] long).
    ///
    /// ```
    /// use startmargin_sdk::j1939::{Spn, SpnValue};
    ///
    /// // Oil temperature 0x2CC0 = 11456 × 0.03125 − 273 = 85 °C, sent low byte first.
    /// assert_eq!(Spn::EngineOilTemperature.decode(&[0xC0, 0x2C])?, SpnValue::Value(85.0));
    /// assert!(Spn::EngineOilTemperature.decode(&[0xC0]).is_err());
    /// # Ok::<(), startmargin_sdk::j1939::J1939Error>(())
    /// ```
    pub fn decode(self, bytes: &[u8]) -> Result<SpnValue, J1939Error> {
        let raw = match (self.len_bytes(), bytes) {
            (1, [b]) => u32::from(*b),
            (2, [lo, hi]) => u32::from(u16::from_le_bytes([*lo, *hi])),
            (expected, _) => {
                return Err(J1939Error::WrongLength {
                    spn: self.number(),
                    expected,
                    got: bytes.len(),
                });
            }
        };
        Ok(self.decode_raw(raw))
    }
}

impl fmt::Display for Spn {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "SPN {}", self.number())
    }
}

/// A decoded SPN: a value in the parameter's unit, or why there is none.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SpnValue {
    /// A value in the parameter's unit (°C, V or %).
    Value(f64),
    /// The sender does not have the parameter (0xFF / 0xFFFF and other codes above the valid range).
    NotAvailable,
    /// The sender reports an error for the parameter (0xFE / 0xFExx).
    Error,
}

impl SpnValue {
    /// The value, when there is one.
    pub fn value(self) -> Option<f64> {
        match self {
            Self::Value(v) => Some(v),
            Self::NotAvailable | Self::Error => None,
        }
    }
}

/// One decoded parameter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SpnReading {
    /// Which parameter.
    pub spn: Spn,
    /// Its value.
    pub value: SpnValue,
}

/// Why raw J1939 data could not be decoded.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum J1939Error {
    /// The raw bytes of an SPN have the wrong length.
    #[error("SPN {spn}: expected {expected} byte(s), got {got}")]
    WrongLength {
        /// The SPN.
        spn: u32,
        /// Its length, bytes.
        expected: usize,
        /// Bytes given.
        got: usize,
    },
    /// The frame is too short for the SPNs it should carry.
    #[error("PGN {pgn}: frame of {got} byte(s) is too short, need {needed}")]
    ShortFrame {
        /// The PGN.
        pgn: u32,
        /// Bytes needed.
        needed: usize,
        /// Bytes given.
        got: usize,
    },
    /// This module does not decode that PGN.
    #[error("PGN {0} carries none of the parameters the API takes")]
    UnsupportedPgn(u32),
}

/// Where each SPN sits in its PGN: (SPN, first byte, 0-based).
fn layout(pgn: u32) -> Option<&'static [(Spn, usize)]> {
    const ET1: &[(Spn, usize)] = &[
        (Spn::EngineCoolantTemperature, 0),
        (Spn::EngineFuelTemperature, 1),
        (Spn::EngineOilTemperature, 2),
    ];
    const AMB: &[(Spn, usize)] = &[(Spn::AmbientAirTemperature, 3)];
    const VEP1: &[(Spn, usize)] = &[(Spn::BatteryPotential, 4)];
    const DD: &[(Spn, usize)] = &[(Spn::FuelLevel, 1)];
    match pgn {
        PGN_ET1 => Some(ET1),
        PGN_AMB => Some(AMB),
        PGN_VEP1 => Some(VEP1),
        PGN_DD => Some(DD),
        _ => None,
    }
}

/// Decodes the API's parameters from one frame's data bytes (usually 8): ET1 (65262), AMB (65269),
/// VEP1 (65271) or DD (65276).
///
/// ```
/// use startmargin_sdk::j1939::{self, Spn, SpnValue};
///
/// // VEP1: battery potential in bytes 5–6: 0x00FC = 252 × 0.05 V = 12.6 V.
/// let vep1 = [0xFF, 0xFF, 0xFF, 0xFF, 0xFC, 0x00, 0xFF, 0xFF];
/// let r = j1939::decode_pgn(j1939::PGN_VEP1, &vep1)?;
/// assert_eq!(r[0].spn, Spn::BatteryPotential);
/// assert!((r[0].value.value().unwrap() - 12.6).abs() < 1e-9);
/// # Ok::<(), j1939::J1939Error>(())
/// ```
pub fn decode_pgn(pgn: u32, data: &[u8]) -> Result<Vec<SpnReading>, J1939Error> {
    let layout = layout(pgn).ok_or(J1939Error::UnsupportedPgn(pgn))?;
    let needed = layout
        .iter()
        .map(|(spn, start)| start + spn.len_bytes())
        .max()
        .unwrap_or(0);
    if data.len() < needed {
        return Err(J1939Error::ShortFrame {
            pgn,
            needed,
            got: data.len(),
        });
    }
    layout
        .iter()
        .map(|&(spn, start)| {
            let value = spn.decode(&data[start..start + spn.len_bytes()])?;
            Ok(SpnReading { spn, value })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    // Check values: value = raw × resolution + offset, worked by hand from the scaling.

    fn val(v: SpnValue) -> f64 {
        v.value().expect("a value")
    }

    #[test]
    fn spn_110_coolant_one_degree_per_bit_minus_40() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        let s = Spn::EngineCoolantTemperature;
        assert_eq!(s.decode_raw(0), SpnValue::Value(-40.0)); // 0 − 40
        assert_eq!(s.decode_raw(40), SpnValue::Value(0.0)); // 40 − 40
        assert_eq!(s.decode_raw(0x7A), SpnValue::Value(82.0)); // 122 − 40
        assert_eq!(s.decode_raw(0xFA), SpnValue::Value(210.0)); // 250 − 40, top of range
        assert_eq!(s.decode(&[0x7E]).unwrap(), SpnValue::Value(86.0)); // 126 − 40
    }

    #[test]
    fn spn_174_fuel_temperature_same_scaling_as_coolant() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        let s = Spn::EngineFuelTemperature;
        assert_eq!(s.decode_raw(0x46), SpnValue::Value(30.0)); // 70 − 40
        assert_eq!(s.decode_raw(0x10), SpnValue::Value(-24.0)); // 16 − 40
    }

    #[test]
    fn spn_175_oil_temperature_1_32_degree_per_bit_minus_273() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        let s = Spn::EngineOilTemperature;
        assert_eq!(s.decode(&[0xC0, 0x2C]).unwrap(), SpnValue::Value(85.0)); // 11456/32 − 273
        assert_eq!(s.decode(&[0x00, 0x00]).unwrap(), SpnValue::Value(-273.0)); // bottom of range
        assert_eq!(s.decode(&[0x24, 0x22]).unwrap(), SpnValue::Value(0.125)); // 8740/32 − 273
        // 0xFAFF = 64255 → 2007.96875 − 273 = 1734.96875, top of range.
        assert_eq!(
            s.decode(&[0xFF, 0xFA]).unwrap(),
            SpnValue::Value(1_734.968_75)
        );
    }

    #[test]
    fn spn_171_ambient_same_scaling_as_oil() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        let s = Spn::AmbientAirTemperature;
        assert_eq!(s.decode(&[0x20, 0x1F]).unwrap(), SpnValue::Value(-24.0)); // 7968/32 − 273
        assert_eq!(s.decode(&[0x40, 0x22]).unwrap(), SpnValue::Value(1.0)); // 8768/32 − 273
    }

    #[test]
    fn spn_168_battery_potential_0_05_volt_per_bit() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        let s = Spn::BatteryPotential;
        assert!((val(s.decode(&[0xFC, 0x00]).unwrap()) - 12.6).abs() < 1e-9); // 252 × 0.05
        assert!((val(s.decode(&[0xE7, 0x01]).unwrap()) - 24.35).abs() < 1e-9); // 487 × 0.05
        assert!((val(s.decode_raw(0xFAFF)) - 3212.75).abs() < 1e-9); // top of range
    }

    #[test]
    fn spn_96_fuel_level_0_4_percent_per_bit() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        let s = Spn::FuelLevel;
        assert!((val(s.decode_raw(200)) - 80.0).abs() < 1e-9); // 200 × 0.4
        assert!((val(s.decode_raw(0xFA)) - 100.0).abs() < 1e-9); // 250 × 0.4, full
        assert_eq!(s.decode_raw(0), SpnValue::Value(0.0));
    }

    #[test]
    fn status_codes_one_byte() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        for s in [
            Spn::EngineCoolantTemperature,
            Spn::EngineFuelTemperature,
            Spn::FuelLevel,
        ] {
            assert_eq!(s.decode_raw(0xFF), SpnValue::NotAvailable);
            assert_eq!(s.decode_raw(0xFE), SpnValue::Error);
            for reserved in 0xFB..=0xFD {
                assert_eq!(s.decode_raw(reserved), SpnValue::NotAvailable);
            }
            assert_eq!(s.decode_raw(0x1FF), SpnValue::Error);
        }
    }

    #[test]
    fn status_codes_two_bytes() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        for s in [
            Spn::EngineOilTemperature,
            Spn::AmbientAirTemperature,
            Spn::BatteryPotential,
        ] {
            assert_eq!(s.decode(&[0xFF, 0xFF]).unwrap(), SpnValue::NotAvailable);
            assert_eq!(s.decode(&[0x00, 0xFE]).unwrap(), SpnValue::Error);
            assert_eq!(s.decode(&[0x37, 0xFE]).unwrap(), SpnValue::Error);
            assert_eq!(s.decode(&[0x00, 0xFB]).unwrap(), SpnValue::NotAvailable);
            assert!(matches!(
                s.decode(&[0x00, 0xFA]).unwrap(),
                SpnValue::Value(_)
            ));
        }
    }

    #[test]
    fn wrong_lengths_are_errors_not_guesses() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        assert_eq!(
            Spn::EngineCoolantTemperature.decode(&[1, 2]),
            Err(J1939Error::WrongLength {
                spn: 110,
                expected: 1,
                got: 2
            })
        );
        assert!(Spn::BatteryPotential.decode(&[]).is_err());
    }

    #[test]
    fn numbers_round_trip() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        for s in Spn::ALL {
            assert_eq!(Spn::from_number(s.number()), Some(s));
        }
        assert_eq!(Spn::from_number(190), None);
        assert_eq!(Spn::FuelLevel.to_string(), "SPN 96");
    }

    #[test]
    fn frames_place_each_spn_at_its_bytes() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        // ET1: byte 1 coolant 0x7E (86 °C), byte 2 fuel 0x46 (30 °C), bytes 3–4 oil 0x2CC0 (85 °C).
        let et1 = [0x7E, 0x46, 0xC0, 0x2C, 0xFF, 0xFF, 0xFF, 0xFF];
        let r = decode_pgn(PGN_ET1, &et1).unwrap();
        assert_eq!(
            r,
            [
                SpnReading {
                    spn: Spn::EngineCoolantTemperature,
                    value: SpnValue::Value(86.0)
                },
                SpnReading {
                    spn: Spn::EngineFuelTemperature,
                    value: SpnValue::Value(30.0)
                },
                SpnReading {
                    spn: Spn::EngineOilTemperature,
                    value: SpnValue::Value(85.0)
                },
            ]
        );
        // AMB: bytes 4–5 ambient 0x1F20 (−24 °C); the rest not available.
        let amb = [0xFF, 0xFF, 0xFF, 0x20, 0x1F, 0xFF, 0xFF, 0xFF];
        assert_eq!(val(decode_pgn(PGN_AMB, &amb).unwrap()[0].value), -24.0);
        // DD: byte 2 fuel level 0x96 = 150 × 0.4 = 60 %.
        let dd = [0xFF, 0x96, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF];
        assert!((val(decode_pgn(PGN_DD, &dd).unwrap()[0].value) - 60.0).abs() < 1e-9);
    }

    #[test]
    fn frame_errors() {
        // Source: SAE J1939-71 scaling as tabulated in reference.md §14.1.
        assert_eq!(
            decode_pgn(PGN_VEP1, &[0; 5]),
            Err(J1939Error::ShortFrame {
                pgn: PGN_VEP1,
                needed: 6,
                got: 5
            })
        );
        assert_eq!(
            decode_pgn(61_444, &[0; 8]),
            Err(J1939Error::UnsupportedPgn(61_444))
        );
    }
}
