//! Any bytes through the CSV decoder: a value or a reject with its reason, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;
use seepd::config::model::{EpochUnit, JsonFields, PayloadFormat, Subscription};

fuzz_target!(|data: &[u8]| {
    let sub = Subscription {
        pattern: "t/{logger}".into(),
        filter: "t/+".into(),
        qos: 1,
        format: PayloadFormat::Csv,
        epoch_unit: EpochUnit::Auto,
        json: JsonFields::default(),
    };
    let now = chrono::DateTime::from_timestamp(1_772_366_400, 0).expect("fixed now");
    match seepd::ingest::decode::decode(&sub, data, now) {
        Err(r) => assert!(!r.detail.is_empty()),
        Ok(entries) => {
            for e in entries {
                if let Err(r) = e {
                    assert!(!r.detail.is_empty());
                }
            }
        }
    }
});
