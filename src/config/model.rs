//! The validated configuration model: what the rest of seepd reads.
//!
//! Everything here is already checked and in SI units (m, kPa, s). The types that keep their keys
//! as written (`Service`, `Mqtt`, `Export`, `JsonFields`) are read straight from their tables:
//! their `Default` holds the defaults and their `#[serde]` attributes the bounds; the other
//! types are built from raw structs by the table readers (`config::load` and its modules).
//! Nothing here does I/O.

use std::collections::BTreeMap;
use std::fmt;
use std::path::PathBuf;

use chrono::{DateTime, Utc};

use super::de::{self, Int, Text};
use super::limits;
use crate::objkind::ObjectKind;

/// A secret (password, token). Never printed by `Debug` or `Display`.
#[derive(Clone, Default, PartialEq, Eq)]
pub struct Secret(pub String);

impl fmt::Debug for Secret {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("Secret(***)")
    }
}

/// The whole validated configuration: one service file plus one file per site.
#[derive(Debug, Clone)]
pub struct Config {
    /// Directory the configuration was read from (relative paths in it resolve against this).
    pub dir: PathBuf,
    pub service: Service,
    pub mqtt: Mqtt,
    /// Topic subscriptions, each with its payload format and how it maps to instruments.
    pub subscriptions: Vec<Subscription>,
    /// Sites in file-name order.
    pub sites: Vec<Site>,
    /// Every instrument of every site, by id (ids are unique across sites).
    pub instruments: BTreeMap<String, Instrument>,
    /// Derived-quantity objects (nests, toe checks, blanket reaches, sections) of all sites.
    pub objects: Objects,
    /// Rules, contact lists, notification policy and the mail relay.
    pub alerting: super::alerting::Alerting,
    /// InfluxDB v2 export (`[export]`), when configured.
    pub export: Option<Export>,
    /// Rate windows, sensor health and stage-response/HST models.
    pub trends: Trends,
    /// Scheduled reports of all sites (`[[report]]`).
    pub reports: Vec<ReportSchedule>,
    /// The on-call web pages (`[http]`), when configured.
    pub http: Option<crate::config::http::Http>,
    /// How seepd's own silence is noticed (`[heartbeat]`), when configured.
    pub heartbeat: Option<crate::config::heartbeat::Heartbeat>,
}

impl Config {
    /// The site an instrument belongs to.
    pub fn site_of(&self, instrument: &Instrument) -> Option<&Site> {
        self.sites.iter().find(|s| s.id == instrument.site)
    }

    /// The site of an instrument or derived object, by id.
    pub fn site_of_object(&self, id: &str) -> Option<&Site> {
        let site = self
            .instruments
            .get(id)
            .map(|i| i.site.as_str())
            .or_else(|| {
                self.objects
                    .all()
                    .find(|(_, x, _)| *x == id)
                    .map(|(_, _, s)| s)
            })?;
        self.sites.iter().find(|s| s.id == site)
    }
}

/// Service-wide settings from `seepd.toml` (`[service]`, read straight into this; defaults in
/// its `Default`, bounds in the field types it is read through).
#[derive(Debug, Clone, serde::Deserialize)]
#[serde(default)]
pub struct Service {
    /// SQLite database file (absolute, resolved against the config directory).
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub database: PathBuf,
    /// Group commit: a batch closes at this many readings...
    #[serde(deserialize_with = "de::via::<Int<1, { limits::COMMIT_READINGS }>, _, _>")]
    pub commit_max_readings: usize,
    /// ...or this long after its first message, or when the queue runs dry.
    #[serde(deserialize_with = "de::via::<Int<0, { limits::COMMIT_MS }>, _, _>")]
    pub commit_max_ms: u64,
    /// Payloads larger than this are quarantined as `oversized` (bytes).
    #[serde(deserialize_with = "de::via::<Int<1, { limits::MQTT_PACKET_BYTES }>, _, _>")]
    pub max_payload_bytes: usize,
    /// Readings stamped further than this into the future are quarantined (s). Default 600.
    #[serde(deserialize_with = "de::via::<Int<0, { limits::FUTURE_S }>, _, _>")]
    pub max_future_s: i64,
    /// Readings stamped more than this after their arrival (but within `max_future_s`) are
    /// stored flagged `time_ahead` and kept out of rules, health, rates and derived values
    /// (s). Default 60.
    #[serde(deserialize_with = "de::via::<Int<0, { limits::FUTURE_S }>, _, _>")]
    pub clock_skew_s: i64,
    /// How far apart in time a barometer reading may be from the reading it corrects (s).
    #[serde(deserialize_with = "de::via::<Int<0, { limits::BAROMETER_AGE_S }>, _, _>")]
    pub barometer_max_age_s: i64,
    /// Shutdown deadline (s): after SIGINT/SIGTERM the service exits within this.
    #[serde(deserialize_with = "de::via::<Int<1, { limits::SHUTDOWN_S }>, _, _>")]
    pub shutdown_deadline_s: u64,
}

