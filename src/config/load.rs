//! Loading a configuration directory: find the files, parse each one keeping spans, read the
//! service and site files, run the checks that span files, and build the validated `Config` —
//! or return every problem found, located.
//!
//! Owns the directory layout (`seepd.toml` plus one `*.toml` per site, in file-name order), the
//! cross-file checks (unique ids of instruments and objects, barometer references, logger
//! channels, object references through `objects::resolve`) and the `seepd check` summary.
//! Per-table keys and checks live in `service`, `site`, `kinds` and `objects`.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

use toml_edit::ImDocument;

use super::alerting::Alerting;
use super::model::{Config, Objects, Trends};
use super::objects::{self, Known};
use super::problem::{again, whole_file, Cx, FirstSeen, LineIndex};
use super::reader::Tbl;
use super::reports;
use super::rules;
use super::section_model;
use super::service::{self, Env, ServiceFile};
use super::site::{self, Pos, SiteFile};
use super::trends::Model;

pub use super::problem::{Problem, Problems};

/// Name of the service file inside the configuration directory.
pub const SERVICE_FILE: &str = "seepd.toml";

/// Load and validate the configuration directory `dir`.
///
/// # Errors
///
/// Every problem found in every file (syntax, unknown keys, wrong types, missing keys, bad
/// values, cross-file inconsistencies), each with file, line and column.
pub fn load_dir(dir: &Path) -> Result<Config, Problems> {
    load_dir_with(dir, &|name| std::env::var(name).ok())
}

/// `load_dir` with the environment lookup passed in (tests use their own map).
///
/// # Errors
///
/// As `load_dir`.
pub(crate) fn load_dir_with(dir: &Path, env: Env<'_>) -> Result<Config, Problems> {
    let abs = match dir.canonicalize() {
        Ok(abs) if abs.is_dir() => abs,
        Ok(_) => {
            return Err(one(
                dir,
                "is not a directory; expected the configuration directory",
            ))
        }
        Err(e) => {
            return Err(one(
                dir,
                format!("cannot open the configuration directory: {e}"),
            ))
        }
    };
    let mut problems = Vec::new();
    let mut site_paths = match site_files(dir, &mut problems) {
        Ok(paths) => paths,
        Err(e) => {
            return Err(one(
                dir,
                format!("cannot list the configuration directory: {e}"),
            ))
        }
    };
    site_paths.sort();

    let service_path = dir.join(SERVICE_FILE);
    let service = match not_a_file(&service_path) {
        None => with_document(&service_path, &mut problems, |cx, root| {
            service::read(cx, root, &abs, env)
        }),
        Some(why) => {
            problems.push(whole_file(
                &service_path,
                format!(
                    "service file {SERVICE_FILE} {why}; expected it in the configuration directory"
                ),
            ));
            None
        }
    };
    let sites: Vec<(PathBuf, SiteFile)> = site_paths
        .iter()
        .filter_map(|p| {
            let sf = with_document(p, &mut problems, |cx, root| site::read(cx, root, p))?;
            Some((p.clone(), sf))
        })
        .collect();
    let (objects, trends) = cross_checks(&sites, &mut problems);
    section_model::check_tips(&objects.sections, |id| tip_of(&sites, id), &mut problems);
    {
        let instruments: BTreeSet<String> = sites
            .iter()
            .flat_map(|(_, sf)| sf.entries.iter().filter_map(|e| e.id.as_ref()))
            .map(|(id, _)| id.clone())
            .collect();
        let files: Vec<_> = sites
            .iter()
            .map(|(p, sf)| (p.clone(), &sf.alerting))
            .collect();
        let object_ids: BTreeSet<String> = objects
            .all()
            .map(|(_, id, _)| id.to_string())
            .chain(trends.stage_responses.iter().map(|m| m.id.clone()))
            .chain(trends.hst.iter().map(|m| m.id.clone()))
            .collect();
        rules::cross_check(&files, &instruments, &object_ids, &mut problems);
        let report_files: Vec<_> = sites
            .iter()
            .map(|(p, sf)| reports::SiteReports {
                file: p,
                entries: &sf.reports,
                contact_lists: sf
                    .alerting
                    .alerting
                    .contacts
                    .iter()
                    .map(|c| c.name.clone())
                    .collect(),
            })
            .collect();
        reports::cross_check(&report_files, &mut problems);
    }

    if !problems.is_empty() {
        let order = |p: &Problem| {
            site_paths
                .iter()
                .position(|s| *s == p.file)
                .map_or(0, |i| i + 1)
        };
        problems.sort_by_key(|p| (order(p), p.line, p.column));
        return Err(Problems(problems));
    }
    let Some(ServiceFile {
        service: Some(service),
        mqtt: Some(mqtt),
        subscriptions,
        smtp,
        export,
        http,
        heartbeat,
    }) = service
    else {
        return Err(one(&service_path, "service file could not be read"));
    };
    let mut cfg = Config {
        dir: abs,
        service,
        mqtt,
        subscriptions,
        sites: Vec::new(),
        instruments: BTreeMap::new(),
        objects,
        alerting: Alerting {
            smtp,
            ..Alerting::default()
        },
        export,
        trends,
        reports: Vec::new(),
        http,
        heartbeat,
    };
    let mut alerting = Vec::new();
    for (_, sf) in sites {
        cfg.sites.extend(sf.site);
        for i in sf.entries.into_iter().filter_map(|e| e.instrument) {
            cfg.instruments.insert(i.id.clone(), i);
        }
        alerting.push((sf.id.map(|(id, _)| id).unwrap_or_default(), sf.alerting));
        let schedules = reports::finish(&cfg.dir, sf.reports);
        cfg.reports.extend(schedules);
    }
    for (site, sr) in alerting {
        rules::finish(&mut cfg, &site, sr);
    }
    Ok(cfg)
}

