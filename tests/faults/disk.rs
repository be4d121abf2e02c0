//! The database on a full filesystem. Where the tests may mount (root, with mount allowed),
//! the database lives on a 64 MiB tmpfs that a filler file fills to the last byte (a real
//! ENOSPC); elsewhere seepd runs under a file-size limit (RLIMIT_FSIZE through `prlimit`,
//! unprivileged), which fails the database's growth the same way. The file-size-limit way also
//! runs on its own everywhere (it proves that SIGXFSZ does not kill the service), and
//! `SEEPD_TEST_DISK=rlimit` makes the first test use it too. Either way seepd stops
//! acknowledging (the broker keeps the readings), stays up, and recovers by itself once there
//! is room; then, full again, SIGTERM stops it within its deadline and a restart with room
//! stores every reading — nothing acknowledged was lost.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::{Duration, Instant};

use crate::common::*;
use crate::support::*;

/// A small tmpfs mounted for one test (unmounted on drop).
struct Tmpfs(PathBuf);

impl Tmpfs {
    fn mount(at: &Path) -> Option<Tmpfs> {
        if std::env::var("SEEPD_TEST_DISK").as_deref() == Ok("rlimit") {
            return None;
        }
        std::fs::create_dir_all(at).ok()?;
        let ok = Command::new("mount")
            .args(["-t", "tmpfs", "-o", "size=64m,mode=0755", "tmpfs"])
            .arg(at)
            .stderr(std::process::Stdio::null())
            .status()
            .is_ok_and(|s| s.success());
        ok.then(|| Tmpfs(at.to_path_buf()))
    }
}

impl Drop for Tmpfs {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg("-l").arg(&self.0).status();
    }
}

/// How the filesystem is made full and given room again.
enum Full {
    /// A filler file on the tmpfs: written until ENOSPC, removed to give room.
    Tmpfs(Tmpfs),
    /// A file-size limit on the seepd process, lifted to give room.
    Rlimit,
}

impl Full {
    fn how(&self) -> &'static str {
        match self {
            Full::Tmpfs(_) => "a 64 MiB tmpfs filled to ENOSPC by a filler file",
            Full::Rlimit => "RLIMIT_FSIZE of 1 MiB on the seepd process (prlimit)",
        }
    }

    fn start(&self, cfg: &Path, log: &Path) -> Daemon {
        match self {
            Full::Tmpfs(_) => Daemon::start(cfg, log),
            Full::Rlimit => Daemon::start_limited(cfg, log, 1 << 20),
        }
    }

    /// Fill the disk (tmpfs) — the file-size limit is already in force.
    fn fill(&self) {
        if let Full::Tmpfs(t) = self {
            use std::io::Write;
            let mut f = std::fs::File::create(t.0.join("filler")).unwrap();
            let chunk = vec![0u8; 64 << 10];
            while f.write_all(&chunk).is_ok() {}
            let small = [0u8; 512];
            while f.write_all(&small).is_ok() {}
            let _ = f.sync_all();
        }
    }

    /// Give room again (a file-size limit goes with its process: nothing to do once it ended).
    fn room(&self, d: &mut Daemon) {
        match self {
            Full::Tmpfs(t) => {
                let _ = std::fs::remove_file(t.0.join("filler"));
            }
            Full::Rlimit if d.child.try_wait().unwrap().is_none() => {
                let st = Command::new("prlimit")
                    .arg(format!("--pid={}", d.child.id()))
                    .arg("--fsize=unlimited")
                    .status()
                    .unwrap();
                assert!(st.success(), "prlimit --pid");
            }
            Full::Rlimit => {}
        }
    }
}

/// Publish readings `from..to` of the river gauge (14 derived values each: the database grows
/// fast), below every alert level.
fn publish(p: &Publisher, t0: i64, from: i64, to: i64) {
    for i in from..to {
        p.send(
            "demo/AB-LOG1/json",
            river_json(t0 + i, 2.0 + (i % 300) as f64 / 100.0),
        );
    }
}

fn stored(dir: &Path) -> i64 {
    count(dir, "readings", "1")
}

/// Wait until the count stops moving (for `quiet`), returning it.
fn stalls(dir: &Path, quiet: Duration) -> i64 {
    let mut last = stored(dir);
    let mut since = Instant::now();
    let end = Instant::now() + Duration::from_secs(60);
    while Instant::now() < end {
        std::thread::sleep(Duration::from_millis(200));
        let now = stored(dir);
        if now != last {
            last = now;
            since = Instant::now();
        } else if since.elapsed() >= quiet {
            return now;
        }
    }
    panic!("the stored count kept moving: {last}");
}

#[test]
fn a_full_filesystem_stops_acknowledging_and_loses_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let full = match Tmpfs::mount(&dir.path().join("db")) {
        Some(t) => Full::Tmpfs(t),
        None => Full::Rlimit,
    };
    scenario(&dir, full, "disk");
}

/// The file-size limit way always runs too: it is also the test that SIGXFSZ does not kill
/// the service.
#[test]
fn a_file_size_limit_stops_acknowledging_and_loses_nothing() {
    let dir = tempfile::tempdir().unwrap();
    scenario(&dir, Full::Rlimit, "disk-rlimit");
}

