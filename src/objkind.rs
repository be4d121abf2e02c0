//! The kinds of derived-quantity object — one enum, one registry (`ObjectKind::ALL`) — and what
//! each kind is called: its site-file table, its export tag, its fixed quantities with their
//! stored units. Ground floor beside `model`: depends on nothing.
//!
//! A new kind is a variant here plus its line in `ALL`; every `match` on `ObjectKind` (these
//! names, the config reader's dispatch in `config::objects`, `config::Objects`, the derive
//! dispatch in `derive`) then fails to compile until it handles the kind.

/// A kind of derived-quantity object, as configured in a site file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum ObjectKind {
    /// `[[nest]]`: nested piezometers, vertical gradients.
    Nest,
    /// `[[toe]]`: a toe check, exit gradient and factor of safety against heave.
    Toe,
    /// `[[blanket]]`: a levee reach under blanket theory.
    Blanket,
    /// `[[section]]`: a cross-section, its phreatic line and (with a model) its flow net.
    Section,
}

impl ObjectKind {
    /// The registry: every kind, in the order a site file's tables are read and listed.
    pub const ALL: [ObjectKind; 4] = [
        ObjectKind::Nest,
        ObjectKind::Toe,
        ObjectKind::Blanket,
        ObjectKind::Section,
    ];

    /// The site file's table, as written (`[[nest]]` → `nest`).
    pub const fn table(self) -> &'static str {
        match self {
            ObjectKind::Nest => "nest",
            ObjectKind::Toe => "toe",
            ObjectKind::Blanket => "blanket",
            ObjectKind::Section => "section",
        }
    }

    /// The `object_kind` tag of exported derived values (README "InfluxDB export").
    pub fn export_tag(self) -> &'static str {
        match self {
            ObjectKind::Nest => "nest",
            ObjectKind::Toe => "toe_check",
            ObjectKind::Blanket => "blanket_reach",
            ObjectKind::Section => "section",
        }
    }

    /// The quantities every object of the kind has (name, stored unit), in the order they are
    /// computed. Quantities named by configuration (a nest's pairs of tips, a blanket's
    /// landward distances) and those that need an optional input (`MEASURED_BLANKET`) come on
    /// top.
    pub fn quantities(self) -> &'static [(&'static str, &'static str)] {
        match self {
            ObjectKind::Nest => &[("vertical_gradient", "-"), ("flow_direction", "-")],
            ObjectKind::Toe => &[
                ("excess_head", "m"),
                ("head_above_ground", "m"),
                ("exit_gradient", "-"),
                ("critical_gradient", "-"),
                ("factor_of_safety", "-"),
                ("allowable_head", "m"),
            ],
            ObjectKind::Blanket => &[
                ("net_head", "m"),
                ("expected_excess_head", "m"),
                ("expected_exit_gradient", "-"),
                ("expected_residual_ratio", "-"),
                ("expected_flow", "m2/s"),
            ],
            ObjectKind::Section => &[
                ("exit_station", "m"),
                ("exit_elevation", "m"),
                ("seepage_face_height", "m"),
                ("min_cover", "m"),
                ("min_cover_station", "m"),
            ],
        }
    }
}

/// Quantities of a blanket reach that need its toe piezometer.
pub const MEASURED_BLANKET: [(&str, &str); 3] = [
    ("measured_excess_head", "m"),
    ("measured_residual_ratio", "-"),
    ("effective_x3", "m"),
];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tables_and_tags_are_distinct() {
        let tables: std::collections::BTreeSet<_> = ObjectKind::ALL.map(ObjectKind::table).into();
        let tags: std::collections::BTreeSet<_> =
            ObjectKind::ALL.map(ObjectKind::export_tag).into();
        assert_eq!((tables.len(), tags.len()), (4, 4));
    }
}
