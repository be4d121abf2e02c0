//! 1,200 random edits of the example configuration (lines deleted, doubled, swapped or cut,
//! numbers made extreme, strings emptied or made strange, keys misspelt, brackets broken,
//! files emptied or removed, bytes that are not UTF-8): the loader never panics, and either
//! loads (then the engine and the rules build from it) or lists problems, each with a file,
//! a line and a column inside that file. A few mutants also go through `seepd check`, which
//! must exit 0 or 78 with `file:line:column: message` lines.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::time::Instant;

use crate::support::*;

const IN_PROCESS: usize = 1_200;
const THROUGH_BINARY: usize = 6;

const FILES: [&str; 3] = ["seepd.toml", "levee-ash-bend.toml", "dam-tarn.toml"];

const NUMBERS: [&str; 14] = [
    "0",
    "-1",
    "1e308",
    "-1e308",
    "nan",
    "inf",
    "-inf",
    "9223372036854775807",
    "-9223372036854775808",
    "0.000001",
    "99999999999",
    "1.5",
    "\"12\"",
    "[]",
];

const STRINGS: [&str; 8] = [
    "\"\"",
    "\"💧 levée\"",
    "\"a\\u0000b\"",
    "\"../../../../etc/passwd\"",
    "\"{logger}/{logger}\"",
    "\"#\"",
    "42",
    "true",
];

/// The example files' texts.
fn originals() -> Vec<(&'static str, String)> {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("config");
    FILES
        .iter()
        .map(|f| (*f, std::fs::read_to_string(src.join(f)).unwrap()))
        .collect()
}

/// One random edit of one file's text; `None` removes the file.
fn mutate(rng: &mut Rng, text: &str) -> Option<Vec<u8>> {
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    if lines.is_empty() {
        lines.push(String::new());
    }
    let n = lines.len() as u64;
    let at = rng.below(n) as usize;
    match rng.below(16) {
        0 => {
            lines.remove(at);
        }
        1 => lines.insert(at, lines[at].clone()),
        2 => {
            let other = rng.below(n) as usize;
            lines.swap(at, other);
        }
        3 | 4 => {
            // A number made extreme.
            if let Some(l) = lines
                .iter_mut()
                .skip(at)
                .find(|l| l.contains(" = ") && l.trim_end().ends_with(|c: char| c.is_ascii_digit()))
            {
                let key = l.split(" = ").next().unwrap_or("").to_string();
                *l = format!("{key} = {}", rng.pick(&NUMBERS));
            }
        }
        5 => {
            if let Some(l) = lines.iter_mut().skip(at).find(|l| l.contains(" = \"")) {
                let key = l.split(" = ").next().unwrap_or("").to_string();
                *l = format!("{key} = {}", rng.pick(&STRINGS));
            }
        }
        6 => {
            // Cut the file short at a random character.
            let chars: Vec<char> = text.chars().collect();
            let cut = rng.below(chars.len() as u64 + 1) as usize;
            return Some(chars[..cut].iter().collect::<String>().into_bytes());
        }
        7 => {
            let junk = [
                "=",
                "[",
                "]]",
                "\"",
                "{",
                "}",
                "'",
                "\\",
                "[[instrument]]",
                "x.y.z = 1",
            ];
            let l = &mut lines[at];
            let pos = rng.below(l.chars().count() as u64 + 1) as usize;
            let byte = l.char_indices().nth(pos).map_or(l.len(), |(b, _)| b);
            let piece = *rng.pick(&junk);
            l.insert_str(byte, piece);
        }
        8 => {
            // A misspelt key.
            if let Some(l) = lines.iter_mut().skip(at).find(|l| l.contains(" = ")) {
                if let Some(i) = l.find(" = ").filter(|i| *i > 1) {
                    l.remove(i - 1);
                }
            }
        }
        9 => lines[at] = lines[at].replacen(" = ", " : ", 1),
        10 => lines[at] = lines[at].replace("[[", "[").replace("]]", "]"),
        11 => {
            // A whole table doubled.
            if let Some(start) = (0..lines.len())
                .skip(at)
                .find(|&i| lines[i].starts_with('['))
            {
                let end = (start + 1..lines.len())
                    .find(|&i| lines[i].starts_with('['))
                    .unwrap_or(lines.len());
                let block: Vec<String> = lines[start..end].to_vec();
                lines.splice(end..end, block);
            }
        }
        12 => return Some(Vec::new()),
        13 => return None,
        14 => {
            let mut bytes = text.as_bytes().to_vec();
            let pos = rng.below(bytes.len() as u64 + 1) as usize;
            bytes.splice(pos..pos, [0xff, 0xfe, 0x00]);
            return Some(bytes);
        }
        _ => lines[at] = format!("# {}", lines[at]),
    }
    Some((lines.join("\n") + "\n").into_bytes())
}

