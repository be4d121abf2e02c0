//! Any bytes through a payload decoder (the first byte picks JSON, SenML or CSV and the epoch
//! unit): a value or a reject with its reason, never a panic.
#![no_main]

use libfuzzer_sys::fuzz_target;
use seepd::config::model::{EpochUnit, JsonFields, PayloadFormat, Subscription};

fuzz_target!(|data: &[u8]| {
    let Some((&pick, payload)) = data.split_first() else {
        return;
    };
    let format = [PayloadFormat::Json, PayloadFormat::Senml, PayloadFormat::Csv];
    let unit = [EpochUnit::Auto, EpochUnit::Seconds, EpochUnit::Milliseconds];
    let sub = Subscription {
        pattern: "t/{logger}".into(),
        filter: "t/+".into(),
        qos: 1,
        format: format[usize::from(pick) % 3],
        epoch_unit: unit[usize::from(pick / 3) % 3],
        json: JsonFields::default(),
    };
    let now = chrono::DateTime::from_timestamp(1_772_366_400, 0).expect("fixed now");
    match seepd::ingest::decode::decode(&sub, payload, now) {
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