impl Default for Service {
    /// The defaults; `database` is relative until resolved against the directory.
    fn default() -> Self {
        Service {
            database: "seepd.sqlite".into(),
            commit_max_readings: 500,
            commit_max_ms: 50,
            max_payload_bytes: 65536,
            max_future_s: 600,
            clock_skew_s: 60,
            barometer_max_age_s: 7200,
            shutdown_deadline_s: 10,
        }
    }
}

/// MQTT connection settings (`[mqtt]`, read straight into this; the password and `[mqtt.tls]`
/// are read after).
#[derive(Debug, Clone, serde::Deserialize)]
#[serde(default)]
pub struct Mqtt {
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub host: String,
    #[serde(deserialize_with = "de::via::<Int<1, 65535>, _, _>")]
    pub port: u16,
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub client_id: String,
    #[serde(deserialize_with = "de::via_opt::<Text, _, _>")]
    pub username: Option<String>,
    #[serde(skip)]
    pub password: Option<Secret>,
    #[serde(skip)]
    pub tls: Option<Tls>,
    /// Keep the broker session between connections (clean_session = false).
    pub persistent_session: bool,
    #[serde(deserialize_with = "de::via::<Int<0, 65535>, _, _>")]
    pub keep_alive_s: u64,
    /// Largest MQTT packet the client accepts or sends (bytes).
    #[serde(deserialize_with = "de::via::<Int<1, { limits::MQTT_PACKET_BYTES }>, _, _>")]
    pub max_packet_bytes: usize,
    /// Reconnect backoff: first delay and cap (ms).
    #[serde(deserialize_with = "de::via::<Int<0, { limits::BACKOFF_MS }>, _, _>")]
    pub reconnect_min_ms: u64,
    #[serde(deserialize_with = "de::via::<Int<0, { limits::BACKOFF_MS }>, _, _>")]
    pub reconnect_max_ms: u64,
}

impl Default for Mqtt {
    fn default() -> Self {
        Mqtt {
            host: "127.0.0.1".into(),
            port: 1883,
            client_id: "seepd".into(),
            username: None,
            password: None,
            tls: None,
            persistent_session: true,
            keep_alive_s: 30,
            max_packet_bytes: 1_048_576,
            reconnect_min_ms: 500,
            reconnect_max_ms: 30_000,
        }
    }
}

