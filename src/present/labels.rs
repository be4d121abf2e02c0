//! Display names in words: one table per instrument kind and per quantity identifier, used
//! wherever a person reads them. Identifiers stay in CSV, NDJSON and the small "ids" columns.

use crate::config::{DisplayUnits, Kind, StageMode, TransducerOutput, VwReading};
use crate::domain::units::{LengthUnit, PressureUnit};

/// What an instrument's raw value is, in words with its unit, as its logger sends it (and as a
/// hand-read value is entered): "frequency in Hz", "depth to water below the reference point in
/// ft".
pub fn raw_value(kind: &Kind) -> String {
    let pressure = |u: PressureUnit| match u {
        PressureUnit::Kpa => "kPa",
        PressureUnit::Psi => "psi",
        PressureUnit::Bar => "bar",
        PressureUnit::Mpa => "MPa",
        PressureUnit::Hpa => "hPa",
        PressureUnit::MWater => "m of water",
        PressureUnit::FtWater => "ft of water",
    };
    let length = |u: LengthUnit| match u {
        LengthUnit::M => "m",
        LengthUnit::Ft => "ft",
    };
    match kind {
        Kind::VibratingWire(vw) => match vw.reading {
            VwReading::FrequencyHz => "frequency in Hz".into(),
            VwReading::PeriodS => "period in s".into(),
            VwReading::PeriodUs => "period in µs".into(),
            VwReading::Digits => "digits (f²/1000)".into(),
        },
        Kind::Transducer(t) => match t.output {
            TransducerOutput::Pressure(u) => format!("pressure in {}", pressure(u)),
            TransducerOutput::Current { .. } => "current in mA".into(),
        },
        Kind::Standpipe(s) => format!(
            "depth to water below the reference point in {}",
            length(s.depth_unit)
        ),
        Kind::StageGauge(g) => match g.mode {
            StageMode::Elevation(u) => format!("water-surface elevation in {}", length(u)),
            StageMode::DepthAboveDatum { unit, .. } => {
                format!("depth above the gauge datum in {}", length(unit))
            }
        },
        Kind::Barometer(b) => format!("pressure in {}", pressure(b.unit)),
    }
}

/// The label of an alert event kind (`de_escalated` → "lowered"), for the pages and the report.
pub fn event(kind: &str) -> String {
    match kind {
        "de_escalated" => "lowered".into(),
        "escalation_notified" => "second list told".into(),
        other => other.replace('_', " "),
    }
}

/// Instrument kinds in words.
const KINDS: [(&str, &str); 5] = [
    ("vibrating_wire", "vibrating-wire piezometer"),
    ("pressure_transducer", "pressure-transducer piezometer"),
    ("standpipe", "standpipe piezometer"),
    ("stage_gauge", "stage gauge"),
    ("barometer", "barometer"),
];

/// Quantities in words (sentence case, no unit: the unit is shown beside the value).
const QUANTITIES: [(&str, &str); 43] = [
    ("total_head", "Total head"),
    ("pressure_head", "Pressure head"),
    ("pressure", "Pressure"),
    ("engineering_value", "Logger value"),
    ("water_elevation", "Water level"),
    ("exit_gradient", "Exit gradient"),
    ("factor_of_safety", "Factor of safety against heave"),
    ("critical_gradient", "Critical gradient"),
    ("excess_head", "Excess head at the toe"),
    ("allowable_head", "Allowable excess head"),
    ("head_above_ground", "Head above ground"),
    ("vertical_gradient", "Vertical gradient (+ upward)"),
    ("flow_direction", "Flow direction (+1 upward)"),
    ("exit_elevation", "Exit point elevation"),
    ("exit_station", "Exit point station"),
    ("seepage_face_height", "Seepage face height"),
    ("min_cover", "Least cover over the phreatic line"),
    ("min_cover_station", "Station of least cover"),
    ("model_exit_station", "Exit point station (flow net)"),
    ("model_exit_elevation", "Exit point elevation (flow net)"),
    (
        "model_seepage_face_height",
        "Seepage face height (flow net)",
    ),
    (
        "model_max_exit_gradient",
        "Largest exit gradient (flow net)",
    ),
    ("model_flow", "Seepage through the section (flow net)"),
    ("model_head", "Head expected by the flow net"),
    ("model_residual", "Departure from the flow net"),
    ("net_head", "Net head on the levee"),
    ("expected_excess_head", "Expected excess head at the toe"),
    ("expected_exit_gradient", "Expected exit gradient"),
    ("expected_residual_ratio", "Expected residual-head ratio"),
    ("expected_flow", "Expected underseepage"),
    ("measured_excess_head", "Measured excess head at the toe"),
    ("measured_residual_ratio", "Measured residual-head ratio"),
    ("effective_x3", "Effective landside length x3"),
    ("completeness_24h", "Readings received, last 24 h"),
    ("residual", "Departure from the model"),
    ("predicted", "Model prediction"),
    ("no_data", "Time without a reading"),
    ("unavailable", "Time without a value"),
    ("health_flags", "Health flags"),
    ("rate_24h", "Rate over 24 h"),
    ("rate_7d", "Rate over 7 days"),
    ("rate_30d", "Rate over 30 days"),
    ("stage", "Stage"),
];

