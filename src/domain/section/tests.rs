//! Phreatic line, exit point, seepage face and cover: worked sections [derived by hand from the
//! geometry, shown beside each assertion], edge cases and properties on random sections.

use super::*;
use crate::domain::testutil::{close, Rng};

fn pt(station_m: f64, elevation_m: f64) -> StationPoint {
    StationPoint {
        station_m,
        elevation_m,
    }
}

fn piezo(id: &str, station_m: f64, tip_elevation_m: f64, head_m: f64) -> SectionPiezometer {
    SectionPiezometer {
        id: id.into(),
        station_m,
        tip_elevation_m,
        head_m,
    }
}

/// Foundation at 100 m; upstream slope 10 → 40 m rising to a crest at 115 m (40 → 46 m);
/// downstream slope 1 on 2 from 46 m down to the toe at 76 m; foundation to 100 m.
fn embankment() -> Vec<StationPoint> {
    vec![
        pt(0.0, 100.0),
        pt(10.0, 100.0),
        pt(40.0, 115.0),
        pt(46.0, 115.0),
        pt(76.0, 100.0),
        pt(100.0, 100.0),
    ]
}

fn breakout_section() -> SectionInput {
    SectionInput {
        ground: embankment(),
        pool_m: 112.0,
        tail_water_m: None,
        toe_station_m: 76.0,
        piezometers: vec![
            piezo("P-1", 50.0, 101.0, 110.0),
            piezo("P-3", 60.0, 95.0, 110.0), // deeper tip of the nest at 60 m
            piezo("P-2", 60.0, 100.5, 109.0),
            piezo("P-4", 70.0, 99.0, 98.5), // dry
            piezo("P-5", 72.0, 98.0, 100.5),
        ],
    }
}

#[test]
fn breakout_on_the_downstream_slope() {
    let r = analyse(&breakout_section()).unwrap();
    // Pool 112 m meets the upstream slope at 10 + 30·(12/15) = 34 m [derived].
    assert_eq!(r.pool_contact, PoolContact::UpstreamFace);
    assert!(close(r.phreatic[0].station_m, 34.0, 1e-12));
    assert_eq!(r.phreatic[0].elevation_m, 112.0);
    assert_eq!(r.crest, pt(46.0, 115.0));
    // Shallowest wet tip per station; the deeper nested tip and the dry one are skipped.
    assert_eq!(r.used, vec!["P-1", "P-2", "P-5"]);
    assert!(r.skipped.contains(&Skipped {
        id: "P-3".into(),
        reason: SkipReason::DeeperThanUsed
    }));
    assert!(r.skipped.contains(&Skipped {
        id: "P-4".into(),
        reason: SkipReason::Dry
    }));
    // Tail water None: the line ends on the ground at the downstream end.
    assert_eq!(*r.phreatic.last().unwrap(), pt(100.0, 100.0));
    // Between 50 m (110) and 60 m (109) the line rises over a slope falling 0.5 m/m:
    // −3 + 0.4·(s − 50) = 0 → s = 57.5 m, ground 115 − 0.5·11.5 = 109.25 m [derived].
    let exit = r.exit.unwrap();
    assert!(close(exit.station_m, 57.5, 1e-9), "{exit:?}");
    assert!(close(exit.elevation_m, 109.25, 1e-9));
    // Seepage face above the toe (ground 100 m at 76 m): 9.25 m [derived].
    assert!(close(r.seepage_face_height_m.unwrap(), 9.25, 1e-9));
    assert_eq!(r.toe, pt(76.0, 100.0));
    // Least cover: −1.0 m at 60 m (head 109 over ground 108) [derived].
    assert!(close(r.min_cover.station_m, 60.0, 1e-12));
    assert!(close(r.min_cover.cover_m, -1.0, 1e-9));
}

#[test]
fn no_breakout_when_heads_stay_below_the_slope() {
    let input = SectionInput {
        piezometers: vec![
            piezo("P-1", 50.0, 101.0, 106.0),
            piezo("P-2", 74.0, 97.0, 100.0),
        ],
        tail_water_m: Some(98.0),
        ..breakout_section()
    };
    let r = analyse(&input).unwrap();
    assert_eq!(r.exit, None);
    assert_eq!(r.seepage_face_height_m, None);
    assert_eq!(*r.phreatic.last().unwrap(), pt(100.0, 98.0));
    // Covers: 7.5 m at the crest, 7 m at 50 m, 1 m at 74 m; at the toe the line
    // (74, 100) → (100, 98) is at 100 − 2·2/26, so the least cover is 2/13 m at 76 m [derived].
    assert!(close(r.min_cover.station_m, 76.0, 1e-12));
    assert!(close(r.min_cover.cover_m, 2.0 / 13.0, 1e-9));
}