/// InfluxDB v2 export settings (`[export]`, read straight into this; the token and `series`
/// are read after): where to write and what.
#[derive(Debug, Clone, serde::Deserialize)]
#[serde(default)]
pub struct Export {
    /// Server root, `http://` or `https://` with host and optional port, no path.
    #[serde(deserialize_with = "super::export::server_root")]
    pub url: String,
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub org: String,
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub bucket: String,
    /// API token (`Authorization: Token ...`), from `token_env` or `token_file`.
    #[serde(skip)]
    pub token: Secret,
    /// Extra CA certificate (PEM) trusted for `https://`.
    #[serde(deserialize_with = "de::via_opt::<Text, _, _>")]
    pub ca_file: Option<PathBuf>,
    /// Most points per write request; the queue is read this many entries at a time.
    #[serde(deserialize_with = "de::via::<Int<1, 1_000_000>, _, _>")]
    pub batch_size: usize,
    /// How often a partial batch is sent (full batches go at once).
    #[serde(deserialize_with = "de::via::<Int<1, { limits::EXPORT_MS }>, _, _>")]
    pub flush_interval_ms: u64,
    /// Readings (`seepd_reading`, `seepd_input`) are exported.
    #[serde(skip)]
    pub readings: bool,
    /// Derived values (`seepd_derived`) are exported.
    #[serde(skip)]
    pub derived: bool,
    /// `enabled = false` keeps the section but neither queues nor sends.
    pub enabled: bool,
    /// Retry backoff after a failed write: first delay and cap.
    #[serde(deserialize_with = "de::via::<Int<1, { limits::BACKOFF_MS }>, _, _>")]
    pub retry_min_ms: u64,
    #[serde(deserialize_with = "de::via::<Int<1, { limits::BACKOFF_MS }>, _, _>")]
    pub retry_max_ms: u64,
    /// Whole-request timeout of one write.
    #[serde(deserialize_with = "de::via::<Int<1, { limits::EXPORT_MS }>, _, _>")]
    pub timeout_ms: u64,
}

impl Default for Export {
    /// The defaults; `url`, `org`, `bucket` and the token are required.
    fn default() -> Self {
        Export {
            url: String::new(),
            org: String::new(),
            bucket: String::new(),
            token: Secret::default(),
            ca_file: None,
            batch_size: 5000,
            flush_interval_ms: 1000,
            readings: true,
            derived: true,
            enabled: true,
            retry_min_ms: 500,
            retry_max_ms: 30_000,
            timeout_ms: 10_000,
        }
    }
}

/// TLS to the broker.
#[derive(Debug, Clone)]
pub struct Tls {
    pub ca_file: PathBuf,
    /// Client certificate and key (PEM) for mutual TLS.
    pub client_cert_file: Option<PathBuf>,
    pub client_key_file: Option<PathBuf>,
}

/// Payload format of a subscription.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum PayloadFormat {
    Json,
    Senml,
    Csv,
}

impl PayloadFormat {
    /// The name as written in `format = "..."`.
    #[must_use]
    pub fn name(self) -> &'static str {
        super::de::variants::<PayloadFormat>()[self as usize]
    }
}

/// How numeric timestamps are read.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
pub enum EpochUnit {
    /// Seconds below 1e11, milliseconds above.
    #[serde(rename = "auto")]
    Auto,
    #[serde(rename = "s")]
    Seconds,
    #[serde(rename = "ms")]
    Milliseconds,
}

/// Field names of the JSON payload format (`[subscription.json]`, read straight into this).
#[derive(Debug, Clone, serde::Deserialize)]
#[serde(default)]
pub struct JsonFields {
    /// Time of the reading (RFC 3339 string or epoch number). Missing → arrival time, flagged.
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub time: String,
    /// Instrument id in the payload (optional way of mapping).
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub instrument: String,
    /// Logger channel in the payload.
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub channel: String,
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub value: String,
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub temperature: String,
    /// When present, an array of per-channel objects (several channels per message).
    #[serde(deserialize_with = "de::via::<Text, _, _>")]
    pub readings: String,
}

impl Default for JsonFields {
    /// The field names documented in `config/seepd.toml`.
    fn default() -> Self {
        JsonFields {
            time: "time".into(),
            instrument: "instrument".into(),
            channel: "channel".into(),
            value: "value".into(),
            temperature: "temperature".into(),
            readings: "readings".into(),
        }
    }
}

/// One subscription: a topic pattern with named placeholders, a payload format and a mapping.
#[derive(Debug, Clone)]
pub struct Subscription {
    /// Pattern with `{logger}`, `{channel}`, `{instrument}` or `{site}` placeholders, each one
    /// whole topic level, e.g. `field/{site}/{logger}/json`.
    pub pattern: String,
    /// The MQTT filter derived from the pattern (placeholders become `+`).
    pub filter: String,
    pub qos: u8,
    pub format: PayloadFormat,
    pub epoch_unit: EpochUnit,
    pub json: JsonFields,
}