fn scenario(dir: &tempfile::TempDir, full: Full, name: &str) {
    let db_dir = match &full {
        Full::Tmpfs(t) => t.0.clone(),
        Full::Rlimit => dir.path().to_path_buf(),
    };
    let broker = Broker::start(dir.path());
    let cfg = example_config(dir.path(), broker.port);
    let (old_db, new_db) = (dir.path().join("seepd.sqlite"), db_dir.join("seepd.sqlite"));
    edit(
        &cfg,
        "seepd.toml",
        &[
            (
                &format!("database = \"{}\"", old_db.display()),
                &format!("database = \"{}\"", new_db.display()),
            ),
            ("shutdown_deadline_s = 10", "shutdown_deadline_s = 4"),
        ],
    );
    let log = dir.path().join("seepd.log");
    let mut d = full.start(&cfg, &log);
    d.wait_connected(1);
    let p = Publisher::connect(broker.port, "pub-disk");
    let t0 = chrono::Utc::now().timestamp() - 7 * 86_400;
    let count_db = || count(&db_dir, "readings", "1");
    // A first few readings with room (under the file-size limit too: 1 MiB holds ~250).
    let first = 100;
    publish(&p, t0, 0, first);
    wait_for(Duration::from_secs(60), || {
        (count_db() >= first).then_some(())
    })
    .unwrap_or_else(|| {
        panic!(
            "first readings not stored: {}; log:\n{}",
            count_db(),
            std::fs::read_to_string(&log).unwrap_or_default()
        )
    });

    // Full: commits fail, nothing more is stored or acknowledged; seepd stays up.
    full.fill();
    let n1 = 6_000;
    publish(&p, t0, first, n1);
    let noticed = wait_for(Duration::from_secs(60), || {
        if let Some(status) = d.child.try_wait().unwrap() {
            panic!(
                "seepd died on the full disk ({status}); stored {}",
                count_db()
            );
        }
        (log_count(&log, "Commit failed") >= 1).then_some(())
    });
    assert!(
        noticed.is_some(),
        "the disk never filled; stored {}; log:\n{}",
        count_db(),
        std::fs::read_to_string(&log).unwrap_or_default()
    );
    let at_full = stalls(&db_dir, Duration::from_secs(2));
    assert!(at_full < n1, "everything fitted: {at_full}");
    assert!(
        d.child.try_wait().unwrap().is_none(),
        "seepd exited on a full disk"
    );

    // Room again: the same process catches up with everything the broker kept.
    let freed = Instant::now();
    full.room(&mut d);
    wait_for(Duration::from_secs(90), || (count_db() >= n1).then_some(())).unwrap_or_else(|| {
        panic!(
            "not recovered: {} of {n1}; log:\n{}",
            count_db(),
            std::fs::read_to_string(&log).unwrap_or_default()
        )
    });
    let recovery = freed.elapsed();

    // Full again, then SIGTERM: out within the deadline, with nothing acknowledged unstored.
    let (code, took, at_term) = {
        full.fill();
        if let Full::Rlimit = full {
            // The limit is gone from this process: start one under the limit again.
            let (_, _) = d.terminate();
            d = full.start(&cfg, &log);
            d.wait_connected(2);
        }
        let failures = log_count(&log, "Commit failed");
        let n2 = n1 + 4_000;
        publish(&p, t0, n1, n2);
        assert!(
            wait_log(&log, "Commit failed", failures + 1, Duration::from_secs(60)),
            "the disk never filled again"
        );
        let at_term = stalls(&db_dir, Duration::from_secs(1));
        let (code, took) = d.terminate();
        (code, took, at_term)
    };
    assert!(
        took <= Duration::from_secs(4) + Duration::from_millis(900),
        "SIGTERM took {took:?}"
    );
    full.room(&mut d);
    let n2 = n1 + 4_000;
    let connects = log_count(&log, "Connected to broker");
    let mut d = Daemon::start(&cfg, &log);
    d.wait_connected(connects + 1);
    wait_for(Duration::from_secs(90), || (count_db() >= n2).then_some(())).unwrap_or_else(|| {
        panic!(
            "lost readings: {} of {n2}; log:\n{}",
            count_db(),
            std::fs::read_to_string(&log).unwrap_or_default()
        )
    });
    let (ok, _) = d.terminate();
    assert_eq!(ok, Some(0));
    assert_eq!(count_db(), n2);
    let check = integrity(&db_dir);
    assert_eq!(check, "ok");
    drop(d);
    let _ = Path::new(&db_dir).join("filler");
    figures(
        name,
        &[
            ("how the disk was made full", full.how().into()),
            ("readings", format!("{n2} published, {n2} stored once")),
            (
                "first fill",
                format!("storing stopped at {at_full} of {n1}; seepd stayed up and caught up alone {} after room was made", secs(recovery)),
            ),
            (
                "second fill",
                format!("stopped at {at_term}; SIGTERM exit {code:?} in {} (deadline 4 s); restarted with room: all stored", secs(took)),
            ),
            ("integrity_check", check),
        ],
    );
}
