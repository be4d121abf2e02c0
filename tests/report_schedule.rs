//! Scheduled reports through the real binary: a daily `[[report]]` whose time has just passed
//! is caught up at start, rendered and emailed through a real aiosmtpd with the HTML and CSV
//! files attached (parsed back with Python's email parser); a restart does not send it again.

mod common;

use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Duration;

use chrono::{NaiveTime, Utc};
use common::smtp::{alert_config, header, Opts, SmtpServer};
use common::*;
use seepd::config::Every;
use seepd::report::schedule::{last_due, period};

const TZ: chrono_tz::Tz = chrono_tz::America::Chicago;

/// The raw files of the Maildir.
fn mail_files(smtp: &SmtpServer) -> Vec<PathBuf> {
    let mut out = Vec::new();
    for sub in ["new", "cur"] {
        if let Ok(rd) = std::fs::read_dir(smtp.maildir.join(sub)) {
            out.extend(rd.flatten().map(|e| e.path()));
        }
    }
    out
}

/// Split a message into `out` with `tests/support/mail_parts.py`; returns its part lines.
fn parts(msg: &Path, out: &Path) -> Vec<String> {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/support/mail_parts.py");
    let o = Command::new("/usr/bin/python3")
        .arg(script)
        .arg(msg)
        .arg(out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout)
        .lines()
        .map(str::to_string)
        .collect()
}

fn wait_log(log: &Path, text: &str, times: usize) {
    wait_for(Duration::from_secs(30), || {
        let t = std::fs::read_to_string(log).unwrap_or_default();
        (t.matches(text).count() >= times).then_some(())
    })
    .unwrap_or_else(|| {
        panic!(
            "log never said {text:?} {times} time(s):\n{}",
            std::fs::read_to_string(log).unwrap_or_default()
        )
    });
}

#[test]
fn a_due_daily_report_arrives_with_its_attachments_once_across_a_restart() {
    let dir = tempfile::tempdir().unwrap();
    let broker = Broker::start(dir.path());
    let smtp = SmtpServer::start(dir.path(), Opts::default());
    // A daily report at a local time two minutes ago: due, and caught up at start.
    let now = Utc::now();
    let at_local = (now - chrono::Duration::minutes(2))
        .with_timezone(&TZ)
        .time();
    let at = NaiveTime::from_hms_opt(
        chrono::Timelike::hour(&at_local),
        chrono::Timelike::minute(&at_local),
        0,
    )
    .unwrap();
    let kept = dir.path().join("kept");
    let table = format!(
        "[[report]]\nid = \"ash-bend-daily\"\nevery = \"daily\"\nat = \"{}\"\n\
         recipients = [\"levee-engineer@example.invalid\"]\ncontacts = [\"levee on-call\"]\n\
         out_dir = \"{}\"\n\n[[rule]]",
        at.format("%H:%M"),
        kept.display()
    );
    let cfg = alert_config(
        dir.path(),
        broker.port,
        smtp.port,
        &[
            ("time_zone = \"UTC\"", "time_zone = \"America/Chicago\""),
            ("[[rule]]", &table),
        ],
    );
    let (from, to) = period(
        Every::Daily,
        TZ,
        last_due(Every::Daily, at, TZ, now).unwrap(),
    )
    .unwrap();
    let stem = format!("ash-bend_{}_{}", from.format("%Y%m%d"), to.format("%Y%m%d"));
    let log = dir.path().join("seepd.log");

    let mut d = Daemon::start(&cfg, &log);
    wait_log(&log, "Report scheduler caught up", 1);
    let msgs = smtp.wait_messages(1, Duration::from_secs(30));
    assert_eq!(msgs.len(), 1);
    let m = &msgs[0];
    assert_eq!(
        header(m, "To").as_deref(),
        Some("levee-engineer@example.invalid, levee-oncall@example.invalid")
    );
    assert!(header(m, "Subject")
        .unwrap_or_default()
        .contains("Instrumentation report"));

    let out = dir.path().join("parts");
    let files = mail_files(&smtp);
    let lines = parts(&files[0], &out);
    assert!(lines[0].starts_with("top multipart/mixed"), "{lines:?}");
    let attached: Vec<&str> = lines
        .iter()
        .filter(|l| l.contains(" attachment "))
        .filter_map(|l| l.rsplit(' ').next())
        .collect();
    let mut expected = vec![format!("{stem}.html")];
    // The signed document, when the build has the `pdf` feature (on by default).
    if cfg!(feature = "pdf") {
        expected.push(format!("{stem}.pdf"));
    }
    expected.extend([
        format!("{stem}_instruments.csv"),
        format!("{stem}_derived.csv"),
        format!("{stem}_quarantine.csv"),
    ]);
    assert_eq!(attached, expected, "{lines:?}");
    let html = std::fs::read_to_string(out.join(format!("{stem}.html"))).unwrap();
    common::well_formed(&html);
    assert!(html.contains("Instrumentation report"));
    assert!(html.contains("America/Chicago"));
    let csv = std::fs::read_to_string(out.join(format!("{stem}_instruments.csv"))).unwrap();
    assert!(csv.starts_with("instrument,kind,quantity,unit,"), "{csv}");
    let body = std::fs::read_to_string(out.join("body.txt")).unwrap();
    assert!(body.contains("ash-bend-daily"), "{body}");
    assert!(body.contains(seepd::CAUTION), "{body}");
    // The files are kept in out_dir too, identical to the attachment.
    assert_eq!(
        std::fs::read_to_string(kept.join(format!("{stem}.html"))).unwrap(),
        html
    );
    assert_eq!(count(dir.path(), "report_runs", "1=1"), 1);

    // A restart: the period is recorded, so nothing is generated or sent again.
    let (code, _) = d.terminate();
    assert_eq!(code, Some(0));
    let mut d = Daemon::start(&cfg, &log);
    wait_log(&log, "Report scheduler caught up", 2);
    let more = wait_for(Duration::from_secs(3), || {
        (smtp.messages().len() > 1).then_some(())
    });
    assert!(more.is_none(), "sent again: {:?}", smtp.message_ids());
    assert_eq!(count(dir.path(), "report_runs", "1=1"), 1);
    assert_eq!(count(dir.path(), "outbox", "status = 'sent'"), 1);
    d.terminate();
}