/// Units for display (reports, emails, summaries).
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum DisplayUnits {
    Si,
    Us,
}

/// A site: a dam or a levee system, one file in the config directory.
#[derive(Debug, Clone)]
pub struct Site {
    pub id: String,
    pub name: String,
    /// IANA time zone name for reports (kept as text; time is UTC inside).
    pub time_zone: String,
    /// Unit weight of water (kN/m³): 9.81 default; 9.80665 and 9.802258 (62.4 pcf) allowed.
    pub gamma_w_kn_m3: f64,
    pub display_units: DisplayUnits,
    /// The file this site came from (for messages).
    pub file: PathBuf,
}

/// Where an instrument sits.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Location {
    pub reach: Option<String>,
    pub section: Option<String>,
    pub station_m: Option<f64>,
    pub offset_m: Option<f64>,
}

pub use crate::domain::units::{LengthUnit, PressureUnit};

/// What a vibrating-wire logger channel reports.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum VwReading {
    FrequencyHz,
    PeriodS,
    PeriodUs,
    Digits,
}

/// Sign convention of the linear vibrating-wire reduction.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum VwSign {
    /// `P = G·(R0 − R1) + ...` (pressure rises as digits fall).
    ZeroMinusCurrent,
    /// `P = G·(R1 − R0) + ...`.
    CurrentMinusZero,
}

/// Calibration form of a vibrating-wire piezometer.
#[derive(Debug, Clone, PartialEq)]
pub enum VwCalibration {
    /// `P = G·(R0 − R1)` or `G·(R1 − R0)`; G in the calibration pressure unit per digit.
    Linear {
        gauge_factor: f64,
        zero_reading_digits: f64,
        sign: VwSign,
    },
    /// `P = A·R1² + B·R1 + C`.
    Polynomial { a: f64, b: f64, c: f64 },
}

/// Barometric compensation of a pressure sensor.
#[derive(Debug, Clone, PartialEq)]
pub enum BaroCorrection {
    /// Vented gauge or none wanted.
    None,
    /// Sealed gauge: subtract `(S1 − S0)`; S0 the barometric pressure at the zero reading.
    Sealed { barometer: String, zero_kpa: f64 },
    /// Absolute sensor: subtract `S1`.
    Absolute { barometer: String },
}

impl BaroCorrection {
    /// The barometer this correction reads, if any.
    pub fn barometer(&self) -> Option<&str> {
        match self {
            BaroCorrection::None => None,
            BaroCorrection::Sealed { barometer, .. } | BaroCorrection::Absolute { barometer } => {
                Some(barometer)
            }
        }
    }
}

/// Vibrating-wire piezometer settings.
#[derive(Debug, Clone, PartialEq)]
pub struct VibratingWire {
    pub reading: VwReading,
    pub calibration: VwCalibration,
    /// Unit the calibration produces (G, A, B, C and K are in this unit).
    pub calibration_unit: PressureUnit,
    /// Thermal factor K (calibration unit per °C) and T0 (°C); K = 0 disables it.
    pub thermal_factor: f64,
    pub zero_temperature_c: f64,
    pub baro: BaroCorrection,
}

/// Output of a pressure transducer.
#[derive(Debug, Clone, PartialEq)]
pub enum TransducerOutput {
    /// Reads pressure directly in this unit.
    Pressure(PressureUnit),
    /// 4–20 mA (or another current span) mapped linearly onto a pressure span.
    Current {
        ma_low: f64,
        ma_high: f64,
        p_low: f64,
        p_high: f64,
        unit: PressureUnit,
    },
}

/// Pressure transducer settings.
#[derive(Debug, Clone, PartialEq)]
pub struct Transducer {
    pub output: TransducerOutput,
    pub baro: BaroCorrection,
}

/// Standpipe / open well: depth to water below a reference point (top of casing).
#[derive(Debug, Clone, PartialEq)]
pub struct Standpipe {
    pub reference_elevation_m: f64,
    pub depth_unit: LengthUnit,
}

