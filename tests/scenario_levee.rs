//! Levee flood at the invented Ash Bend site, ten days hourly: the river flat at 94.0 m for
//! 30 h, rising 0.25 m/h to a 100.0 m crest held 12 h, receding 0.05 m/h; the toe heads follow
//! by blanket theory with a lag (see `seepd::scenario`). Asserted as the on-call engineer sees
//! it: which readings are flagged, which safety values go missing, which alerts rise and clear.

#[path = "scenarios/mod.rs"]
mod scenarios;

use scenarios::*;
use seepd::scenario::levee_flood_with;

/// Finding 1 of issue 10: a genuine flood, no faults. No reading may be flagged and no safety
/// value of the toe, the nested pairs or the blanket reach may lose its value.
#[test]
fn a_genuine_flood_flags_nothing_and_keeps_every_safety_value() {
    let ex = example(|_, t| t);
    let s = levee_flood_with(&ex.cfg, START_MS, Vec::new());
    let tl = replay(&ex, &s);
    let flagged = tl.flagged(&["spike", "flatline", "thermistor"]);
    assert!(flagged.is_empty(), "genuine readings flagged: {flagged:?}");
    for object in ["AB-TOE-1", "AB-TOE-2", "AB-N1", "AB-N2", "AB-R2"] {
        let missing = tl.unavailable(object);
        assert!(missing.is_empty(), "{object} lost values: {missing:?}");
    }
}

/// The same flood with the injected faults of `seepd::scenario::sites::levee_faults`: every
/// fault is flagged within its stated delay, no genuine reading is flagged, and safety values
/// go missing only where a rejected spike or the dropout makes them so.
///
/// Expected (hours from the start):
///
/// | fault | instrument | hours | flagged | delay |
/// |---|---|---|---|---|
/// | spike −2.0 m on the rise | AB-RIVER | 40 | `spike` on 40, found at 41 | 1 reading |
/// | spike +1.5 m at the crest | AB-PZ-1B | 62 | `spike` on 62, found at 63 | 1 reading |
/// | stuck raw value | AB-PZ-2A | 100–139 (same raw as 99) | `flatline` 122–139 | 24 identical raw values |
/// | thermistor at −99 °C | AB-PZ-1A | 150–155 | `thermistor` 150–155 | 0 |
/// | dropout | AB-PZ-1A | 200–209 | no-data alert (see the alert timeline) | 3 intervals |
#[test]
fn injected_faults_are_flagged_and_nothing_else() {
    let ex = example(|_, t| t);
    let s = seepd::scenario::levee_flood(&ex.cfg, START_MS);
    let tl = replay(&ex, &s);
    let mut expected: Vec<(String, u32, &str)> = vec![
        ("AB-RIVER".into(), 40, "spike"),
        ("AB-PZ-1B".into(), 62, "spike"),
    ];
    expected.extend((122..140).map(|h| ("AB-PZ-2A".to_string(), h, "flatline")));
    expected.extend((150..156).map(|h| ("AB-PZ-1A".to_string(), h, "thermistor")));
    let mut got: Vec<(String, u32, &str)> = Vec::new();
    for (id, h, flags) in tl.flagged(&["spike", "flatline", "thermistor"]) {
        for f in ["spike", "flatline", "thermistor"] {
            if flags.iter().any(|x| x == f) {
                got.push((id.clone(), h, f));
            }
        }
    }
    got.sort();
    expected.sort();
    assert_eq!(got, expected);
    // Each spike was found by the reading after it (a `flag` record at the spike's time).
    let flag_records = tl.records.iter().filter(|r| r["type"] == "flag").count();
    assert_eq!(flag_records, 2);
    // The thermistor failure does not upset the head: the thermal correction is skipped.
    // Safety values without a value: only at the rejected spikes and in the dropout.
    let toe = tl.unavailable("AB-TOE-1");
    let hours: Vec<u32> = toe.iter().map(|(_, h, _)| *h).collect();
    assert!(hours.iter().all(|h| *h == 62), "{toe:?}");
    assert!(toe
        .iter()
        .any(|(q, _, r)| q == "factor_of_safety" && r.contains("rejected: spike")));
    let n1: Vec<u32> = tl.unavailable("AB-N1").iter().map(|(_, h, _)| *h).collect();
    assert!(
        n1.iter().all(|h| *h == 62 || (200..=210).contains(h)),
        "{n1:?}"
    );
    let r2: Vec<u32> = tl.unavailable("AB-R2").iter().map(|(_, h, _)| *h).collect();
    assert!(r2.iter().all(|h| *h == 40 || *h == 62), "{r2:?}");
    for object in ["AB-TOE-2", "AB-N2"] {
        assert!(
            tl.unavailable(object).is_empty(),
            "{object}: {:?}",
            tl.unavailable(object)
        );
    }
}
