//! Reload with SIGHUP against the real binary and a real Mosquitto: a configuration with a
//! problem is refused with the problem at file:line:column while the old one keeps running; a
//! clean one is taken (a changed threshold applies at once), and an alert active before the
//! reload stays active — not raised again — when its rule id still exists.

mod common;

use std::process::Command;
use std::time::Duration;

use common::*;

fn hup(d: &Daemon) {
    Command::new("kill")
        .arg("-HUP")
        .arg(d.child.id().to_string())
        .status()
        .unwrap();
}

fn log_has(d: &Daemon, what: &str, times: usize) -> bool {
    wait_for(Duration::from_secs(20), || {
        let text = std::fs::read_to_string(&d.log).unwrap_or_default();
        (text.matches(what).count() >= times).then_some(())
    })
    .is_some()
}

#[test]
fn sighup_reloads_a_clean_config_and_refuses_a_broken_one() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let site = cfg.join("levee-ash-bend.toml");
    let original = std::fs::read_to_string(&site).unwrap();
    let mut d = Daemon::start(&cfg, &dir.path().join("seepd.log"));
    d.wait_connected(1);
    let p = Publisher::connect(broker.port, "reload-pub");
    let t0 = chrono::Utc::now().timestamp() - 3 * 3600;
    // River at 95.3 m twice: the watch level (95.0 m, two readings) is raised.
    p.send("demo/AB-LOG1/json", river_json(t0, 5.3));
    p.send("demo/AB-LOG1/json", river_json(t0 + 3600, 5.3));
    p.wait_acked(2, Duration::from_secs(20));
    wait_for(Duration::from_secs(20), || {
        (count(dir.path(), "alerts", "rule = 'ash-bend-river-stage'") == 1).then_some(())
    })
    .expect("watch raised");

    // A broken edit: refused, every problem logged at file:line:column, still running.
    std::fs::write(&site, original.replace("above = 96.5", "above = \"high\"")).unwrap();
    hup(&d);
    assert!(
        log_has(&d, "Reload refused", 1),
        "{}",
        std::fs::read_to_string(&d.log).unwrap()
    );
    let text = std::fs::read_to_string(&d.log).unwrap();
    assert!(text.contains("levee-ash-bend.toml:"), "{text}");
    assert!(d.child.try_wait().unwrap().is_none(), "still running");

    // A clean edit: concern lowered from 96.5 m to 95.2 m. Taken; the watch alert carries over
    // (no second raise) and the next two readings at 95.3 m escalate it under the new bound.
    std::fs::write(&site, original.replace("above = 96.5", "above = 95.2")).unwrap();
    hup(&d);
    assert!(
        log_has(&d, "Configuration reloaded", 1),
        "{}",
        std::fs::read_to_string(&d.log).unwrap()
    );
    p.send("demo/AB-LOG1/json", river_json(t0 + 7200, 5.3));
    p.send("demo/AB-LOG1/json", river_json(t0 + 10800, 5.3));
    p.wait_acked(4, Duration::from_secs(20));
    wait_for(Duration::from_secs(20), || {
        (count(
            dir.path(),
            "alert_events",
            "kind = 'escalated' AND level = 'concern'",
        ) == 1)
            .then_some(())
    })
    .unwrap_or_else(|| panic!("{}", std::fs::read_to_string(&d.log).unwrap()));
    assert_eq!(
        count(dir.path(), "alerts", "rule = 'ash-bend-river-stage'"),
        1
    );
    assert_eq!(
        count(
            dir.path(),
            "alert_events",
            "kind = 'raised' AND rule = 'ash-bend-river-stage'"
        ),
        1
    );
    let (code, _) = d.terminate();
    assert_eq!(code, Some(0));
}