/// A piezometer's (station, tip elevation), m, from the site files.
fn tip_of(sites: &[(PathBuf, SiteFile)], id: &str) -> Option<(f64, f64)> {
    let i = sites
        .iter()
        .flat_map(|(_, sf)| sf.entries.iter().filter_map(|e| e.instrument.as_ref()))
        .find(|i| i.id == id)?;
    Some((i.location.station_m?, i.tip_elevation_m?))
}

fn one(file: &Path, message: impl Into<String>) -> Problems {
    Problems(vec![whole_file(file, message)])
}

/// Every `*.toml` in `dir` except the service file (unsorted). A `*.toml` that is not a
/// readable regular file (a directory, a dangling symbolic link, a socket...) is a problem:
/// skipping it would make a site vanish from the configuration without a word.
fn site_files(dir: &Path, problems: &mut Vec<Problem>) -> std::io::Result<Vec<PathBuf>> {
    let mut out = Vec::new();
    for entry in std::fs::read_dir(dir)? {
        let path = entry?.path();
        let is_toml = path.extension().is_some_and(|e| e == "toml");
        let is_service = path.file_name().is_some_and(|n| n == SERVICE_FILE);
        if !is_toml || is_service {
            continue;
        }
        match not_a_file(&path) {
            None => out.push(path),
            Some(why) => problems.push(whole_file(
                &path,
                format!(
                    "{why}; expected a site file (every *.toml beside seepd.toml is one): \
                     fix it, or rename it so that it does not end in .toml"
                ),
            )),
        }
    }
    Ok(out)
}

/// Why `path` is not a regular file that can be read (following symbolic links), if it is not.
fn not_a_file(path: &Path) -> Option<String> {
    match std::fs::metadata(path) {
        Ok(m) if m.is_file() => None,
        Ok(m) if m.is_dir() => Some("is a directory".into()),
        Ok(_) => Some("is not a regular file".into()),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            if std::fs::symlink_metadata(path).is_ok() {
                Some("is a symbolic link to nothing (its target does not exist)".into())
            } else {
                Some("is missing".into())
            }
        }
        Err(e) => Some(format!("cannot be read: {e}")),
    }
}

/// Read and parse one file, then hand its root table to `read`. A file that cannot be read or
/// parsed gives one problem (syntax errors located) and `None`.
fn with_document<T>(
    path: &Path,
    problems: &mut Vec<Problem>,
    read: impl FnOnce(&mut Cx<'_>, &Tbl<'_>) -> T,
) -> Option<T> {
    let text = match std::fs::read_to_string(path) {
        Ok(text) => text,
        Err(e) => {
            problems.push(whole_file(path, format!("cannot read file: {e}")));
            return None;
        }
    };
    let lines = LineIndex::new(&text);
    let mut cx = Cx {
        file: path,
        text: &text,
        lines: &lines,
        problems,
    };
    let doc = match ImDocument::parse(text.as_str()) {
        Ok(doc) => doc,
        Err(e) => {
            let message = e.message().trim().replace('\n', "; ");
            cx.at(e.span(), format!("TOML syntax error: {message}"));
            return None;
        }
    };
    let name = path
        .file_name()
        .map_or_else(String::new, |n| n.to_string_lossy().into_owned());
    let root = Tbl::new(&mut cx, doc.as_item(), name, "the top level")?;
    Some(read(&mut cx, &root))
}

/// `file:line` for naming an earlier occurrence in a message.
fn at(file: &Path, pos: Pos) -> String {
    format!("{}:{}", file.display(), pos.0)
}

