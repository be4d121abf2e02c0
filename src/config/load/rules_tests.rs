//! Alerting configuration: the example's rules load as written; each check on `[[rule]]`,
//! `[[contacts]]` and `[smtp]` gives a located problem.

use std::path::Path;

use crate::domain::rules::{Check, Direction};

use super::*;

const SITE: &str = "[site]\nid = \"s\"\n[[instrument]]\nid = \"G1\"\nkind = \"stage_gauge\"\n\
installed = \"2025-01-01\"\ninterval_s = 600\nrange = [0.0, 10.0]\n\
[instrument.stage_gauge]\nwater_body = \"river\"\nmode = \"elevation\"\nunit = \"m\"\n";

const RULE: &str = "[[rule]]\nid = \"r1\"\nobject = \"G1\"\nquantity = \"total_head\"\n\
response = \"do something\"\n\
[[rule.level]]\nname = \"watch\"\nabove = 5.0\n\
[[rule.level]]\nname = \"concern\"\nabove = 6.0\n\
[[rule.level]]\nname = \"act\"\nabove = 7.0\n";

fn no_env(_: &str) -> Option<String> {
    None
}

fn load(service: &str, site: &str) -> Result<Config, Vec<(usize, String)>> {
    let dir = tempfile::tempdir().expect("tempdir");
    let write = |name: &str, text: &str| std::fs::write(dir.path().join(name), text);
    // Every service file needs a subscription; it goes last so that line numbers stay.
    let service =
        format!("{service}\n[[subscription]]\npattern = \"t/{{logger}}\"\nformat = \"json\"\n");
    write("seepd.toml", &service).expect("write");
    write("s.toml", site).expect("write");
    load_dir_with(dir.path(), &no_env)
        .map_err(|Problems(ps)| ps.into_iter().map(|p| (p.line, p.message)).collect())
}

fn problems(service: &str, site: &str) -> Vec<(usize, String)> {
    load(service, site).err().unwrap_or_default()
}

#[test]
fn example_configuration_has_its_rules_contacts_and_no_relay() {
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    let cfg = load_dir_with(&dir, &no_env).expect("example config loads");
    let a = &cfg.alerting;
    assert!(a.smtp.is_none());
    // Four rules, and a "safety value unavailable" watch for each of the two on derived
    // objects (toe factor of safety, section exit elevation).
    assert_eq!(a.rules.len(), 6);
    let watch = a
        .rules
        .iter()
        .find(|r| r.id == "ash-bend-toe-fs:unavailable")
        .expect("unavailable watch");
    assert_eq!(watch.spec.check, Check::Unavailable);
    assert_eq!(watch.spec.levels[0].name, "watch");
    assert_eq!(watch.spec.levels[0].bound, 3.0 * 3600.0);
    let toe = a
        .rules
        .iter()
        .find(|r| r.id == "ash-bend-toe-fs")
        .expect("toe rule");
    let names: Vec<&str> = toe.spec.levels.iter().map(|l| l.name.as_str()).collect();
    assert_eq!(names, ["watch", "concern", "act"]);
    assert!(toe
        .spec
        .levels
        .iter()
        .all(|l| l.direction == Direction::Below));
    assert_eq!(toe.spec.levels[2].bound, 1.3);
    assert_eq!(toe.spec.levels[0].keep_active_ms, 3_600_000);
    let silent = a
        .rules
        .iter()
        .find(|r| r.id == "ash-bend-pz1a-silent")
        .expect("no-data");
    assert_eq!(silent.spec.check, Check::NoData);
    // 3 × interval_s 3600 s.
    assert_eq!(silent.spec.levels[0].bound, 10_800.0);
    let site = a.site("ash-bend");
    assert_eq!(site.policy.bundle_window_ms, 30_000);
    assert_eq!(
        site.recipients("concern", true, true),
        [
            "district-engineer@example.invalid",
            "levee-oncall@example.invalid"
        ]
    );
    assert_eq!(
        site.recipients("watch", true, true),
        ["levee-oncall@example.invalid"]
    );
}

