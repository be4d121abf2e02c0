//! One function per kind of object: gather aligned inputs, call the domain, name the
//! quantities. Each returns (object id, input instrument ids, quantities); when an input is
//! unusable every quantity of the object is returned without a value and with the reason.

use crate::config::{
    BlanketReach, Config, CriticalGradientFrom, LandsideCase, LandwardDistance, Level, Nest,
    RiversideCase, Section, ToeCheck,
};
use crate::domain::blanket::{self, BlanketConfig, Landside, Riverside};
use crate::domain::gradient::{nest_gradients, Direction, Tip};
use crate::domain::section::{SectionInput, SectionPiezometer, StationPoint};
use crate::domain::toe::{
    allowable_blanket_base_head_m, critical_gradient_from_gs_e,
    critical_gradient_from_unit_weights, toe_check, SafetyFactor, ToeInput,
};

use super::{Inputs, Quantity};
use crate::objkind::{ObjectKind, MEASURED_BLANKET};

type Computed = (String, Vec<String>, Vec<Quantity>);

/// Every quantity of an object without a value, for the same reason.
fn all_none(names: &[(&str, &'static str)], reason: &str) -> Vec<Quantity> {
    names
        .iter()
        .map(|(n, u)| Quantity::none(*n, u, reason))
        .collect()
}

/// Vertical gradients of nested piezometers: overall (deepest to shallowest), its direction
/// (+1 upward, 0 none within the deadband, −1 downward), and between adjacent tips when there
/// are three or more (`vertical_gradient:UPPER/LOWER`).
pub(super) fn nest(c: &Nest, inp: &Inputs<'_>) -> Computed {
    let tips: Result<Vec<(String, Tip, f64)>, String> = c
        .piezometers
        .iter()
        .map(|id| {
            let tip = inp
                .deriver
                .cfg
                .instruments
                .get(id)
                .and_then(|i| i.tip_elevation_m)
                .ok_or_else(|| format!("input {id} has no tip elevation"))?;
            let head_m = inp.head(id, c.tolerance_s)?;
            Ok((
                id.clone(),
                Tip {
                    tip_elevation_m: tip,
                    head_m,
                },
                tip,
            ))
        })
        .collect();
    let qs = match tips {
        Err(reason) => all_none(ObjectKind::Nest.quantities(), &reason),
        Ok(mut tips) => {
            tips.sort_by(|a, b| a.2.total_cmp(&b.2));
            let plain: Vec<Tip> = tips.iter().map(|t| t.1).collect();
            match nest_gradients(&plain, c.deadband) {
                Err(e) => all_none(ObjectKind::Nest.quantities(), &e.to_string()),
                Ok(g) => {
                    let dir = match g.overall.direction {
                        Direction::Upward => 1.0,
                        Direction::None => 0.0,
                        Direction::Downward => -1.0,
                    };
                    let mut qs = vec![
                        Quantity::some("vertical_gradient", g.overall.gradient, "-"),
                        Quantity::some("flow_direction", dir, "-"),
                    ];
                    if tips.len() >= 3 {
                        for (k, pair) in g.adjacent.iter().enumerate() {
                            let name = format!("vertical_gradient:{}/{}", tips[k + 1].0, tips[k].0);
                            qs.push(Quantity::some(name, pair.gradient, "-"));
                        }
                    }
                    qs
                }
            }
        }
    };
    (c.id.clone(), c.piezometers.clone(), qs)
}

/// Toe check: exit gradient `i = h_o/z_t`, critical gradient, `FS = i_c/i` (no value when
/// `i ≤ 0`), excess head and the allowable head at the blanket base for the target FS.
pub(super) fn toe(cfg: &Config, t: &ToeCheck, inp: &Inputs<'_>) -> Computed {
    let mut names = vec![t.piezometer.clone()];
    if let Some(Level::Gauge(g)) = &t.water {
        names.push(g.clone());
    }
    let gamma_w = cfg
        .sites
        .iter()
        .find(|s| s.id == t.site)
        .map_or(9.81, |s| s.gamma_w_kn_m3);
    let compute = || -> Result<Vec<Quantity>, String> {
        let head = inp.head(&t.piezometer, t.tolerance_s)?;
        let water = match &t.water {
            Some(l) => Some(inp.level(l, t.tolerance_s)?),
            None => None,
        };
        let i_c = match t.critical {
            CriticalGradientFrom::UnitWeight { gamma_sat_kn_m3 } => {
                critical_gradient_from_unit_weights(gamma_sat_kn_m3, gamma_w)
            }
            CriticalGradientFrom::GsE {
                specific_gravity,
                void_ratio,
            } => critical_gradient_from_gs_e(specific_gravity, void_ratio),
        }
        .map_err(|e| e.to_string())?;
        let check = toe_check(&ToeInput {
            blanket_base_head_m: head,
            ground_elevation_m: t.ground_elevation_m,
            water_level_m: water,
            blanket_thickness_m: t.blanket_thickness_m,
            critical_gradient: i_c,
        })
        .map_err(|e| e.to_string())?;
        let allowable = allowable_blanket_base_head_m(
            t.ground_elevation_m,
            water,
            t.blanket_thickness_m,
            i_c,
            t.fs_target,
        )
        .map_err(|e| e.to_string())?;
        let fs = match check.factor_of_safety {
            SafetyFactor::Value(v) => Quantity::some("factor_of_safety", v, "-"),
            SafetyFactor::NotApplicable => Quantity::none(
                "factor_of_safety",
                "-",
                "not applicable: no upward exit gradient (i <= 0)",
            ),
        };
        Ok(vec![
            Quantity::some("excess_head", check.excess_head_m, "m"),
            Quantity::some("head_above_ground", check.head_above_ground_m, "m"),
            Quantity::some("exit_gradient", check.exit_gradient, "-"),
            Quantity::some("critical_gradient", check.critical_gradient, "-"),
            fs,
            Quantity::some("allowable_head", allowable, "m"),
        ])
    };
    let qs = compute().unwrap_or_else(|reason| all_none(ObjectKind::Toe.quantities(), &reason));
    (t.id.clone(), names, qs)
}

fn riverside(c: RiversideCase) -> Riverside {
    match c {
        RiversideCase::OpenEntranceAt { l1_m } => Riverside::OpenEntranceAt { l1_m },
        RiversideCase::NoBlanket => Riverside::NoBlanket,
        RiversideCase::Impervious { l1_m } => Riverside::Impervious { l1_m },
    }
}

fn landside(c: LandsideCase) -> Landside {
    match c {
        LandsideCase::Endless => Landside::Endless,
        LandsideCase::SeepageBlockAt { l3_m } => Landside::SeepageBlockAt { l3_m },
        LandsideCase::OpenExitAt { l3_m } => Landside::OpenExitAt { l3_m },
        LandsideCase::Impervious { l3_m } => Landside::Impervious { l3_m },
    }
}

/// The residual-head ratio `h_o/H` blanket theory gives for a reach (independent of `H`).
pub fn blanket_ratio(b: &BlanketReach) -> Option<f64> {
    blanket::solve(&BlanketConfig {
        net_head_m: 1.0,
        base_width_m: b.base_width_m,
        foundation_thickness_m: b.foundation_thickness_m,
        k_foundation_m_s: b.k_foundation_m_s,
        k_blanket_m_s: b.k_blanket_m_s,
        blanket_thickness_m: b.blanket_thickness_m,
        riverside: riverside(b.riverside),
        landside: landside(b.landside),
    })
    .ok()
    .map(|s| s.residual_head_ratio)
}

/// Name of the expected excess head at a distance landward of the toe.
fn at_distance(x: &LandwardDistance) -> String {
    x.quantity()
}

/// Blanket theory for a reach: the expected toe excess head, exit gradient, residual-head ratio
/// and seepage for the current river stage; expected excess heads landward of the toe; and,
/// with a toe piezometer, the measured ratio and the back-calculated effective length x3.
pub(super) fn blanket(b: &BlanketReach, inp: &Inputs<'_>) -> Computed {
    let mut names = vec![b.river_gauge.clone()];
    if let Level::Gauge(g) = &b.landside_level {
        names.push(g.clone());
    }
    names.extend(b.toe_piezometer.clone());
    let mut all: Vec<(String, &'static str)> = ObjectKind::Blanket
        .quantities()
        .iter()
        .map(|(n, u)| (n.to_string(), *u))
        .collect();
    all.extend(b.distances.iter().map(|x| (at_distance(x), "m")));
    if b.toe_piezometer.is_some() {
        all.extend(MEASURED_BLANKET.iter().map(|(n, u)| (n.to_string(), *u)));
    }
    let compute = || -> Result<Vec<Quantity>, String> {
        let river = inp.head(&b.river_gauge, b.tolerance_s)?;
        let land = inp.level(&b.landside_level, b.tolerance_s)?;
        // The expectation needs only the stages; an unusable toe piezometer leaves just
        // the measured quantities without a value.
        let measured = b
            .toe_piezometer
            .as_ref()
            .map(|p| inp.head(p, b.tolerance_s).map(|h| h - land));
        let h = river - land;
        if h <= 0.0 {
            return Err(format!(
                "no net head: river {river:.3} m is not above the landside level {land:.3} m"
            ));
        }
        let sol = blanket::solve(&BlanketConfig {
            net_head_m: h,
            base_width_m: b.base_width_m,
            foundation_thickness_m: b.foundation_thickness_m,
            k_foundation_m_s: b.k_foundation_m_s,
            k_blanket_m_s: b.k_blanket_m_s,
            blanket_thickness_m: b.blanket_thickness_m,
            riverside: riverside(b.riverside),
            landside: landside(b.landside),
        })
        .map_err(|e| e.to_string())?;
        let note = sol
            .outside_validity
            .then(|| "k_f/k_b < 10: outside the theory's stated range".to_string());
        let mut qs = vec![
            Quantity::some("net_head", h, "m"),
            Quantity::some("expected_excess_head", sol.toe_head_m, "m"),
            Quantity::some("expected_exit_gradient", sol.exit_gradient, "-"),
            Quantity::some("expected_residual_ratio", sol.residual_head_ratio, "-"),
            Quantity::some("expected_flow", sol.flow_m2_s, "m2/s"),
        ];
        for x in &b.distances {
            qs.push(match sol.head_landward_m(x.m) {
                Some(v) => Quantity::some(at_distance(x), v, "m"),
                None => Quantity::none(at_distance(x), "m", "beyond the landside blanket"),
            });
        }
        match measured {
            Some(Ok(h_o)) => {
                qs.push(Quantity::some("measured_excess_head", h_o, "m"));
                qs.push(Quantity::some("measured_residual_ratio", h_o / h, "-"));
                let x3 = blanket::back_calculated_x3_m(h_o, h, sol.x1_m, b.base_width_m);
                qs.push(match x3 {
                    Some(x3) => Quantity::some("effective_x3", x3, "m"),
                    None => Quantity::none(
                        "effective_x3",
                        "m",
                        "measured excess head outside (0, H): no effective length reproduces it",
                    ),
                });
            }
            Some(Err(reason)) => {
                for (q, u) in MEASURED_BLANKET {
                    qs.push(Quantity::none(q, u, reason.clone()));
                }
            }
            None => {}
        }
        if let Some(n) = note {
            qs.iter_mut()
                .filter(|q| q.reason.is_none())
                .for_each(|q| q.reason = Some(n.clone()));
        }
        Ok(qs)
    };
    let qs = compute().unwrap_or_else(|reason| {
        all.iter()
            .map(|(n, u)| Quantity::none(n.clone(), u, &reason))
            .collect()
    });
    (b.id.clone(), names, qs)
}

/// Build a section's analysis input from heads looked up by `head(id)`.
///
/// # Errors
/// The reason when an input is unusable.
pub fn section_input(
    cfg: &Config,
    s: &Section,
    head: impl Fn(&str) -> Result<f64, String>,
) -> Result<SectionInput, String> {
    let pool_m = head(&s.pool_gauge)?;
    let tail_water_m = match &s.tail {
        Some(Level::Fixed(m)) => Some(*m),
        Some(Level::Gauge(g)) => Some(head(g)?),
        None => None,
    };
    let mut piezometers = Vec::new();
    for id in &s.piezometers {
        let i = cfg
            .instruments
            .get(id)
            .ok_or_else(|| format!("input {id} is not configured"))?;
        let (Some(station_m), Some(tip_elevation_m)) = (i.location.station_m, i.tip_elevation_m)
        else {
            return Err(format!("input {id} has no station or tip elevation"));
        };
        piezometers.push(SectionPiezometer {
            id: id.clone(),
            station_m,
            tip_elevation_m,
            head_m: head(id)?,
        });
    }
    Ok(SectionInput {
        ground: s
            .ground
            .iter()
            .map(|&(station_m, elevation_m)| StationPoint {
                station_m,
                elevation_m,
            })
            .collect(),
        pool_m,
        tail_water_m,
        toe_station_m: s.toe_station_m,
        piezometers,
    })
}

/// Section: the seepage-face exit point on the downstream slope (no value when the phreatic
/// line stays below it), seepage-face height above the toe (0 without breakout), and the
/// smallest cover along the downstream slope.
pub(super) fn section(cfg: &Config, s: &Section, inp: &Inputs<'_>) -> Computed {
    let mut names = vec![s.pool_gauge.clone()];
    if let Some(Level::Gauge(g)) = &s.tail {
        names.push(g.clone());
    }
    names.extend(s.piezometers.iter().cloned());
    let compute = || -> Result<Vec<Quantity>, String> {
        let input = section_input(cfg, s, |id| inp.head(id, s.tolerance_s))?;
        let r = crate::domain::section::analyse(&input).map_err(|e| e.to_string())?;
        let no_exit = "phreatic line stays below the downstream slope (no breakout)";
        Ok(vec![
            match r.exit {
                Some(p) => Quantity::some("exit_station", p.station_m, "m"),
                None => Quantity::none("exit_station", "m", no_exit),
            },
            match r.exit {
                Some(p) => Quantity::some("exit_elevation", p.elevation_m, "m"),
                None => Quantity::none("exit_elevation", "m", no_exit),
            },
            Quantity::some(
                "seepage_face_height",
                r.seepage_face_height_m.unwrap_or(0.0),
                "m",
            ),
            Quantity::some("min_cover", r.min_cover.cover_m, "m"),
            Quantity::some("min_cover_station", r.min_cover.station_m, "m"),
        ])
    };
    let qs = compute().unwrap_or_else(|reason| all_none(ObjectKind::Section.quantities(), &reason));
    (s.id.clone(), names, qs)
}
