//! The pipeline shared by `run` and `replay`: an incoming message becomes reading rows and
//! quarantine rows, by decoding (payload::decode), mapping to an instrument, checking, and
//! reducing (reduce).
//!
//! Pure apart from the state it keeps (the channel table and recent barometer readings): no
//! I/O and no clock reads; the arrival time comes with the message.

use std::collections::{BTreeMap, HashMap};
use std::sync::Arc;

use chrono::{DateTime, Utc};

use crate::config::{Config, Instrument, Subscription};
use crate::derive::model_live::LiveModels;
use crate::derive::{Deriver, Head};
use crate::model::{DerivedRow, FlagUpdate, QuarantineRow, ReadingRow};
use crate::payload::decode::{decode, Decoded};
use crate::payload::topic::{match_topic, TopicFields};
use crate::quality::{Flags, Reason, Reject};
use crate::reduce::{reduce, Context};
use crate::watch::Watcher;

/// Quarantined payloads are stored up to this many bytes.
const QUARANTINE_PAYLOAD_MAX: usize = 4096;

/// One message as it arrived.
#[derive(Debug, Clone)]
pub struct Message {
    pub topic: String,
    pub payload: Vec<u8>,
    pub arrival: DateTime<Utc>,
    /// The broker marked it as a redelivery (MQTT DUP).
    pub redelivered: bool,
}

/// What one message produced.
#[derive(Debug, Default)]
pub struct Outcome {
    pub readings: Vec<ReadingRow>,
    /// Derived values recomputed because of these readings.
    pub derived: Vec<DerivedRow>,
    pub quarantined: Vec<QuarantineRow>,
    /// Flags found for readings stored earlier (a spike confirmed by the reading after it).
    pub flag_updates: Vec<FlagUpdate>,
}

impl Outcome {
    /// Append another message's outcome (a batch of several messages).
    pub fn append(&mut self, o: Outcome) {
        self.readings.extend(o.readings);
        self.derived.extend(o.derived);
        self.quarantined.extend(o.quarantined);
        self.flag_updates.extend(o.flag_updates);
    }
}

/// A value read by hand, as `Engine::process_manual` takes it.
#[derive(Debug, Clone, Copy)]
pub struct HandReading<'a> {
    pub instrument: &'a str,
    /// In the instrument's raw unit.
    pub value: f64,
    /// Thermistor temperature read with it, °C.
    pub temperature_c: Option<f64>,
    /// Who read it.
    pub by: &'a str,
}

/// The pipeline state.
pub struct Engine {
    /// The validated configuration.
    cfg: Arc<Config>,
    /// Channel table: (logger, channel) → instrument id.
    channels: HashMap<(String, String), String>,
    /// Recent barometric pressures by barometer id: time (ms) → kPa. Pruned to a window.
    baro: HashMap<String, BTreeMap<i64, f64>>,
    /// Derived quantities recomputed as readings arrive.
    deriver: Deriver,
    /// Sensor health, rates, model residuals and completeness per reading.
    watch: Watcher,
    /// Live re-solves of the sections' seepage models (off this thread) and their rows.
    live: LiveModels,
}

impl Engine {
    /// An engine for `cfg` with its barometer memory, latest heads, trend state and the
    /// sections' calibrations in use seeded from `store` (at start, and on a reload).
    ///
    /// # Errors
    /// Database errors.
    pub fn seeded(cfg: &Arc<Config>, store: &crate::store::Store) -> anyhow::Result<Engine> {
        let now = chrono::Utc::now();
        let mut engine = Engine::new(Arc::clone(cfg));
        let since = now.timestamp_millis() - cfg.service.barometer_max_age_s * 1000 * 2;
        for b in engine.barometers() {
            for (t, p) in store.barometer_since(&b, since)? {
                engine.remember_barometer(&b, t, p);
            }
        }
        for l in store.latest_all()? {
            if let Some(head_m) = l.total_head_m {
                let head = crate::derive::Head {
                    t_ms: l.t_ms,
                    head_m,
                    flags: l.flags,
                };
                engine.seed_head(&l.instrument, head);
            }
        }
        crate::watch::seed::from_store(engine.watch_mut(), cfg, store, now.timestamp_millis())?;
        let calibrations = store.models_of_kind(crate::derive::calibration::KIND)?;
        engine
            .live
            .use_fits(crate::derive::calibration::in_use(&calibrations));
        Ok(engine)
    }