#[test]
fn breakout_exactly_at_the_toe_has_no_seepage_face() {
    // Line (60, 104) → (76, 100) → tail water 100 at the end; the slope is 108 at 60 m.
    let input = SectionInput {
        piezometers: vec![
            piezo("P-1", 60.0, 99.0, 104.0),
            piezo("P-2", 76.0, 99.0, 100.0),
        ],
        tail_water_m: Some(100.0),
        ..breakout_section()
    };
    let r = analyse(&input).unwrap();
    let exit = r.exit.unwrap();
    assert!(close(exit.station_m, 76.0, 1e-9) && close(exit.elevation_m, 100.0, 1e-9));
    assert_eq!(r.seepage_face_height_m, None);
    assert!(close(r.min_cover.cover_m, 0.0, 1e-9));
}

#[test]
fn pool_contact_cases() {
    let over = SectionInput {
        pool_m: 116.0,
        piezometers: vec![],
        ..breakout_section()
    };
    let r = analyse(&over).unwrap();
    assert_eq!(r.pool_contact, PoolContact::PoolAboveGround);
    assert_eq!(r.phreatic[0], pt(0.0, 116.0));
    // No piezometers: straight line (0, 116) → (100, 100), i.e. 116 − 0.16·s, meets the slope
    // 138 − 0.5·s at s = 22/0.34 = 64.7059 m [derived].
    assert!(close(r.exit.unwrap().station_m, 22.0 / 0.34, 1e-9));

    let low = SectionInput {
        ground: vec![pt(0.0, 105.0), pt(20.0, 115.0), pt(40.0, 100.0)],
        pool_m: 104.0,
        tail_water_m: None,
        toe_station_m: 40.0,
        piezometers: vec![piezo("P-0", 0.0, 95.0, 104.0)],
    };
    let r = analyse(&low).unwrap();
    assert_eq!(r.pool_contact, PoolContact::SectionStartsAbovePool);
    assert_eq!(r.phreatic[0], pt(0.0, 104.0));
    assert_eq!(r.skipped[0].reason, SkipReason::OutsideSection);
}

#[test]
fn invalid_sections_are_typed_errors() {
    let base = breakout_section();
    let few = SectionInput {
        ground: vec![pt(0.0, 1.0), pt(1.0, 2.0)],
        ..base.clone()
    };
    assert_eq!(analyse(&few), Err(SectionError::TooFewGroundPoints(2)));
    let mut ground = embankment();
    ground[3].station_m = 40.0;
    let unordered = SectionInput {
        ground,
        ..base.clone()
    };
    assert_eq!(
        analyse(&unordered),
        Err(SectionError::StationsNotIncreasing { index: 3 })
    );
    let toe_up = SectionInput {
        toe_station_m: 30.0,
        ..base.clone()
    };
    assert!(matches!(
        analyse(&toe_up),
        Err(SectionError::ToeOutsideDownstreamSlope { .. })
    ));
    let nan = SectionInput {
        pool_m: f64::NAN,
        ..base.clone()
    };
    assert_eq!(analyse(&nan), Err(SectionError::NonFinite("pool level")));
    let bad_piezo = SectionInput {
        piezometers: vec![piezo("P-9", 50.0, f64::NAN, 110.0)],
        ..base
    };
    assert_eq!(
        analyse(&bad_piezo).unwrap().skipped[0].reason,
        SkipReason::NotFinite
    );
}

#[test]
fn elevation_at_interpolates_and_refuses_outside() {
    let g = embankment();
    assert_eq!(elevation_at_m(&g, 25.0), Some(107.5));
    assert_eq!(elevation_at_m(&g, 46.0), Some(115.0));
    assert_eq!(elevation_at_m(&g, 0.0), Some(100.0));
    assert_eq!(elevation_at_m(&g, 100.0), Some(100.0));
    assert_eq!(elevation_at_m(&g, 100.1), None);
    assert_eq!(elevation_at_m(&g, -0.1), None);
    assert_eq!(elevation_at_m(&[], 1.0), None);
}

