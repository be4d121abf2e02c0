//! Observations for the rules: every quantity an engine outcome holds — each reading's reduced
//! values and sensor-health count, each derived value with its reason — as one flat list.
//!
//! Pure: no state, no clock.

use crate::engine::Outcome;
use crate::quality::Flags;

/// One value of one quantity of an instrument or derived object.
#[derive(Debug, Clone, PartialEq)]
pub struct Observation {
    pub object: String,
    pub quantity: String,
    pub t_ms: i64,
    /// `None`: the quantity could not be computed (never a crossing).
    pub value: Option<f64>,
    pub unit: String,
    /// Why there is no value (or a note beside it), for derived values.
    pub reason: Option<String>,
}

/// The observation quantity counting a reading's sensor-health flags.
pub const HEALTH_FLAGS: &str = "health_flags";

/// Every observation an engine outcome holds: each reading's quantities, each derived value.
pub fn observations(out: &Outcome) -> Vec<Observation> {
    observations_of(out, |_| true)
}

/// The observations of the objects `keep` accepts (the others cost nothing).
pub fn observations_of(out: &Outcome, keep: impl Fn(&str) -> bool) -> Vec<Observation> {
    let mut v = Vec::new();
    // A reading stamped ahead of our clock never reaches a rule: its time would make the
    // rule ignore the real readings that follow (see `Flags::TIME_AHEAD`).
    let on_time = |r: &&crate::model::ReadingRow| !r.flags.contains(Flags::TIME_AHEAD);
    for r in out
        .readings
        .iter()
        .filter(on_time)
        .filter(|r| keep(&r.instrument))
    {
        for (quantity, value, unit) in r.quantities() {
            v.push(Observation {
                object: r.instrument.clone(),
                quantity: quantity.into(),
                t_ms: r.t_ms,
                value: Some(value),
                unit: unit.into(),
                reason: None,
            });
        }
        // Sensor health as a quantity rules can watch: how many health flags (spike, flatline,
        // thermistor) this reading carries, plus the spike it confirmed on the reading before;
        // 0 for a clean reading, so an alert on it clears.
        let confirmed = out
            .flag_updates
            .iter()
            .filter(|f| f.instrument == r.instrument && f.flags.contains(Flags::SPIKE))
            .count();
        let health = [Flags::SPIKE, Flags::FLATLINE, Flags::THERMISTOR]
            .iter()
            .filter(|f| r.flags.contains(**f))
            .count()
            + confirmed;
        v.push(Observation {
            object: r.instrument.clone(),
            quantity: HEALTH_FLAGS.into(),
            t_ms: r.t_ms,
            value: Some(health as f64),
            unit: "-".into(),
            reason: None,
        });
    }
    for d in out.derived.iter().filter(|d| keep(&d.object)) {
        v.push(Observation {
            object: d.object.clone(),
            quantity: d.quantity.clone(),
            t_ms: d.t_ms,
            value: d.value,
            unit: d.unit.into(),
            reason: d.reason.clone(),
        });
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::ReadingRow;

    fn reading(flags: Flags) -> ReadingRow {
        ReadingRow {
            instrument: "P1".into(),
            t_ms: 1000,
            arrival_ms: 1000,
            raw: 1.0,
            temperature_c: None,
            baro_kpa: None,
            eng_value: 1.0,
            eng_unit: "kPa",
            pressure_kpa: Some(1.0),
            pressure_head_m: Some(0.1),
            total_head_m: Some(100.1),
            flags,
        }
    }

    fn health(flags: Flags) -> Option<f64> {
        let out = Outcome {
            readings: vec![reading(flags)],
            ..Outcome::default()
        };
        observations(&out)
            .into_iter()
            .find(|o| o.quantity == HEALTH_FLAGS)
            .and_then(|o| o.value)
    }

    #[test]
    fn health_flags_count_only_sensor_health() {
        assert_eq!(health(Flags::empty()), Some(0.0));
        assert_eq!(health(Flags::SPIKE), Some(1.0));
        let mut two = Flags::FLATLINE;
        two.insert(Flags::THERMISTOR);
        two.insert(Flags::TIME_FROM_ARRIVAL);
        assert_eq!(health(two), Some(2.0));
        // A spike is confirmed by the next reading: it counts on that reading.
        let out = Outcome {
            readings: vec![reading(Flags::empty())],
            flag_updates: vec![crate::model::FlagUpdate {
                instrument: "P1".into(),
                t_ms: 0,
                flags: Flags::SPIKE,
            }],
            ..Outcome::default()
        };
        let v = observations(&out)
            .into_iter()
            .find(|o| o.quantity == HEALTH_FLAGS)
            .and_then(|o| o.value);
        assert_eq!(v, Some(1.0));
    }
}