    pub fn new(cfg: Arc<Config>) -> Engine {
        let channels = cfg
            .instruments
            .values()
            .filter_map(|i| match (&i.logger, &i.channel) {
                (Some(l), Some(c)) => Some(((l.clone(), c.clone()), i.id.clone())),
                _ => None,
            })
            .collect();
        let deriver = Deriver::new(Arc::clone(&cfg));
        let watch = Watcher::new(&cfg);
        Engine {
            cfg,
            channels,
            baro: HashMap::new(),
            deriver,
            watch,
            live: LiveModels::default(),
        }
    }

    /// The live seepage models: connect the solver thread, hand it over on reload, and ask
    /// whether answers wait to be committed.
    pub fn live_models(&mut self) -> &mut LiveModels {
        &mut self.live
    }

    /// The configuration the engine runs on.
    pub fn config(&self) -> &Config {
        &self.cfg
    }

    /// Remember an instrument's latest head (from the store at start) so derived quantities
    /// have their inputs right after a restart.
    pub fn seed_head(&mut self, instrument: &str, head: Head) {
        self.deriver.seed(instrument, head);
    }

    /// The derived-quantity state (latest heads), e.g. to draw a section.
    pub fn deriver(&self) -> &Deriver {
        &self.deriver
    }

    /// The trend and health state (e.g. `silent_instruments` for the no-data check).
    pub fn watch(&self) -> &Watcher {
        &self.watch
    }

    /// Batch mode (the writer thread and replay): rates are computed once per instrument per
    /// batch by `end_batch` (see `Watcher::set_batched`).
    pub fn set_batched(&mut self, on: bool) {
        self.watch.set_batched(on);
    }

    /// Close a batch (batch mode): the rates of the instruments that got readings in it, each
    /// at its newest reading that is due one. Without batch mode, empty.
    pub fn end_batch(&mut self) -> Outcome {
        let mut derived = self.watch.take_rates();
        derived.extend(self.live.drain());
        Outcome {
            derived,
            ..Outcome::default()
        }
    }

    /// The trend and health state, to seed it or install models.
    pub fn watch_mut(&mut self) -> &mut Watcher {
        &mut self.watch
    }

    /// Barometer ids that some instrument's reduction needs.
    pub fn barometers(&self) -> Vec<String> {
        let mut ids: Vec<String> = self
            .cfg
            .instruments
            .values()
            .filter_map(|i| i.kind.barometer().map(str::to_string))
            .collect();
        ids.sort();
        ids.dedup();
        ids
    }

    /// Remember a barometric pressure (from the store at start, or from a new reading).
    pub fn remember_barometer(&mut self, barometer: &str, t_ms: i64, kpa: f64) {
        let keep_ms = self.cfg.service.barometer_max_age_s * 1000 * 4;
        let series = self.baro.entry(barometer.to_string()).or_default();
        series.insert(t_ms, kpa);
        // Keep memory bounded: drop what is far older than the newest entry.
        if let Some((&newest, _)) = series.last_key_value() {
            while let Some((&oldest, _)) = series.first_key_value() {
                if newest - oldest > keep_ms && series.len() > 2 {
                    series.pop_first();
                } else {
                    break;
                }
            }
        }
    }

    /// The barometer reading nearest in time to `t_ms`, if within the configured window.
    fn barometer_at(&self, barometer: &str, t_ms: i64) -> Option<f64> {
        let series = self.baro.get(barometer)?;
        let max = self.cfg.service.barometer_max_age_s * 1000;
        let before = series.range(..=t_ms).next_back();
        let after = series.range(t_ms..).next();
        [before, after]
            .into_iter()
            .flatten()
            .map(|(&t, &p)| ((t - t_ms).abs(), p))
            .filter(|(d, _)| *d <= max)
            .min_by_key(|(d, _)| *d)
            .map(|(_, p)| p)
    }