/// Write the originals into `dir` with 1–3 random edits; returns a description of the edits.
fn mutant(rng: &mut Rng, dir: &Path, originals: &[(&str, String)]) -> String {
    let mut texts: Vec<(&str, Option<Vec<u8>>)> = originals
        .iter()
        .map(|(f, t)| (*f, Some(t.clone().into_bytes())))
        .collect();
    let edits = 1 + rng.below(3);
    let mut what = Vec::new();
    for _ in 0..edits {
        let k = rng.below(texts.len() as u64) as usize;
        let current = texts[k]
            .1
            .as_ref()
            .map(|b| String::from_utf8_lossy(b).into_owned());
        if let Some(text) = current {
            texts[k].1 = mutate(rng, &text);
            what.push(texts[k].0);
        }
    }
    for (f, bytes) in &texts {
        let p = dir.join(f);
        let _ = std::fs::remove_file(&p);
        if let Some(b) = bytes {
            std::fs::write(&p, b).unwrap();
        }
    }
    what.join(", ")
}

/// Check one load: a configuration that works, or problems located inside their files.
fn judge(dir: &Path) -> Result<bool, String> {
    let loaded = std::panic::catch_unwind(|| seepd::config::load_dir(dir))
        .map_err(|_| "the loader panicked".to_string())?;
    match loaded {
        Ok(cfg) => {
            let built = std::panic::catch_unwind(|| {
                let _ = seepd::check_cmd::summary(&cfg);
                // The durations a run adds to the clock must not overflow.
                let now = std::time::Instant::now();
                let _ = now + std::time::Duration::from_secs(cfg.service.shutdown_deadline_s);
                let _ = now + std::time::Duration::from_millis(cfg.mqtt.reconnect_max_ms);
                let now_ms = chrono::Utc::now().timestamp_millis();
                for i in cfg.instruments.values() {
                    let ahead = i.interval_s as i64 * 1000 * 1000;
                    assert!(now_ms.checked_add(ahead).is_some());
                }
                let _ = now_ms
                    + cfg.service.max_future_s * 1000
                    + cfg.service.barometer_max_age_s * 4000;
                let cfg = Arc::new(cfg);
                let _ = seepd::engine::Engine::new(Arc::clone(&cfg));
                let _ = seepd::alerts::Evaluator::new(cfg);
            });
            built.map_err(|_| {
                "building the engine from a valid configuration panicked".to_string()
            })?;
            Ok(true)
        }
        Err(problems) => {
            if problems.0.is_empty() {
                return Err("an error without any problem".into());
            }
            for p in &problems.0 {
                let inside = p.file.starts_with(dir) || p.file == dir;
                let lines = std::fs::read(&p.file)
                    .map(|b| String::from_utf8_lossy(&b).lines().count() + 1)
                    .unwrap_or(1);
                if !inside
                    || p.line == 0
                    || p.column == 0
                    || p.line > lines.max(1)
                    || p.message.trim().is_empty()
                {
                    return Err(format!("badly located problem: {p}"));
                }
            }
            Ok(false)
        }
    }
}

#[test]
fn random_edits_of_the_example_never_panic_and_every_problem_is_located() {
    let mut rng = Rng::new("config");
    let originals = originals();
    let tmp = tempfile::tempdir().unwrap();
    let dir: PathBuf = tmp.path().to_path_buf();
    let started = Instant::now();
    let (mut valid, mut refused) = (0, 0);
    let mut failures = Vec::new();
    for i in 0..IN_PROCESS {
        let what = mutant(&mut rng, &dir, &originals);
        match judge(&dir) {
            Ok(true) => valid += 1,
            Ok(false) => refused += 1,
            Err(e) => {
                let kept = tmp.path().join(format!("failure-{i}"));
                let _ = std::fs::create_dir_all(&kept);
                for f in FILES {
                    let _ = std::fs::copy(dir.join(f), kept.join(f));
                }
                failures.push(format!("mutant {i} ({what}): {e}"));
                if failures.len() >= 5 {
                    break;
                }
            }
        }
    }
    let took = started.elapsed();
    assert!(failures.is_empty(), "{}", failures.join("\n"));
    // Through the binary: exit 0 or 78, and problems as `file:line:column: message`.
    let mut codes = Vec::new();
    for _ in 0..THROUGH_BINARY {
        mutant(&mut rng, &dir, &originals);
        let (code, _, err) =
            crate::common::seepd_output(&["check", "--config", &dir.display().to_string()]);
        assert!(code == 0 || code == 78, "exit {code}: {err}");
        if code == 78 {
            for line in err.lines().filter(|l| !l.starts_with("seepd:")) {
                let parts: Vec<&str> = line.splitn(4, ':').collect();
                let located = parts.len() == 4
                    && parts[1].parse::<usize>().is_ok_and(|n| n > 0)
                    && parts[2].parse::<usize>().is_ok_and(|n| n > 0)
                    && parts[3].starts_with(' ');
                assert!(located, "not file:line:column: message: {line}");
            }
        }
        codes.push(code);
    }
    figures(
        "config",
        &[
            (
                "random edits loaded in process",
                format!("{IN_PROCESS}: {valid} still valid, {refused} refused with located problems, 0 panics"),
            ),
            ("through `seepd check`", format!("{THROUGH_BINARY}, exit codes {codes:?}")),
            ("wall time", secs(took)),
        ],
    );
}