#[test]
fn a_valid_rule_loads_with_level_defaults() {
    let cfg = load("", &format!("{SITE}{RULE}")).expect("valid");
    let r = &cfg.alerting.rules[0];
    assert_eq!(r.spec.levels.len(), 3);
    assert_eq!(r.spec.levels[1].persist_readings, 1);
    assert_eq!(r.spec.levels[1].response, "do something");
}

#[test]
fn levels_out_of_order_are_a_problem_on_the_level() {
    let site = format!("{SITE}{}", RULE.replace("above = 6.0", "above = 4.0"));
    let p = problems("", &site);
    assert_eq!(p.len(), 1, "{p:?}");
    assert!(p[0].1.contains("not beyond the level before"), "{p:?}");
}

#[test]
fn mixed_directions_and_two_bounds_are_problems() {
    let site = format!("{SITE}{}", RULE.replace("above = 6.0", "below = 6.0"));
    assert!(problems("", &site)[0].1.contains("one direction per rule"));
    let site = format!(
        "{SITE}{}",
        RULE.replace("above = 6.0", "above = 6.0\nbelow = 1.0")
    );
    assert!(problems("", &site)[0]
        .1
        .contains("both \"above\" and \"below\""));
}

#[test]
fn instrument_rules_need_a_reading_quantity_and_no_data_an_instrument() {
    let site = format!("{SITE}{}", RULE.replace("total_head", "exit_gradient"));
    let p = problems("", &site);
    assert!(p[0].1.contains("not a quantity of an instrument"), "{p:?}");
    // Rates, completeness and the health-flag count are instrument quantities too.
    for q in ["rate_24h", "rate_7d", "completeness_24h", "health_flags"] {
        let site = format!("{SITE}{}", RULE.replace("total_head", q));
        assert!(load("", &site).is_ok(), "{q}: {:?}", problems("", &site));
    }
    let nd = "[[rule]]\nid = \"n\"\nkind = \"no_data\"\nobject = \"X9\"\nfactor = 3\n\
              level = \"watch\"\nresponse = \"check the logger\"\n";
    let p = problems("", &format!("{SITE}{nd}"));
    assert!(p[0].1.contains("is not an instrument"), "{p:?}");
}

#[test]
fn duplicate_rule_ids_and_bad_addresses_are_problems() {
    let p = problems("", &format!("{SITE}{RULE}{RULE}"));
    assert!(
        p.iter()
            .any(|(_, m)| m.contains("rule id \"r1\" is already used")),
        "{p:?}"
    );
    let contacts = "[[contacts]]\nname = \"x\"\nemails = [\"Bob <bob@example.invalid>\"]\n";
    let p = problems("", &format!("{SITE}{contacts}"));
    assert!(p[0].1.contains("not a plain address"), "{p:?}");
}

#[test]
fn plain_smtp_is_refused_off_loopback_and_starttls_is_the_default() {
    let remote = "[smtp]\nhost = \"mail.example.invalid\"\nsecurity = \"plain\"\nfrom = \"s@example.invalid\"\n";
    let p = problems(remote, SITE);
    assert_eq!(p.len(), 1, "{p:?}");
    assert_eq!(p[0].0, 3);
    assert!(p[0].1.contains("not on loopback"), "{p:?}");
    let ok = "[smtp]\nhost = \"mail.example.invalid\"\nfrom = \"s@example.invalid\"\n";
    let smtp = load(ok, SITE).expect("valid").alerting.smtp.expect("smtp");
    assert_eq!(
        (smtp.security, smtp.port),
        (crate::config::SmtpSecurity::Starttls, 587)
    );
    let local = "[smtp]\nhost = \"127.0.0.1\"\nport = 2525\nsecurity = \"plain\"\nfrom = \"s@example.invalid\"\n";
    assert!(load(local, SITE).is_ok());
}