    /// Process one message.
    pub fn process(&mut self, msg: &Message) -> Outcome {
        let mut out = Outcome::default();
        let quarantine = |out: &mut Outcome, reject: Reject| {
            out.quarantined.push(quarantine_row(msg, reject));
        };
        if msg.payload.len() > self.cfg.service.max_payload_bytes {
            let detail = format!(
                "payload of {} bytes exceeds max_payload_bytes {} (first {} bytes kept)",
                msg.payload.len(),
                self.cfg.service.max_payload_bytes,
                QUARANTINE_PAYLOAD_MAX
            );
            quarantine(&mut out, Reject::new(Reason::Oversized, detail));
            return out;
        }
        let cfg = Arc::clone(&self.cfg);
        let Some((sub, fields)) = find_subscription(&cfg.subscriptions, &msg.topic) else {
            let detail = format!("topic {:?} matches no subscription pattern", msg.topic);
            quarantine(&mut out, Reject::new(Reason::UnknownTopic, detail));
            return out;
        };
        let entries = match decode(sub, &msg.payload, msg.arrival) {
            Ok(e) => e,
            Err(reject) => {
                quarantine(&mut out, reject);
                return out;
            }
        };
        self.take_entries(msg, &fields, entries, Flags::empty(), out)
    }

    /// Process one hand-read value (in the instrument's raw unit, with the thermistor
    /// temperature when one was read) read at `time` and entered at `entered`: the same checks, reduction, health and derived values as a
    /// logger's reading, flagged `manual`. A reject is quarantined under topic
    /// `manual/<instrument>` with the entry as payload.
    pub fn process_manual(
        &mut self,
        hand: &HandReading<'_>,
        time: DateTime<Utc>,
        entered: DateTime<Utc>,
    ) -> Outcome {
        let msg = Message {
            topic: format!("manual/{}", hand.instrument),
            payload: serde_json::json!({
                "instrument": hand.instrument, "value": hand.value,
                "temperature_c": hand.temperature_c, "time": time.to_rfc3339(), "by": hand.by,
            })
            .to_string()
            .into_bytes(),
            arrival: entered,
            redelivered: false,
        };
        let entry = Decoded {
            instrument: Some(hand.instrument.to_string()),
            channel: None,
            time: Some(time),
            value: hand.value,
            temperature_c: hand.temperature_c,
        };
        self.take_entries(
            &msg,
            &TopicFields::default(),
            vec![Ok(entry)],
            Flags::MANUAL,
            Outcome::default(),
        )
    }

    /// Check, reduce and derive from decoded entries of `msg`, each flagged `extra` too.
    fn take_entries(
        &mut self,
        msg: &Message,
        fields: &TopicFields,
        entries: crate::payload::decode::Entries,
        extra: Flags,
        mut out: Outcome,
    ) -> Outcome {
        let quarantine = |out: &mut Outcome, reject: Reject| {
            out.quarantined.push(quarantine_row(msg, reject));
        };
        let cfg = Arc::clone(&self.cfg);
        // Map and check every entry; barometers first so that a message carrying both the
        // barometer and the gauges it corrects is reduced consistently.
        let mut accepted: Vec<(&Instrument, Decoded, i64, Flags)> = Vec::new();
        for entry in entries {
            match entry.and_then(|d| self.admit(&cfg, fields, d, msg.arrival)) {
                Ok((i, d, t, mut flags)) => {
                    flags.insert(extra);
                    accepted.push((i, d, t, flags));
                }
                Err(reject) => quarantine(&mut out, reject),
            }
        }
        accepted.sort_by_key(|(i, ..)| i.kind.barometer().is_some());
        for (instrument, d, t_ms, flags) in accepted {
            match self.reduce_one(&cfg, instrument, &d, t_ms, flags, msg.arrival) {
                // Stamped ahead of our clock: stored, but it must not move the instrument's
                // clock (health, rates, derived inputs) past the real readings that follow.
                Ok(row) if row.flags.contains(Flags::TIME_AHEAD) => out.readings.push(row),
                Ok(mut row) => {
                    if let Some((t_ms, head_m)) = self.watch.check(&mut row) {
                        self.reject_spike(&row.instrument, t_ms, head_m, &mut out);
                    }
                    out.derived.extend(self.deriver.on_reading(&row));
                    out.derived.extend(self.watch.derive(&row));
                    out.derived
                        .extend(self.live.on_reading(&self.cfg, &row, &self.deriver));
                    out.readings.push(row);
                }
                Err(reject) => quarantine(&mut out, reject),
            }
        }
        out
    }