/// How a stage gauge reports.
#[derive(Debug, Clone, PartialEq)]
pub enum StageMode {
    /// Water-surface elevation directly, in this unit.
    Elevation(LengthUnit),
    /// Depth above a datum elevation (m).
    DepthAboveDatum { datum_m: f64, unit: LengthUnit },
}

/// Which water body a stage gauge reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum WaterBody {
    Reservoir,
    River,
    Tailwater,
    Pond,
}

/// Stage gauge settings.
#[derive(Debug, Clone, PartialEq)]
pub struct StageGauge {
    pub mode: StageMode,
    pub water_body: WaterBody,
}

/// Barometer settings.
#[derive(Debug, Clone, PartialEq)]
pub struct Barometer {
    pub unit: PressureUnit,
}

/// Instrument kinds with their reduction settings.
#[derive(Debug, Clone, PartialEq)]
pub enum Kind {
    VibratingWire(VibratingWire),
    Transducer(Transducer),
    Standpipe(Standpipe),
    StageGauge(StageGauge),
    Barometer(Barometer),
}

impl Kind {
    /// Short stable name used in the database, summaries and output.
    pub fn name(&self) -> &'static str {
        match self {
            Kind::VibratingWire(_) => "vibrating_wire",
            Kind::Transducer(_) => "pressure_transducer",
            Kind::Standpipe(_) => "standpipe",
            Kind::StageGauge(_) => "stage_gauge",
            Kind::Barometer(_) => "barometer",
        }
    }

    /// The barometer this instrument's reduction needs, if any.
    pub fn barometer(&self) -> Option<&str> {
        match self {
            Kind::VibratingWire(v) => v.baro.barometer(),
            Kind::Transducer(t) => t.baro.barometer(),
            _ => None,
        }
    }
}

/// One instrument, validated.
#[derive(Debug, Clone)]
pub struct Instrument {
    pub id: String,
    pub site: String,
    pub kind: Kind,
    pub location: Location,
    /// Tip elevation (piezometers; standpipes: bottom of the screened zone, optional).
    pub tip_elevation_m: Option<f64>,
    /// Readings dated before this are quarantined.
    pub installed: DateTime<Utc>,
    /// Date of the last calibration (key `calibrated`), when the site file gives it.
    pub calibrated: Option<DateTime<Utc>>,
    /// Expected interval between readings (s).
    pub interval_s: u64,
    /// Physical range of the raw value, in the raw value's own unit (Hz, digits, kPa, mA, m...).
    pub raw_range: (f64, f64),
    /// Logger and channel that carry this instrument (for topic/channel mapping).
    pub logger: Option<String>,
    pub channel: Option<String>,
}

// Trends, stage-response and HST models, sensor health (per-site settings and model tables).
mod trends;
pub use trends::*;

// Report schedules (`[[report]]`).
mod report;
pub use report::*;

/// Nested piezometers at one location: vertical gradients between adjacent tips and overall.
#[derive(Debug, Clone, PartialEq)]
pub struct Nest {
    /// Object id (unique among instruments and objects across all sites).
    pub id: String,
    pub site: String,
    /// Piezometer ids (two or more), any order; sorted by tip elevation when computed.
    pub piezometers: Vec<String>,
    /// |i| below this is reported as no vertical flow.
    pub deadband: f64,
    /// Inputs must be within this many seconds of the triggering reading.
    pub tolerance_s: i64,
}

/// A water level that is either measured by a gauge or fixed.
#[derive(Debug, Clone, PartialEq)]
pub enum Level {
    /// Read from this stage gauge's latest water elevation.
    Gauge(String),
    /// A fixed elevation (m).
    Fixed(f64),
}

/// How the critical gradient of the top blanket is given.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum CriticalGradientFrom {
    /// Saturated unit weight (kN/m³); i_c = (γsat − γw)/γw.
    UnitWeight { gamma_sat_kn_m3: f64 },
    /// Specific gravity of solids and void ratio; i_c = (Gs − 1)/(1 + e).
    GsE {
        specific_gravity: f64,
        void_ratio: f64,
    },
}

