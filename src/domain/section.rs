//! An instrumented cross-section through a dam or levee: the phreatic line drawn through the
//! piezometer heads, where it breaks out on the downstream slope (exit point and seepage face),
//! and how much cover of ground remains above it.
//!
//! Owns: the geometry of ground and phreatic polylines (piecewise linear in station), the choice
//! of which piezometer reading represents the phreatic surface at a station, and the exit point.
//! Must not: read instruments, draw (see `section_svg`), or decide alert levels.
//!
//! Conventions: stations increase from upstream (pool) to downstream (toe, tail water); the crest
//! is the highest ground point (its downstream edge, for a flat crest); the downstream slope runs
//! from the crest to the downstream toe.

use thiserror::Error;

/// Piezometers closer than this in station are treated as one nest.
pub const SAME_STATION_M: f64 = 1e-3;

/// A point of a polyline in the section plane.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StationPoint {
    /// Distance along the section, m, increasing downstream.
    pub station_m: f64,
    /// Elevation, m.
    pub elevation_m: f64,
}

/// One piezometer reading placed in the section.
#[derive(Debug, Clone, PartialEq)]
pub struct SectionPiezometer {
    /// Instrument id, for labels and for the list of readings used or skipped.
    pub id: String,
    /// Station of the piezometer, m.
    pub station_m: f64,
    /// Tip elevation, m.
    pub tip_elevation_m: f64,
    /// Total head, m.
    pub head_m: f64,
}

/// Everything needed to analyse one section at one time.
#[derive(Debug, Clone, PartialEq)]
pub struct SectionInput {
    /// Ground surface, ordered by strictly increasing station (upstream → downstream).
    pub ground: Vec<StationPoint>,
    /// Pool (reservoir or river) level, m.
    pub pool_m: f64,
    /// Tail water level, m; `None` puts the end of the phreatic line on the ground at the
    /// downstream end of the section.
    pub tail_water_m: Option<f64>,
    /// Station of the downstream toe, m; must lie downstream of the crest.
    pub toe_station_m: f64,
    /// Piezometer readings, in any order.
    pub piezometers: Vec<SectionPiezometer>,
}

/// Where the phreatic line starts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PoolContact {
    /// Where the pool meets the ground on the upstream slope.
    UpstreamFace,
    /// The pool is at or above the crest: the line starts at the first station.
    PoolAboveGround,
    /// All ground upstream of the crest lies above the pool (the section is cut short): the
    /// line starts at the first station, below ground.
    SectionStartsAbovePool,
}

/// Why a piezometer reading does not define the phreatic line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SkipReason {
    /// Head below the tip: the piezometer is dry and says only that the surface is lower.
    Dry,
    /// A shallower tip at the same station was used.
    DeeperThanUsed,
    /// Station at or upstream of the pool contact, or at or beyond the downstream end.
    OutsideSection,
    /// Station, tip or head is NaN or infinite.
    NotFinite,
}

/// A piezometer left out of the phreatic line, and why.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Skipped {
    /// Instrument id.
    pub id: String,
    /// Why it was left out.
    pub reason: SkipReason,
}

/// Ground cover over the phreatic line at a station (negative where the line is above ground).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Cover {
    /// Station, m.
    pub station_m: f64,
    /// Ground minus phreatic elevation, m.
    pub cover_m: f64,
}

/// The analysed section.
#[derive(Debug, Clone, PartialEq)]
pub struct SectionResult {
    /// The phreatic line, stations strictly increasing.
    pub phreatic: Vec<StationPoint>,
    /// How the start of the line was found.
    pub pool_contact: PoolContact,
    /// Highest ground point (downstream edge of a flat crest).
    pub crest: StationPoint,
    /// Ground at the downstream toe.
    pub toe: StationPoint,
    /// First point downstream of the crest where the phreatic line reaches the ground, on the
    /// ground polyline; `None` when it stays below ground down to the toe.
    pub exit: Option<StationPoint>,
    /// Exit elevation − toe ground elevation, m, when the breakout is above the toe.
    pub seepage_face_height_m: Option<f64>,
    /// Smallest cover on the downstream slope (crest to toe), first station of the minimum.
    pub min_cover: Cover,
    /// Ids of the piezometers that define the line, upstream first.
    pub used: Vec<String>,
    /// Piezometers left out, with reasons.
    pub skipped: Vec<Skipped>,
}