/// Shortest distance from a point to a polyline.
fn distance_to_polyline(p: StationPoint, line: &[StationPoint]) -> f64 {
    line.windows(2)
        .map(|w| {
            let (ax, ay, bx, by) = (
                w[0].station_m,
                w[0].elevation_m,
                w[1].station_m,
                w[1].elevation_m,
            );
            let (dx, dy) = (bx - ax, by - ay);
            let t = (((p.station_m - ax) * dx + (p.elevation_m - ay) * dy) / (dx * dx + dy * dy))
                .clamp(0.0, 1.0);
            ((ax + t * dx - p.station_m).powi(2) + (ay + t * dy - p.elevation_m).powi(2)).sqrt()
        })
        .fold(f64::INFINITY, f64::min)
}

fn random_section(rng: &mut Rng) -> SectionInput {
    let n = rng.int(3, 12);
    let mut station = rng.range(-50.0, 50.0);
    let mut ground = Vec::new();
    for _ in 0..n {
        ground.push(pt(station, rng.range(90.0, 130.0)));
        station += rng.range(0.5, 40.0);
    }
    // Make the last point the lowest, so the crest is not last and a downstream slope exists.
    let last = ground.len() - 1;
    let min_m = ground
        .iter()
        .map(|p| p.elevation_m)
        .fold(f64::MAX, f64::min);
    ground[last].elevation_m = min_m - rng.range(0.1, 5.0);
    let max_m = ground
        .iter()
        .map(|p| p.elevation_m)
        .fold(f64::MIN, f64::max);
    let crest_m = ground[ground.iter().rposition(|p| p.elevation_m == max_m).unwrap()].station_m;
    let end_m = ground[last].station_m;
    let toe_station_m = rng.range(crest_m, end_m).max(crest_m + 1e-6).min(end_m);
    let (s0, s1) = (ground[0].station_m, end_m);
    let piezometers = (0..rng.int(0, 8))
        .map(|k| {
            let tip = rng.range(80.0, 110.0);
            piezo(
                &format!("P-{k}"),
                rng.range(s0, s1),
                tip,
                tip + rng.range(-3.0, 35.0),
            )
        })
        .collect();
    SectionInput {
        ground,
        pool_m: rng.range(95.0, 135.0),
        tail_water_m: if rng.unit() < 0.5 {
            Some(rng.range(85.0, 105.0))
        } else {
            None
        },
        toe_station_m,
        piezometers,
    }
}

// Properties on random sections: the exit point lies on the ground polyline (distance < 1e-9)
// and on the phreatic line; the line is below ground everywhere from the crest to the exit
// (or to the toe when there is none); the minimum cover is not beaten by any sampled station;
// stations of the phreatic line increase; dry and deeper tips never define it.
#[test]
fn property_exit_point_on_ground_and_first_breakout() {
    let mut rng = Rng::new(0x5EC7_1011);
    let mut exits = 0;
    for case in 0..4000 {
        let input = random_section(&mut rng);
        let r = analyse(&input).unwrap();
        assert!(r
            .phreatic
            .windows(2)
            .all(|w| w[1].station_m > w[0].station_m));
        for id in &r.used {
            let p = input.piezometers.iter().find(|p| &p.id == id).unwrap();
            assert!(p.head_m >= p.tip_elevation_m);
        }
        let rise = |s: f64| {
            elevation_at_m(&r.phreatic, s).unwrap() - elevation_at_m(&input.ground, s).unwrap()
        };
        let stop_m = match r.exit {
            Some(e) => {
                exits += 1;
                let d = distance_to_polyline(e, &input.ground);
                assert!(d < 1e-9, "case {case}: exit {e:?} is {d} m off the ground");
                if e.station_m > r.crest.station_m {
                    assert!(rise(e.station_m).abs() < 1e-8, "case {case}: {e:?}");
                }
                assert!(e.station_m >= r.crest.station_m && e.station_m <= r.toe.station_m);
                e.station_m
            }
            None => r.toe.station_m,
        };
        let (a, b) = (r.crest.station_m, r.toe.station_m);
        for k in 0..=200 {
            let s = a + (b - a) * k as f64 / 200.0;
            let cover = -rise(s);
            assert!(
                cover >= r.min_cover.cover_m - 1e-9,
                "case {case}: {s} {cover}"
            );
            if s < stop_m - 1e-6 {
                assert!(
                    cover > -1e-9,
                    "case {case}: above ground at {s} before exit"
                );
            }
        }
    }
    // The generator must exercise both outcomes.
    assert!(
        exits > 100 && exits < 3900,
        "{exits} exits in 4000 sections"
    );
}