/// A toe check: exit gradient and factor of safety against heave/piping at a levee landside toe
/// or a dam downstream toe.
#[derive(Debug, Clone, PartialEq)]
pub struct ToeCheck {
    pub id: String,
    pub site: String,
    /// Piezometer measuring the head at the base of the top blanket.
    pub piezometer: String,
    /// Landside (downstream) ground elevation at the toe (m).
    pub ground_elevation_m: f64,
    /// Ponded or tail water over the toe, if any.
    pub water: Option<Level>,
    /// Top blanket thickness z_t (m).
    pub blanket_thickness_m: f64,
    pub critical: CriticalGradientFrom,
    /// Target factor of safety for the allowable head (e.g. 1.6).
    pub fs_target: f64,
    pub tolerance_s: i64,
}

/// Riverside entrance condition for blanket theory.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RiversideCase {
    /// Semipervious riverside blanket of length L1 to the river or a borrow pit (m).
    OpenEntranceAt { l1_m: f64 },
    /// No riverside blanket.
    NoBlanket,
    /// Impervious riverside blanket of length L1 (m).
    Impervious { l1_m: f64 },
}

/// Landside exit condition for blanket theory.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LandsideCase {
    Endless,
    SeepageBlockAt { l3_m: f64 },
    OpenExitAt { l3_m: f64 },
    Impervious { l3_m: f64 },
}

/// A levee reach analysed with blanket theory (EM 1110-2-1913 App. B), compared with the
/// measured head at the toe.
#[derive(Debug, Clone, PartialEq)]
pub struct BlanketReach {
    pub id: String,
    pub site: String,
    /// River stage gauge.
    pub river_gauge: String,
    /// Landside level (ground or ponded water) against which H and h_o are measured (m).
    pub landside_level: Level,
    /// Piezometer at the landside toe at the base of the top blanket (optional comparison).
    pub toe_piezometer: Option<String>,
    /// Base width of the levee L2 (m).
    pub base_width_m: f64,
    /// Pervious foundation thickness d (m).
    pub foundation_thickness_m: f64,
    pub k_foundation_m_s: f64,
    pub k_blanket_m_s: f64,
    /// Top blanket thickness z_bl (m).
    pub blanket_thickness_m: f64,
    pub riverside: RiversideCase,
    pub landside: LandsideCase,
    /// Distances landward of the toe at which the expected head is reported.
    pub distances: Vec<LandwardDistance>,
    pub tolerance_s: i64,
}

/// A distance landward of a blanket reach's toe, with the name its quantity carries.
#[derive(Debug, Clone, PartialEq)]
pub struct LandwardDistance {
    pub m: f64,
    /// The configured value as written with the site's length unit (`50ft`, `12.5m`), so a
    /// quantity is named `expected_excess_head_at_50ft`, never from a converted float.
    pub label: String,
}

impl LandwardDistance {
    /// The quantity reported at this distance: `expected_excess_head_at_50ft`.
    pub fn quantity(&self) -> String {
        format!("expected_excess_head_at_{}", self.label)
    }
}

/// An instrumented cross-section: ground polyline, pool gauge upstream, tail water downstream,
/// piezometers at (station, tip elevation) from their instrument locations.
#[derive(Debug, Clone, PartialEq)]
pub struct Section {
    pub id: String,
    pub site: String,
    /// Ground surface (station m, elevation m), stations increasing upstream → downstream.
    pub ground: Vec<(f64, f64)>,
    pub pool_gauge: String,
    pub tail: Option<Level>,
    /// Downstream toe station (m).
    pub toe_station_m: f64,
    /// Piezometer ids on this section (each has a station in its location).
    pub piezometers: Vec<String>,
    pub tolerance_s: i64,
    /// The seepage model (`[section.model]`), if one is written.
    pub model: Option<super::section_model::SeepageSpec>,
}

/// All derived-quantity objects of the configuration, one list per kind
/// (`crate::objkind::ObjectKind`); `of_kind` and `push` are the exhaustive matches.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Objects {
    pub nests: Vec<Nest>,
    pub toes: Vec<ToeCheck>,
    pub blankets: Vec<BlanketReach>,
    pub sections: Vec<Section>,
}