/// Why a section could not be analysed.
#[derive(Debug, Clone, PartialEq, Error)]
pub enum SectionError {
    /// The ground needs at least three points (upstream slope, crest, downstream slope).
    #[error("ground polyline needs at least 3 points, got {0}")]
    TooFewGroundPoints(usize),
    /// Ground stations must strictly increase.
    #[error("ground station at index {index} does not increase")]
    StationsNotIncreasing {
        /// Index of the offending point.
        index: usize,
    },
    /// A ground point, the pool, tail water or toe station is NaN or infinite.
    #[error("{0} is not a finite number")]
    NonFinite(&'static str),
    /// The toe must lie downstream of the crest and within the section.
    #[error(
        "toe station {toe_m} m must lie after the crest ({crest_m} m) and by the end ({end_m} m)"
    )]
    ToeOutsideDownstreamSlope {
        /// Toe station given.
        toe_m: f64,
        /// Crest station.
        crest_m: f64,
        /// Last ground station.
        end_m: f64,
    },
}

/// Elevation of a polyline (strictly increasing stations) at `station_m`, linearly
/// interpolated; `None` outside its span.
pub fn elevation_at_m(line: &[StationPoint], station_m: f64) -> Option<f64> {
    let first = line.first()?;
    let last = line.last()?;
    if !(first.station_m..=last.station_m).contains(&station_m) {
        return None;
    }
    // Index of the first point at or beyond the station.
    let j = line.partition_point(|p| p.station_m < station_m);
    let b = line[j];
    if b.station_m == station_m || j == 0 {
        return Some(b.elevation_m);
    }
    let a = line[j - 1];
    let t = (station_m - a.station_m) / (b.station_m - a.station_m);
    Some(a.elevation_m + t * (b.elevation_m - a.elevation_m))
}

/// Build the phreatic line and find the exit point, seepage face and smallest cover.
///
/// # Errors
/// [`SectionError`] when the ground, pool, tail water or toe cannot describe a section.
pub fn analyse(input: &SectionInput) -> Result<SectionResult, SectionError> {
    let ground = &input.ground;
    validate(input)?;
    let max_m = ground
        .iter()
        .map(|p| p.elevation_m)
        .fold(f64::MIN, f64::max);
    let crest_up = ground
        .iter()
        .position(|p| p.elevation_m == max_m)
        .unwrap_or(0);
    let crest_down = ground
        .iter()
        .rposition(|p| p.elevation_m == max_m)
        .unwrap_or(0);
    let crest = ground[crest_down];
    let end = ground[ground.len() - 1];
    if !(input.toe_station_m > crest.station_m && input.toe_station_m <= end.station_m) {
        return Err(SectionError::ToeOutsideDownstreamSlope {
            toe_m: input.toe_station_m,
            crest_m: crest.station_m,
            end_m: end.station_m,
        });
    }
    let (start_m, pool_contact) = pool_contact(ground, crest_up, input.pool_m);
    let end_head_m = input.tail_water_m.unwrap_or(end.elevation_m);
    let (inner, used, skipped) = choose_piezometers(&input.piezometers, start_m, end.station_m);

    let mut phreatic = Vec::with_capacity(inner.len() + 2);
    phreatic.push(point(start_m, input.pool_m));
    phreatic.extend(inner);
    phreatic.push(point(end.station_m, end_head_m));

    let toe_elevation_m = elevation_at_m(ground, input.toe_station_m).unwrap_or(end.elevation_m);
    let toe = point(input.toe_station_m, toe_elevation_m);
    let (exit, min_cover) = downstream_slope(ground, &phreatic, crest.station_m, toe.station_m);
    let seepage_face_height_m = exit
        .map(|e| e.elevation_m - toe.elevation_m)
        .filter(|h| *h > 0.0);
    Ok(SectionResult {
        phreatic,
        pool_contact,
        crest,
        toe,
        exit,
        seepage_face_height_m,
        min_cover,
        used,
        skipped,
    })
}

fn point(station_m: f64, elevation_m: f64) -> StationPoint {
    StationPoint {
        station_m,
        elevation_m,
    }
}

fn validate(input: &SectionInput) -> Result<(), SectionError> {
    let ground = &input.ground;
    if ground.len() < 3 {
        return Err(SectionError::TooFewGroundPoints(ground.len()));
    }
    if ground
        .iter()
        .any(|p| !p.station_m.is_finite() || !p.elevation_m.is_finite())
    {
        return Err(SectionError::NonFinite("a ground point"));
    }
    if let Some(index) = (1..ground.len()).find(|&i| ground[i].station_m <= ground[i - 1].station_m)
    {
        return Err(SectionError::StationsNotIncreasing { index });
    }
    if !input.pool_m.is_finite() {
        return Err(SectionError::NonFinite("pool level"));
    }
    if input.tail_water_m.is_some_and(|t| !t.is_finite()) {
        return Err(SectionError::NonFinite("tail water level"));
    }
    if !input.toe_station_m.is_finite() {
        return Err(SectionError::NonFinite("toe station"));
    }
    Ok(())
}