/// An instrument kind identifier in words (unknown identifiers are returned with spaces).
pub fn kind_name(kind: &str) -> String {
    KINDS
        .iter()
        .find(|(id, _)| *id == kind)
        .map_or_else(|| kind.replace('_', " "), |(_, n)| (*n).to_string())
}

/// A quantity identifier in words. A stage gauge's total head is its water level; the
/// landward-distance quantities (`expected_excess_head_at_50ft`) read "… 50 ft landward of
/// the toe"; other unknown identifiers get spaces and a capital.
pub fn quantity_name(quantity: &str, instrument_kind: Option<&str>) -> String {
    if quantity == "total_head" && instrument_kind == Some("stage_gauge") {
        return "Water level".into();
    }
    if let Some(d) = quantity.strip_prefix("expected_excess_head_at_") {
        let (number, unit) = split_distance(d);
        return format!("Expected excess head {number} {unit} landward of the toe");
    }
    if let Some((_, n)) = QUANTITIES.iter().find(|(id, _)| *id == quantity) {
        return (*n).to_string();
    }
    if let Some(w) = quantity.strip_prefix("rate_") {
        return format!("Rate over {w}");
    }
    let words = quantity.replace('_', " ");
    let mut c = words.chars();
    c.next()
        .map_or_else(String::new, |f| f.to_uppercase().chain(c).collect())
}

/// "50ft" → ("50", "ft"); "12.5m" → ("12.5", "m").
fn split_distance(d: &str) -> (&str, &str) {
    let at = d.find(|c: char| c.is_ascii_alphabetic()).unwrap_or(d.len());
    d.split_at(at)
}

/// The words for the display system, as a report states it.
pub fn system_name(u: DisplayUnits) -> &'static str {
    match u {
        DisplayUnits::Si => "SI (m, kPa, m³/s per m)",
        DisplayUnits::Us => "US customary (ft, psi, ft³/s per ft)",
    }
}

/// An axis label: the quantity in words and its unit in brackets ("Water level (ft)"), or the
/// words alone for a quantity without a unit ("Factor of safety").
pub fn axis_label(name: &str, unit: &str) -> String {
    if unit.is_empty() {
        name.to_string()
    } else {
        format!("{name} ({unit})")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn axis_labels_carry_the_unit_when_there_is_one() {
        assert_eq!(axis_label("Water level", "ft"), "Water level (ft)");
        assert_eq!(
            axis_label("Factor of safety against heave", ""),
            "Factor of safety against heave"
        );
    }

    #[test]
    fn identifiers_become_words() {
        assert_eq!(kind_name("vibrating_wire"), "vibrating-wire piezometer");
        assert_eq!(kind_name("new_kind"), "new kind");
        assert_eq!(
            quantity_name("factor_of_safety", None),
            "Factor of safety against heave"
        );
        assert_eq!(
            quantity_name("total_head", Some("stage_gauge")),
            "Water level"
        );
        assert_eq!(quantity_name("total_head", Some("standpipe")), "Total head");
        assert_eq!(
            quantity_name("expected_excess_head_at_50ft", None),
            "Expected excess head 50 ft landward of the toe"
        );
        assert_eq!(quantity_name("rate_12h", None), "Rate over 12h");
        assert_eq!(quantity_name("something_new", None), "Something new");
    }

    #[test]
    fn the_table_has_no_duplicate_identifiers() {
        let mut ids: Vec<&str> = QUANTITIES.iter().map(|q| q.0).collect();
        ids.sort_unstable();
        ids.dedup();
        assert_eq!(ids.len(), QUANTITIES.len());
    }
}
