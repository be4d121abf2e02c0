//! A whole message through the engine on the example configuration — topic pick, decode,
//! mapping, checks, reduction, health, derived values — never panics, and every input it
//! refuses is quarantined with a reason.
#![no_main]

use std::sync::{Arc, Mutex, OnceLock};

use libfuzzer_sys::fuzz_target;
use seepd::engine::{Engine, Message};

const TOPICS: [&str; 5] = [
    "demo/AB-LOG1/json",
    "demo/AB-LOG1/csv",
    "demo/TH-LOG1/senml",
    "demo/TH-LOG1/json",
    "other/topic",
];

fn engine() -> &'static Mutex<Engine> {
    static E: OnceLock<Mutex<Engine>> = OnceLock::new();
    E.get_or_init(|| {
        let dir = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../config");
        let cfg = seepd::config::load_dir(&dir).expect("the example configuration loads");
        Mutex::new(Engine::new(Arc::new(cfg)))
    })
}

fuzz_target!(|data: &[u8]| {
    let Some((&pick, payload)) = data.split_first() else {
        return;
    };
    let msg = Message {
        topic: TOPICS[usize::from(pick) % TOPICS.len()].into(),
        payload: payload.to_vec(),
        arrival: chrono::DateTime::from_timestamp(1_772_366_400, 0).expect("fixed now"),
        redelivered: false,
    };
    let mut engine = engine().lock().expect("engine");
    let out = engine.process(&msg);
    for q in &out.quarantined {
        assert!(!q.detail.is_empty());
    }
    for r in &out.readings {
        assert!(r.raw.is_finite());
    }
});
