//! The data model every layer shares: one reading with its reduced values, one derived value,
//! one quarantined input, a late flag update — and the quantities every reading has. Ground
//! floor: depends only on `quality` (flags and reasons); the store, the engine, the rules, the
//! export and the reports all speak these types.

use crate::quality::{Flags, Reason};

/// A quantity every reading has (rules, records, exports and plots name it by `name`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ReadingQuantity {
    /// The calibrated value in the instrument's own unit (kPa, m, ...).
    EngineeringValue,
    /// Pore pressure, kPa.
    Pressure,
    /// Pressure head, m of water.
    PressureHead,
    /// Total head (piezometric elevation) or water-surface elevation, m.
    TotalHead,
}

impl ReadingQuantity {
    /// Every reading quantity, in the order records list them.
    pub const ALL: [ReadingQuantity; 4] = [
        ReadingQuantity::EngineeringValue,
        ReadingQuantity::Pressure,
        ReadingQuantity::PressureHead,
        ReadingQuantity::TotalHead,
    ];

    /// The name used in rules, records and exports.
    #[must_use]
    pub const fn name(self) -> &'static str {
        match self {
            ReadingQuantity::EngineeringValue => "engineering_value",
            ReadingQuantity::Pressure => "pressure",
            ReadingQuantity::PressureHead => "pressure_head",
            ReadingQuantity::TotalHead => "total_head",
        }
    }

    /// The quantity called `name`, if it is one.
    #[must_use]
    pub fn from_name(name: &str) -> Option<ReadingQuantity> {
        Self::ALL.into_iter().find(|q| q.name() == name)
    }

    /// Its value and unit in `r` (`None` when the reading does not have it).
    #[must_use]
    pub fn of(self, r: &ReadingRow) -> Option<(f64, &'static str)> {
        match self {
            ReadingQuantity::EngineeringValue => Some((r.eng_value, r.eng_unit)),
            ReadingQuantity::Pressure => r.pressure_kpa.map(|v| (v, "kPa")),
            ReadingQuantity::PressureHead => r.pressure_head_m.map(|v| (v, "m")),
            ReadingQuantity::TotalHead => r.total_head_m.map(|v| (v, "m")),
        }
    }
}

/// The names of the reading quantities (for messages and checks).
pub const READING_QUANTITIES: [&str; 4] = [
    ReadingQuantity::ALL[0].name(),
    ReadingQuantity::ALL[1].name(),
    ReadingQuantity::ALL[2].name(),
    ReadingQuantity::ALL[3].name(),
];

/// Flags found for a reading after it was stored: a spike is confirmed by the reading after it.
#[derive(Debug, Clone, PartialEq)]
pub struct FlagUpdate {
    pub instrument: String,
    pub t_ms: i64,
    /// Added to the reading's flags.
    pub flags: Flags,
}

/// One reading ready to store: raw fields, reduced values and quality.
#[derive(Debug, Clone, PartialEq)]
pub struct ReadingRow {
    pub instrument: String,
    /// Reading time (logger time, or arrival time when `flags` has `TIME_FROM_ARRIVAL`).
    pub t_ms: i64,
    /// When the message reached seepd.
    pub arrival_ms: i64,
    pub raw: f64,
    pub temperature_c: Option<f64>,
    /// Barometric pressure used for the correction, if any.
    pub baro_kpa: Option<f64>,
    pub eng_value: f64,
    pub eng_unit: &'static str,
    pub pressure_kpa: Option<f64>,
    pub pressure_head_m: Option<f64>,
    pub total_head_m: Option<f64>,
    pub flags: Flags,
}

/// One derived value: a quantity of an object (nest, toe check, reach, section...) at a
/// time, computed from the readings named in `inputs`. `value` is `None` when it could not be
/// computed; `reason` says why (missing, stale or flagged input; not applicable).
#[derive(Debug, Clone, PartialEq)]
pub struct DerivedRow {
    pub object: String,
    pub quantity: String,
    pub t_ms: i64,
    pub value: Option<f64>,
    pub unit: &'static str,
    pub reason: Option<String>,
    /// Instrument ids the value came from.
    pub inputs: Vec<String>,
}

/// One quarantined input.
#[derive(Debug, Clone, PartialEq)]
pub struct QuarantineRow {
    pub received_ms: i64,
    pub topic: String,
    pub reason: Reason,
    pub detail: String,
    /// The payload as received (truncated for oversized payloads; `detail` says so).
    pub payload: Vec<u8>,
    /// The broker marked the message as a redelivery: skip if the same row is already stored.
    pub redelivered: bool,
}

impl ReadingRow {
    /// The computed values of this reading, as (quantity, value, unit).
    #[must_use]
    pub fn quantities(&self) -> Vec<(&'static str, f64, &'static str)> {
        ReadingQuantity::ALL
            .into_iter()
            .filter_map(|q| q.of(self).map(|(v, u)| (q.name(), v, u)))
            .collect()
    }
}
