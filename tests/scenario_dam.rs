//! Pool rise and drawdown at the invented Tarn Hollow dam, twenty days hourly: the pool at
//! 214.0 m for a day, rising 0.06 m/h to 221.0 m, held two days, drawn down 0.05 m/h; the three
//! piezometers of section TH-S1 follow with lags of 12, 24 and 36 h (see `seepd::scenario`),
//! with faults injected at known hours. Asserted as the on-call engineer sees it.

#[path = "scenarios/mod.rs"]
mod scenarios;

use scenarios::*;

/// Expected (hours from the start):
///
/// | fault | instrument | hours | flagged | delay |
/// |---|---|---|---|---|
/// | spike +2.0 m | TH-PZ-3 | 160 | `spike` on 160, found at 161 | 1 reading |
/// | stuck raw value | TH-PZ-2 | 250–289 (same raw as 249) | `flatline` 272–289 | 24 identical raw values |
/// | dropout | TH-PZ-1 | 350–355 | no reading; section values from the last one (tolerance) then stale | — |
/// | thermistor at 85 °C | TH-PZ-1 | 400–403 | `thermistor` 400–403 | 0 |
///
/// Alerts on the exit elevation of TH-S1 (watch above 201.0 m, concern above 202.0 m, three
/// readings, 6 h keep-active): raised on the rise, escalated to concern near the crest of the
/// lagging toe piezometer, de-escalated and resolved on the drawdown; the spike (one reading)
/// neither raises nor escalates. The dropout of TH-PZ-1 leaves the section without a value
/// (its input stale) from hour 351: more than 3 h without one raises "safety value
/// unavailable" at 354, resolved at 356 when the piezometer is back.
///
/// | hour | rule | action | level |
/// |---|---|---|---|
/// | 117 | tarn-s1-exit | raise | watch |
/// | 118 | tarn-s1-exit | notify_escalation | watch |
/// | 173 | tarn-s1-exit | escalate | concern |
/// | 174 | tarn-s1-exit | notify_escalation | concern |
/// | 241 | tarn-s1-exit | de_escalate | watch |
/// | 304 | tarn-s1-exit | resolve | watch |
/// | 354 | tarn-s1-exit:unavailable | raise | watch |
/// | 355 | tarn-s1-exit:unavailable | notify_escalation | watch |
/// | 356 | tarn-s1-exit:unavailable | resolve | watch |
#[test]
fn pool_rise_and_drawdown_timeline() {
    let ex = example(|_, t| t);
    let s = seepd::scenario::dam_pool(START_MS);
    let tl = replay(&ex, &s);
    let mut expected: Vec<(String, u32, &str)> = vec![("TH-PZ-3".into(), 160, "spike")];
    expected.extend((272..290).map(|h| ("TH-PZ-2".to_string(), h, "flatline")));
    expected.extend((400..404).map(|h| ("TH-PZ-1".to_string(), h, "thermistor")));
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
    let unavailable: Vec<u32> = tl.unavailable("TH-S1").iter().map(|(_, h, _)| *h).collect();
    let mut hours = unavailable.clone();
    hours.dedup();
    println!("figures: TH-S1 without a value at hours {hours:?}");
    assert!(
        unavailable
            .iter()
            .all(|h| *h == 160 || (351..=356).contains(h)),
        "{unavailable:?}"
    );
    let alerts: Vec<(u32, String, String, String)> = tl
        .alerts()
        .into_iter()
        .filter(|a| a.1.starts_with("tarn") && a.2 != "remind")
        .collect();
    let got: Vec<(u32, &str, &str, &str)> = alerts
        .iter()
        .map(|a| (a.0, a.1.as_str(), a.2.as_str(), a.3.as_str()))
        .collect();
    assert_eq!(
        got,
        [
            (117, "tarn-s1-exit", "raise", "watch"),
            (118, "tarn-s1-exit", "notify_escalation", "watch"),
            (173, "tarn-s1-exit", "escalate", "concern"),
            (174, "tarn-s1-exit", "notify_escalation", "concern"),
            (241, "tarn-s1-exit", "de_escalate", "watch"),
            (304, "tarn-s1-exit", "resolve", "watch"),
            (354, "tarn-s1-exit:unavailable", "raise", "watch"),
            (
                355,
                "tarn-s1-exit:unavailable",
                "notify_escalation",
                "watch"
            ),
            (356, "tarn-s1-exit:unavailable", "resolve", "watch"),
        ]
    );
}