/// Station where the phreatic line starts: the last crossing of the pool level on the upstream
/// slope before the crest, else the first station.
fn pool_contact(ground: &[StationPoint], crest_up: usize, pool_m: f64) -> (f64, PoolContact) {
    let first_m = ground[0].station_m;
    if pool_m >= ground[crest_up].elevation_m {
        return (first_m, PoolContact::PoolAboveGround);
    }
    // Walk from the crest upstream; ground[i + 1] is above the pool at every step.
    for i in (0..crest_up).rev() {
        let (a, b) = (ground[i], ground[i + 1]);
        if a.elevation_m <= pool_m {
            let t = (pool_m - a.elevation_m) / (b.elevation_m - a.elevation_m);
            let s = a.station_m + t * (b.station_m - a.station_m);
            return (s, PoolContact::UpstreamFace);
        }
    }
    (first_m, PoolContact::SectionStartsAbovePool)
}

/// The inner points of the phreatic line: per station, the shallowest tip that is not dry.
fn choose_piezometers(
    piezometers: &[SectionPiezometer],
    start_m: f64,
    end_m: f64,
) -> (Vec<StationPoint>, Vec<String>, Vec<Skipped>) {
    let mut skipped = Vec::new();
    let mut skip = |p: &SectionPiezometer, reason| {
        skipped.push(Skipped {
            id: p.id.clone(),
            reason,
        })
    };
    let mut candidates: Vec<&SectionPiezometer> = Vec::new();
    for p in piezometers {
        let finite = [p.station_m, p.tip_elevation_m, p.head_m]
            .iter()
            .all(|v| v.is_finite());
        if !finite {
            skip(p, SkipReason::NotFinite);
        } else if p.station_m <= start_m + SAME_STATION_M || p.station_m >= end_m - SAME_STATION_M {
            skip(p, SkipReason::OutsideSection);
        } else if p.head_m < p.tip_elevation_m {
            skip(p, SkipReason::Dry);
        } else {
            candidates.push(p);
        }
    }
    // By station, and within a station the shallowest tip first.
    candidates.sort_by(|a, b| {
        a.station_m
            .total_cmp(&b.station_m)
            .then(b.tip_elevation_m.total_cmp(&a.tip_elevation_m))
    });
    let mut points: Vec<StationPoint> = Vec::new();
    let mut used = Vec::new();
    let mut group_station_m = f64::NEG_INFINITY;
    for p in candidates {
        if p.station_m - group_station_m <= SAME_STATION_M {
            skip(p, SkipReason::DeeperThanUsed);
            continue;
        }
        group_station_m = p.station_m;
        points.push(point(p.station_m, p.head_m));
        used.push(p.id.clone());
    }
    (points, used, skipped)
}

/// Exit point and smallest cover between the crest and the toe. Both lines are piecewise
/// linear, so their difference is linear between the merged breakpoints: the crossing is
/// interpolated exactly and the minimum cover sits on a breakpoint.
fn downstream_slope(
    ground: &[StationPoint],
    phreatic: &[StationPoint],
    crest_m: f64,
    toe_m: f64,
) -> (Option<StationPoint>, Cover) {
    let mut stations: Vec<f64> = ground
        .iter()
        .chain(phreatic)
        .map(|p| p.station_m)
        .filter(|s| *s > crest_m && *s < toe_m)
        .collect();
    stations.push(crest_m);
    stations.push(toe_m);
    stations.sort_by(f64::total_cmp);
    stations.dedup();
    // Phreatic minus ground; the phreatic line spans the crest-to-toe range by construction.
    let rise = |s: f64| {
        let g = elevation_at_m(ground, s).unwrap_or(f64::NAN);
        let p = elevation_at_m(phreatic, s).unwrap_or(f64::NAN);
        p - g
    };
    let rises: Vec<f64> = stations.iter().map(|&s| rise(s)).collect();
    let mut min_cover = Cover {
        station_m: stations[0],
        cover_m: -rises[0],
    };
    for (s, r) in stations.iter().zip(&rises) {
        if -r < min_cover.cover_m {
            min_cover = Cover {
                station_m: *s,
                cover_m: -r,
            };
        }
    }
    let exit_station_m = if rises[0] >= 0.0 {
        Some(stations[0])
    } else {
        (1..stations.len()).find(|&k| rises[k] >= 0.0).map(|k| {
            let (s0, s1) = (stations[k - 1], stations[k]);
            let (r0, r1) = (rises[k - 1], rises[k]);
            (s0 + (s1 - s0) * (-r0) / (r1 - r0)).clamp(s0, s1)
        })
    };
    let exit = exit_station_m
        .and_then(|s| elevation_at_m(ground, s).map(|elevation_m| point(s, elevation_m)));
    (exit, min_cover)
}

#[cfg(test)]
mod tests;
