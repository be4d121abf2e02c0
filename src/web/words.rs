//! Plain words and display units for the pages: quantity and flag names an engineer reads
//! (never the snake_case identifiers), values converted to the site's display units, ages in
//! words.
//!
//! Owns the wording; no I/O.

use crate::config::DisplayUnits;

/// The label of a quantity id (the presentation module's table: one wording for reports,
/// emails and pages).
pub fn quantity(q: &str) -> String {
    crate::present::labels::quantity_name(q, None)
}

/// The label of a reading flag name.
pub fn flag(f: &str) -> String {
    match f {
        "time_from_arrival" => "time taken from arrival".into(),
        "baro_missing" => "no barometer reading".into(),
        "temp_missing" => "no temperature".into(),
        "spike" => "spike (rejected)".into(),
        "flatline" => "flat line (suspect)".into(),
        "thermistor" => "thermistor fault (suspect)".into(),
        "time_ahead" => "stamped ahead of the clock".into(),
        "manual" => "read by hand".into(),
        other => sentence(other).to_lowercase(),
    }
}

pub use crate::present::labels::event;

/// The label of a quarantine reason code.
pub fn reason(r: &str) -> String {
    sentence(r)
}

/// `snake_case` → "Snake case".
fn sentence(id: &str) -> String {
    let s = id.replace('_', " ");
    let mut c = s.chars();
    c.next()
        .map(|f| f.to_uppercase().collect::<String>() + c.as_str())
        .unwrap_or_default()
}

/// The safety quantities the overview shows first, most important first.
pub const SAFETY: [&str; 4] = [
    "factor_of_safety",
    "exit_gradient",
    "vertical_gradient",
    "seepage_face_height",
];

/// A stored SI value of `quantity` (stored unit `unit`) in the site's display units with the
/// presentation module's digits and unit label ("97.427 m", "319.64 ft", "> 10").
pub fn value(v: Option<f64>, quantity: &str, unit: &str, units: DisplayUnits) -> String {
    match v {
        None => "no value".into(),
        Some(v) => crate::present::format::shown(v, quantity, unit, units),
    }
}

/// An age in words.
pub fn age(ms: i64) -> String {
    let s = ms.max(0) / 1000;
    match s {
        s if s < 120 => format!("{s} s ago"),
        s if s < 7_200 => format!("{} min ago", s / 60),
        s if s < 172_800 => format!("{:.1} h ago", s as f64 / 3600.0),
        s => format!("{:.1} days ago", s as f64 / 86_400.0),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn labels_are_words() {
        // Quantity names are the presentation module's (one wording everywhere).
        assert_eq!(
            quantity("factor_of_safety"),
            "Factor of safety against heave"
        );
        assert_eq!(quantity("rate_24h"), "Rate over 24 h");
        assert_eq!(quantity("some_new_thing"), "Some new thing");
        assert_eq!(flag("flatline"), "flat line (suspect)");
    }

    #[test]
    fn us_sites_see_feet() {
        // 1 ft = 0.3048 m exactly [definition of the unit].
        let v = value(Some(3.048), "total_head", "m", DisplayUnits::Us);
        assert!(v.starts_with("10") && v.ends_with(" ft"), "{v}");
        assert_eq!(value(None, "total_head", "m", DisplayUnits::Si), "no value");
    }
}
