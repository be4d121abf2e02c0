//! The report's summary, the same sentences at the top of the HTML and PDF and in the report
//! email's body: lowest factor of safety and when, highest exit gradient, highest water,
//! alerts raised and cleared, data completeness, instruments silent, suspect or new, and what
//! changed since the previous period of the same length.
//!
//! Pure: works on gathered data (`ReportData` of this and the previous period, alert rows).

use chrono_tz::Tz;

use super::data::{DerivedStats, InstrumentStats, ReportData};
use super::html::local;
use crate::config::Config;
use crate::present::format::{shown, shown_change};
use crate::present::quantity_name;

/// The lowest (or highest) value of `quantity` over `rows`, with its object and time.
fn extreme<'a>(
    rows: &'a [DerivedStats],
    quantity: &str,
    lowest: bool,
) -> Option<(&'a DerivedStats, (i64, f64))> {
    rows.iter()
        .filter(|d| d.quantity == quantity)
        .filter_map(|d| Some((d, if lowest { d.min? } else { d.max? })))
        .reduce(|a, b| {
            let better = if lowest {
                b.1 .1 < a.1 .1
            } else {
                b.1 .1 > a.1 .1
            };
            if better {
                b
            } else {
                a
            }
        })
}

fn all(d: &ReportData) -> impl Iterator<Item = &InstrumentStats> {
    d.piezometers.iter().chain(&d.stages).chain(&d.others)
}

/// The summary sentences.
pub fn lines(
    _cfg: &Config,
    d: &ReportData,
    previous: &ReportData,
    alerts: &[[String; 5]],
) -> Vec<String> {
    let tz: Tz = d.time_zone.parse().unwrap_or(chrono_tz::UTC);
    let u = d.units;
    let mut out = Vec::new();
    let fs_name = quantity_name("factor_of_safety", None);
    match extreme(&d.toes, "factor_of_safety", true) {
        Some((o, (t, v))) => {
            let mut line = format!(
                "Lowest {}: {} at {} on {}.",
                fs_name.to_lowercase(),
                shown(v, "factor_of_safety", "-", u),
                o.object,
                local(t, tz)
            );
            if let Some((_, (_, pv))) = extreme(&previous.toes, "factor_of_safety", true) {
                line.push_str(&format!(
                    " Previous period: {}.",
                    shown(pv, "factor_of_safety", "-", u)
                ));
            }
            out.push(line);
        }
        None if !d.toes.is_empty() => out.push(format!(
            "No {} was computed in this period (see the toe checks and alerts).",
            fs_name.to_lowercase()
        )),
        None => {}
    }
    if let Some((o, (t, v))) = extreme(&d.toes, "exit_gradient", false) {
        out.push(format!(
            "Highest exit gradient: {} at {} on {}.",
            shown(v, "exit_gradient", "-", u),
            o.object,
            local(t, tz)
        ));
    }
    for s in &d.stages {
        if let Some((t, v)) = s.max {
            out.push(format!(
                "Highest water level at {}: {} on {}.",
                s.id,
                shown(v, "water_elevation", "m", u),
                local(t, tz)
            ));
        }
    }
    let count = |kind: &str| alerts.iter().filter(|r| r[1] == kind).count();
    out.push(format!(
        "Alerts in this period: {} raised, {} escalated, {} resolved.",
        count("raised"),
        count("escalated"),
        count("resolved")
    ));
    out.push(match (d.completeness_pct(), previous.completeness_pct()) {
        (Some(c), Some(p)) => {
            format!("Data completeness: {c:.1} % of expected readings (previous period {p:.1} %).")
        }
        (Some(c), None) => format!("Data completeness: {c:.1} % of expected readings."),
        (None, _) => "No readings were expected in this period.".into(),
    });
    let silent: Vec<&str> = all(d)
        .filter(|i| i.readings == 0 && i.expected > 0)
        .map(|i| i.id.as_str())
        .collect();
    let newly_silent: Vec<&str> = silent
        .iter()
        .copied()
        .filter(|id| all(previous).any(|p| p.id == *id && p.readings > 0))
        .collect();
    if !silent.is_empty() {
        out.push(format!(
            "Silent in this period: {} (newly silent since the previous period: {}).",
            silent.join(", "),
            if newly_silent.is_empty() {
                "none".to_string()
            } else {
                newly_silent.join(", ")
            }
        ));
    }
    let suspect: Vec<String> = all(d)
        .filter(|i| i.flagged > 0)
        .map(|i| format!("{} ({} flagged)", i.id, i.flagged))
        .collect();
    if !suspect.is_empty() {
        out.push(format!("Readings flagged: {}.", suspect.join(", ")));
    }
    let (f, t) = (d.from.timestamp_millis(), d.to.timestamp_millis());
    let added: Vec<&str> = all(d)
        .filter(|i| i.installed_ms >= f && i.installed_ms < t)
        .map(|i| i.id.as_str())
        .collect();
    if !added.is_empty() {
        out.push(format!("Installed in this period: {}.", added.join(", ")));
    }
    // The largest change of a piezometer's latest head since the previous period.
    let moved = d
        .piezometers
        .iter()
        .filter_map(|i| {
            let now = i.latest?.1;
            let before = previous
                .piezometers
                .iter()
                .find(|p| p.id == i.id)?
                .latest?
                .1;
            Some((i, now - before))
        })
        .max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()));
    if let Some((i, dv)) = moved {
        out.push(format!(
            "Largest change of a piezometer's latest head since the previous period: {} at {}.",
            shown_change(dv, "total_head", "m", u),
            i.id
        ));
    }
    out
}
