//! The report's parts as both documents name and explain them: each part's heading and note,
//! and the rows of the data-quality tables, so the HTML and the PDF say the same thing in the
//! same words (each lays them out in its own way and order).
//!
//! Owns the wording of headings, notes and data-quality rows. Must not: lay out or format for
//! one document.

use super::data::{DerivedStats, InstrumentStats, ReportData};
use crate::present::format::FS_CAP_RULE;

/// A part of the report.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Part {
    Summary,
    Places,
    Piezometers,
    Stages,
    Others,
    Plots,
    Toes,
    Gradients,
    Blankets,
    Sections,
    Alerts,
    Quality,
    Quarantine,
    Flagged,
}

impl Part {
    /// The heading.
    pub fn title(self) -> &'static str {
        match self {
            Part::Summary => "Summary",
            Part::Places => "Instruments and where they are",
            Part::Piezometers => "Piezometers",
            Part::Stages => "Pool and river stage",
            Part::Others => "Other instruments",
            Part::Plots => "Plots",
            Part::Toes => "Toe checks",
            Part::Gradients => "Vertical gradients",
            Part::Blankets => "Blanket theory (expected underseepage heads)",
            Part::Sections => "Sections",
            Part::Alerts => "Alerts, acknowledgements and silences",
            Part::Quality => "Data quality",
            Part::Quarantine => "Quarantined input (whole service)",
            Part::Flagged => "Instruments with health flags",
        }
    }

    /// The note under the part's table, if it has one.
    pub fn note(self) -> Option<String> {
        match self {
            Part::Toes => Some(format!(
                "Exit gradient i = h_o/z_t (positive upward); FS = i_c/i, not applicable (—) \
                 while i ≤ 0. The lowest factor of safety in the period and its time are in the \
                 Minimum columns; its maximum is not shown (it says nothing about safety). \
                 {FS_CAP_RULE}"
            )),
            Part::Gradients => Some("Positive gradients mean upward flow.".into()),
            Part::Blankets => Some(
                "Expected values from blanket theory for the river stage at the time; measured \
                 excess head from the toe piezometer."
                    .into(),
            ),
            _ => None,
        }
    }
}

/// The derived-value parts that have rows, in the order both documents show them.
pub fn derived(d: &ReportData) -> impl Iterator<Item = (Part, &[DerivedStats])> {
    [
        (Part::Toes, &d.toes),
        (Part::Gradients, &d.gradients),
        (Part::Blankets, &d.blankets),
        (Part::Sections, &d.sections),
    ]
    .into_iter()
    .filter(|(_, rows)| !rows.is_empty())
    .map(|(part, rows)| (part, rows.as_slice()))
}

/// Header of the quarantine table.
pub const QUARANTINE_HEADER: [&str; 2] = ["Reason", "Count"];

/// Header of the health-flag table.
pub const FLAGGED_HEADER: [&str; 3] = ["Instrument", "Flags", "Flagged readings"];

/// Rows of the quarantine table: reason, count.
pub fn quarantine_rows(d: &ReportData) -> Vec<Vec<String>> {
    d.quarantine
        .iter()
        .map(|(reason, n)| vec![reason.clone(), n.to_string()])
        .collect()
}

/// Rows of the health-flag table: every instrument with a flagged reading in the period, the
/// count per flag and in all.
pub fn flagged_rows(d: &ReportData) -> Vec<Vec<String>> {
    d.piezometers
        .iter()
        .chain(&d.stages)
        .chain(&d.others)
        .filter(|i| i.flagged > 0)
        .map(|i: &InstrumentStats| {
            let flags: Vec<String> = i
                .flag_counts
                .iter()
                .map(|(n, c)| format!("{n} {c}"))
                .collect();
            vec![i.id.clone(), flags.join(", "), i.flagged.to_string()]
        })
        .collect()
}
