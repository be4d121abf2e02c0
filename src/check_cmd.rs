//! `seepd check`: a configuration that loads, summed up for the person who wrote it — the
//! broker, database, export, sites with their instruments per kind and objects per table, the
//! topic filters subscribed. (The problems of one that does not load are `config`'s.)
//!
//! Owns that summary's wording.

use std::collections::BTreeMap;
use std::fmt::Write as _;

use crate::config::{Config, Objects};
use crate::objkind::ObjectKind;

/// Human summary for `seepd check`: sites, instruments per site and kind, objects per site and
/// table (with their ids), topic filters subscribed, database path.
pub fn summary(cfg: &Config) -> String {
    let mut s = String::new();
    let m = &cfg.mqtt;
    let _ = writeln!(s, "Configuration: {}", cfg.dir.display());
    let _ = writeln!(s, "Database: {}", cfg.service.database.display());
    let _ = writeln!(
        s,
        "MQTT broker: {}:{} as client {:?}, TLS {}, {} session",
        m.host,
        m.port,
        m.client_id,
        if m.tls.is_some() { "on" } else { "off" },
        if m.persistent_session {
            "persistent"
        } else {
            "clean"
        }
    );
    let _ = match &cfg.alerting.smtp {
        Some(m) => writeln!(
            s,
            "Mail relay: {}:{} ({:?}) from {}",
            m.host, m.port, m.security, m.from
        ),
        None => writeln!(s, "Mail relay: none (alert messages stay in the outbox)"),
    };
    let _ = writeln!(s, "Alert rules: {}", cfg.alerting.rules.len());
    if let Some(e) = &cfg.export {
        let _ = writeln!(
            s,
            "Export: InfluxDB v2 at {} (org {:?}, bucket {:?}){}",
            e.url,
            e.org,
            e.bucket,
            if e.enabled { "" } else { ", disabled" }
        );
    }
    let _ = writeln!(s, "Subscriptions ({}):", cfg.subscriptions.len());
    for sub in &cfg.subscriptions {
        let format = sub.format.name();
        let _ = writeln!(
            s,
            "  {}  ({format}, qos {}, from pattern {})",
            sub.filter, sub.qos, sub.pattern
        );
    }
    let _ = writeln!(
        s,
        "Sites ({}), instruments ({}):",
        cfg.sites.len(),
        cfg.instruments.len()
    );
    for site in &cfg.sites {
        let mut kinds: BTreeMap<&str, usize> = BTreeMap::new();
        for i in cfg.instruments.values().filter(|i| i.site == site.id) {
            *kinds.entry(i.kind.name()).or_default() += 1;
        }
        let file = site
            .file
            .file_name()
            .map_or_else(String::new, |n| n.to_string_lossy().into_owned());
        let objects = site_objects(&cfg.objects, &site.id);
        let _ = writeln!(
            s,
            "  {}: {:?}, file {}, {} instruments, {} objects",
            site.id,
            site.name,
            file,
            kinds.values().sum::<usize>(),
            objects.iter().map(|(_, ids)| ids.len()).sum::<usize>()
        );
        for (kind, n) in kinds {
            let _ = writeln!(s, "    {kind}: {n}");
        }
        for (table, ids) in objects.iter().filter(|(_, ids)| !ids.is_empty()) {
            let _ = writeln!(s, "    [[{table}]] {}: {}", ids.len(), ids.join(", "));
        }
        let t = &cfg.trends;
        let models = [
            (
                "stage_response",
                t.stage_responses
                    .iter()
                    .filter(|r| r.site == site.id)
                    .map(|r| r.id.as_str())
                    .collect::<Vec<_>>(),
            ),
            (
                "hst",
                t.hst
                    .iter()
                    .filter(|h| h.site == site.id)
                    .map(|h| h.id.as_str())
                    .collect(),
            ),
        ];
        for (table, ids) in models.iter().filter(|(_, ids)| !ids.is_empty()) {
            let _ = writeln!(s, "    [[{table}]] {}: {}", ids.len(), ids.join(", "));
        }
    }
    s
}

/// A site's object ids per table name, in the order the tables are read.
fn site_objects<'a>(o: &'a Objects, site: &str) -> Vec<(&'static str, Vec<&'a str>)> {
    ObjectKind::ALL
        .into_iter()
        .map(|k| {
            let ids = o.of(k).into_iter().filter(|(_, s)| *s == site);
            (k.table(), ids.map(|(id, _)| id).collect())
        })
        .collect()
}