    /// The reading of `instrument` at `t_ms` is a confirmed spike: flag it (in this outcome if
    /// it is here, else in the store) and recompute what it fed without it.
    fn reject_spike(&mut self, instrument: &str, t_ms: i64, head_m: f64, out: &mut Outcome) {
        let flags = Flags::SPIKE;
        tracing::debug!(instrument, t_ms, "Spike confirmed by the next reading");
        if let Some(r) = out
            .readings
            .iter_mut()
            .find(|r| r.instrument == instrument && r.t_ms == t_ms)
        {
            r.flags.insert(flags);
        }
        out.flag_updates.push(FlagUpdate {
            instrument: instrument.to_string(),
            t_ms,
            flags,
        });
        out.derived
            .extend(self.deriver.reject(instrument, t_ms, head_m, flags));
    }

    /// Map a decoded entry to its instrument and apply the input checks.
    fn admit<'c>(
        &self,
        cfg: &'c Config,
        fields: &TopicFields,
        d: Decoded,
        arrival: DateTime<Utc>,
    ) -> Result<(&'c Instrument, Decoded, i64, Flags), Reject> {
        let instrument = self.resolve(cfg, fields, &d)?;
        let mut flags = Flags::empty();
        if !d.value.is_finite() {
            return Err(Reject::new(
                Reason::NonFinite,
                format!("instrument {}: value is {}", instrument.id, d.value),
            ));
        }
        if d.temperature_c.is_some_and(|t| !t.is_finite()) {
            return Err(Reject::new(
                Reason::NonFinite,
                format!("instrument {}: temperature is not finite", instrument.id),
            ));
        }
        let (lo, hi) = instrument.raw_range;
        if d.value < lo || d.value > hi {
            return Err(Reject::new(
                Reason::OutOfRange,
                format!(
                    "instrument {}: value {} outside its physical range [{lo}, {hi}]",
                    instrument.id, d.value
                ),
            ));
        }
        let time = match d.time {
            Some(t) => t,
            None => {
                flags.insert(Flags::TIME_FROM_ARRIVAL);
                arrival
            }
        };
        let ahead_ms = (time - arrival).num_milliseconds();
        let ahead_s = ahead_ms / 1000;
        if ahead_ms > cfg.service.max_future_s * 1000 {
            return Err(Reject::new(
                Reason::TimeInFuture,
                format!(
                    "instrument {}: time {} is {ahead_s} s after arrival (limit {} s)",
                    instrument.id,
                    time.to_rfc3339(),
                    cfg.service.max_future_s
                ),
            ));
        }
        if ahead_ms > cfg.service.clock_skew_s * 1000 {
            flags.insert(Flags::TIME_AHEAD);
        }
        if time < instrument.installed {
            return Err(Reject::new(
                Reason::BeforeInstall,
                format!(
                    "instrument {}: time {} is before its install date {}",
                    instrument.id,
                    time.to_rfc3339(),
                    instrument.installed.to_rfc3339()
                ),
            ));
        }
        Ok((instrument, d, time.timestamp_millis(), flags))
    }

    /// Which instrument a decoded entry belongs to: an id in the topic, then an id in the
    /// payload, then the (logger, channel) table.
    fn resolve<'c>(
        &self,
        cfg: &'c Config,
        fields: &TopicFields,
        d: &Decoded,
    ) -> Result<&'c Instrument, Reject> {
        let by_id = |id: &Option<String>| id.as_ref().and_then(|id| cfg.instruments.get(id));
        if let Some(i) = by_id(&fields.instrument).or_else(|| by_id(&d.instrument)) {
            return Ok(i);
        }
        let channel = d.channel.as_ref().or(fields.channel.as_ref());
        if let (Some(logger), Some(channel)) = (&fields.logger, channel) {
            if let Some(i) = self
                .channels
                .get(&(logger.clone(), channel.clone()))
                .and_then(|id| cfg.instruments.get(id))
            {
                return Ok(i);
            }
        }
        let what = match (&fields.instrument, &d.instrument, &fields.logger, channel) {
            (Some(id), ..) | (None, Some(id), ..) => format!("instrument id {id:?}"),
            (None, None, Some(l), Some(c)) => format!("logger {l:?} channel {c:?}"),
            (None, None, None, Some(c)) => format!("channel {c:?} (no logger in topic)"),
            _ => "no instrument id or channel".to_string(),
        };
        Err(Reject::new(
            Reason::UnknownInstrument,
            format!("{what} is not configured"),
        ))
    }

    fn reduce_one(
        &mut self,
        cfg: &Config,
        instrument: &Instrument,
        d: &Decoded,
        t_ms: i64,
        flags: Flags,
        arrival: DateTime<Utc>,
    ) -> Result<ReadingRow, Reject> {
        let gamma_w_kn_m3 = cfg.site_of(instrument).map_or(9.81, |s| s.gamma_w_kn_m3);
        let baro_kpa = instrument
            .kind
            .barometer()
            .and_then(|b| self.barometer_at(b, t_ms));
        // A thermistor reading outside the plausible range is not used for the thermal
        // correction (the wire itself is fine): the head stays close to the truth and the
        // reading is flagged `thermistor`.
        let (lo, hi) = cfg.trends.site(&instrument.site).health.thermistor_range_c;
        let failed = matches!(instrument.kind, crate::config::Kind::VibratingWire(_))
            && d.temperature_c.is_some_and(|t| !(lo..=hi).contains(&t));
        let ctx = Context {
            temperature_c: d.temperature_c.filter(|_| !failed),
            baro_kpa,
            gamma_w_kn_m3,
        };
        let mut r = reduce(instrument, d.value, &ctx)?;
        if failed {
            r.flags = Flags(r.flags.0 & !Flags::TEMP_MISSING.0);
            r.flags.insert(Flags::THERMISTOR);
        }
        if matches!(instrument.kind, crate::config::Kind::Barometer(_)) {
            if let Some(p) = r.pressure_kpa {
                self.remember_barometer(&instrument.id, t_ms, p);
            }
        }
        let mut all = flags;
        all.insert(r.flags);
        Ok(ReadingRow {
            instrument: instrument.id.clone(),
            t_ms,
            arrival_ms: arrival.timestamp_millis(),
            raw: d.value,
            temperature_c: d.temperature_c,
            baro_kpa,
            eng_value: r.engineering_value,
            eng_unit: r.engineering_unit,
            pressure_kpa: r.pressure_kpa,
            pressure_head_m: r.pressure_head_m,
            total_head_m: r.total_head_m,
            flags: all,
        })
    }
}

/// The first subscription whose pattern matches `topic`, with the captured fields.
fn find_subscription<'s>(
    subs: &'s [Subscription],
    topic: &str,
) -> Option<(&'s Subscription, TopicFields)> {
    subs.iter()
        .find_map(|s| match_topic(&s.pattern, topic).map(|f| (s, f)))
}

fn quarantine_row(msg: &Message, reject: Reject) -> QuarantineRow {
    let keep = msg.payload.len().min(QUARANTINE_PAYLOAD_MAX);
    QuarantineRow {
        received_ms: msg.arrival.timestamp_millis(),
        topic: msg.topic.clone(),
        reason: reject.reason,
        detail: reject.detail,
        payload: msg.payload[..keep].to_vec(),
        redelivered: msg.redelivered,
    }
}
