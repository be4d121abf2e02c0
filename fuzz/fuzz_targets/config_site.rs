//! Any text as a site file beside the example service file: the loader returns a
//! configuration or problems located inside their files, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let dir = tempfile::tempdir().expect("tempdir");
    let example = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../config/seepd.toml");
    std::fs::copy(example, dir.path().join("seepd.toml")).expect("service file");
    std::fs::write(dir.path().join("site.toml"), data).expect("site file");
    let text = String::from_utf8_lossy(data);
    if let Err(problems) = seepd::config::load_dir(dir.path()) {
        assert!(!problems.0.is_empty());
        for p in problems.0 {
            assert!(p.line >= 1 && p.column >= 1 && !p.message.is_empty());
            if p.file.ends_with("site.toml") {
                assert!(p.line <= text.lines().count() + 1, "{p}");
            }
        }
    }
});