/// Checks across all site files: unique site ids, unique instrument and object ids, barometer
/// references to barometers, unique (logger, channel) pairs, object references. Returns the
/// objects that passed (all of them when there are no problems at all).
fn cross_checks(sites: &[(PathBuf, SiteFile)], problems: &mut Vec<Problem>) -> (Objects, Trends) {
    let mut site_ids = FirstSeen::new();
    for (file, sf) in sites {
        let Some((id, pos)) = &sf.id else { continue };
        if let Some((at, ())) = again(&mut site_ids, id, (file, *pos), ()) {
            let msg = format!(
                "site id {id:?} is already used at {at}; expected each site file to have its own id"
            );
            problems.push(Problem::at(file, *pos, msg));
        }
    }

    // First occurrence of each instrument id (with its kind) and of each logger channel.
    let mut ids = FirstSeen::new();
    let mut channels = FirstSeen::new();
    for (file, sf) in sites {
        for e in &sf.entries {
            let Some((id, pos)) = &e.id else { continue };
            if let Some((at, _)) = again(&mut ids, id.as_str(), (file, *pos), e.kind) {
                let msg = format!(
                    "instrument id {id:?} is already used at {at}; expected ids unique across all sites"
                );
                problems.push(Problem::at(file, *pos, msg));
            }
            if let Some((logger, channel, cpos)) = &e.logger_channel {
                let key = (logger.as_str(), channel.as_str());
                if let Some((at, other)) = again(&mut channels, key, (file, *cpos), id) {
                    let msg = format!(
                        "instrument {id:?}: logger {logger:?} channel {channel:?} is already \
                         mapped to instrument {other:?} at {at}; expected each logger channel once"
                    );
                    problems.push(Problem::at(file, *cpos, msg));
                }
            }
        }
    }

    for (file, sf) in sites {
        for e in &sf.entries {
            let (Some((id, _)), Some((baro, pos))) = (&e.id, &e.barometer) else {
                continue;
            };
            let msg = match ids.get(&baro.as_str()) {
                None => format!(
                    "instrument {id:?}: barometer {baro:?} is not an instrument in any site file; \
                     expected the id of a kind = \"barometer\" instrument"
                ),
                Some((at, Some(kind))) if *kind != "barometer" => format!(
                    "instrument {id:?}: barometer {baro:?} is a {kind} (at {at}); expected an \
                     instrument of kind \"barometer\""
                ),
                Some(_) => continue,
            };
            problems.push(Problem::at(file, *pos, msg));
        }
    }
    object_checks(sites, problems)
}

/// The site id of a site file ("" when unreadable).
fn site_of(sf: &SiteFile) -> &str {
    sf.id.as_ref().map_or("", |(s, _)| s.as_str())
}

/// Object and model ids unique among all instruments, objects and models; object and model
/// references settled.
fn object_checks(sites: &[(PathBuf, SiteFile)], problems: &mut Vec<Problem>) -> (Objects, Trends) {
    let mut known: BTreeMap<&str, Known<'_>> = BTreeMap::new();
    for (file, sf) in sites {
        for e in &sf.entries {
            let Some((id, pos)) = &e.id else { continue };
            known.entry(id).or_insert_with(|| Known {
                at: at(file, *pos),
                site: site_of(sf),
                kind: e.kind,
                object: false,
                has_tip: e.has_tip,
                has_station: e.has_station,
                interval_s: e.instrument.as_ref().map(|i| i.interval_s),
            });
        }
    }
    for (file, sf) in sites {
        let models = sf.trends.models.iter().map(|m| (m.table, &m.id));
        for (table, id) in sf.objects.iter().map(|o| (o.table, &o.id)).chain(models) {
            let Some((id, pos)) = id else { continue };
            if let Some(k) = known.get(id.as_str()) {
                let by = if k.object {
                    format!("a [[{}]]", k.kind.unwrap_or_default())
                } else {
                    "an instrument".into()
                };
                let msg = format!(
                    "{} id {id:?} is already used by {by} at {}; expected ids unique across all \
                     instruments and objects of all sites",
                    table, k.at
                );
                problems.push(Problem::at(file, *pos, msg));
                continue;
            }
            known.insert(
                id,
                Known {
                    at: at(file, *pos),
                    site: site_of(sf),
                    kind: Some(table),
                    object: true,
                    has_tip: false,
                    has_station: false,
                    interval_s: None,
                },
            );
        }
    }
    let mut out = Objects::default();
    for (file, sf) in sites {
        for o in &sf.objects {
            let (found, object) = objects::resolve(o, site_of(sf), &known);
            problems.extend(found.into_iter().map(|(pos, m)| Problem::at(file, pos, m)));
            if let Some(object) = object {
                out.push(object);
            }
        }
    }
    let mut trends = Trends::default();
    for (file, sf) in sites {
        trends.sites.extend(sf.trends.settings.clone());
        for m in &sf.trends.models {
            let (found, model) = objects::resolve(m, site_of(sf), &known);
            problems.extend(found.into_iter().map(|(pos, m)| Problem::at(file, pos, m)));
            match model {
                Some(Model::StageResponse(r)) => trends.stage_responses.push(r),
                Some(Model::Hst(h)) => trends.hst.push(h),
                None => {}
            }
        }
    }
    (out, trends)
}

#[cfg(test)]
mod tests;

#[cfg(test)]
mod check_tests;

#[cfg(test)]
mod test_dir;

#[cfg(test)]
mod object_tests;

#[cfg(test)]
mod object_check_tests;

#[cfg(test)]
mod rules_tests;

#[cfg(test)]
mod export_tests;

#[cfg(test)]
mod report_tests;

#[cfg(test)]
mod renamed_tests;

#[cfg(test)]
mod hardening_tests;

#[cfg(test)]
mod props_tests;

#[cfg(test)]
mod section_model_tests;