/// One validated derived-quantity object, of any kind.
#[derive(Debug, Clone, PartialEq)]
pub enum Object {
    Nest(Nest),
    Toe(ToeCheck),
    Blanket(BlanketReach),
    Section(Section),
}

impl Object {
    /// The object's tolerance, settled once every site file is read.
    pub(crate) fn set_tolerance(&mut self, t: i64) {
        match self {
            Object::Nest(c) => c.tolerance_s = t,
            Object::Toe(c) => c.tolerance_s = t,
            Object::Blanket(c) => c.tolerance_s = t,
            Object::Section(c) => c.tolerance_s = t,
        }
    }
}

/// One configured object, borrowed, of any kind. Outputs that show objects (`report::data`,
/// the web pages) match on it, so a new kind makes them say what they show of it.
#[derive(Debug, Clone, Copy)]
pub enum ObjectRef<'a> {
    Nest(&'a Nest),
    Toe(&'a ToeCheck),
    Blanket(&'a BlanketReach),
    Section(&'a Section),
}

impl<'a> ObjectRef<'a> {
    /// Its kind.
    pub fn kind(self) -> ObjectKind {
        match self {
            ObjectRef::Nest(_) => ObjectKind::Nest,
            ObjectRef::Toe(_) => ObjectKind::Toe,
            ObjectRef::Blanket(_) => ObjectKind::Blanket,
            ObjectRef::Section(_) => ObjectKind::Section,
        }
    }

    /// Its id and site.
    fn names(self) -> (&'a str, &'a str) {
        match self {
            ObjectRef::Nest(x) => (&x.id, &x.site),
            ObjectRef::Toe(x) => (&x.id, &x.site),
            ObjectRef::Blanket(x) => (&x.id, &x.site),
            ObjectRef::Section(x) => (&x.id, &x.site),
        }
    }

    /// Its id.
    pub fn id(self) -> &'a str {
        self.names().0
    }

    /// Its site.
    pub fn site(self) -> &'a str {
        self.names().1
    }
}

impl Objects {
    /// The section `id`, if configured.
    pub fn section(&self, id: &str) -> Option<&Section> {
        self.sections.iter().find(|s| s.id == id)
    }

    /// Add one object to its kind's list.
    pub fn push(&mut self, o: Object) {
        match o {
            Object::Nest(c) => self.nests.push(c),
            Object::Toe(t) => self.toes.push(t),
            Object::Blanket(b) => self.blankets.push(b),
            Object::Section(s) => self.sections.push(s),
        }
    }

    /// Every object of `kind`, in configuration order: the one exhaustive match on the lists.
    pub fn of_kind(&self, kind: ObjectKind) -> Vec<ObjectRef<'_>> {
        fn refs<'a, T>(v: &'a [T], f: fn(&'a T) -> ObjectRef<'a>) -> Vec<ObjectRef<'a>> {
            v.iter().map(f).collect()
        }
        match kind {
            ObjectKind::Nest => refs(&self.nests, ObjectRef::Nest),
            ObjectKind::Toe => refs(&self.toes, ObjectRef::Toe),
            ObjectKind::Blanket => refs(&self.blankets, ObjectRef::Blanket),
            ObjectKind::Section => refs(&self.sections, ObjectRef::Section),
        }
    }

    /// Every object, kinds in registry order (`ObjectKind::ALL`).
    pub fn iter(&self) -> impl Iterator<Item = ObjectRef<'_>> {
        ObjectKind::ALL.into_iter().flat_map(|k| self.of_kind(k))
    }

    /// The object `id`, of whatever kind.
    pub fn get(&self, id: &str) -> Option<ObjectRef<'_>> {
        self.iter().find(|o| o.id() == id)
    }

    /// The (id, site) of every object of `kind`.
    pub fn of(&self, kind: ObjectKind) -> Vec<(&str, &str)> {
        let of = self.of_kind(kind).into_iter();
        of.map(|o| (o.id(), o.site())).collect()
    }

    /// Every object as (kind, id, site), kinds in registry order.
    pub fn all(&self) -> impl Iterator<Item = (ObjectKind, &str, &str)> {
        self.iter().map(|o| (o.kind(), o.id(), o.site()))
    }
}
