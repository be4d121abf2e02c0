//! Reading quality: the reason codes for quarantined input and the flags stored with readings.
//!
//! Owns the vocabulary only; deciding *when* a code or flag applies belongs to the decoders and
//! the engine.

use std::fmt;

/// Why an input went to quarantine. The `code()` strings are stable: they are stored in the
/// database, counted, logged and documented in the README.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Reason {
    /// Payload is not valid JSON / SenML / CSV, or lacks a required field.
    Malformed,
    /// Payload larger than `max_payload_bytes`.
    Oversized,
    /// Topic matches no subscription pattern.
    UnknownTopic,
    /// No configured instrument matches the id or (logger, channel).
    UnknownInstrument,
    /// Value is NaN or ±Inf.
    NonFinite,
    /// Raw value outside the instrument's physical range.
    OutOfRange,
    /// Timestamp unreadable.
    BadTime,
    /// Timestamp more than `max_future_s` after arrival.
    TimeInFuture,
    /// Timestamp before the instrument's install date.
    BeforeInstall,
    /// The reading cannot be reduced (e.g. a thermal correction without a temperature).
    Unreducible,
    /// A SenML pack of a newer version than this decoder implements (RFC 8428 `bver` > 10).
    UnsupportedVersion,
    /// A reading for an (instrument, time) already stored with another value: the first stored
    /// value is kept, this one is recorded here.
    ConflictingDuplicate,
}

impl Reason {
    /// Every reason, in a stable order (for counters and docs).
    pub const ALL: [Reason; 12] = [
        Reason::Malformed,
        Reason::Oversized,
        Reason::UnknownTopic,
        Reason::UnknownInstrument,
        Reason::NonFinite,
        Reason::OutOfRange,
        Reason::BadTime,
        Reason::TimeInFuture,
        Reason::BeforeInstall,
        Reason::Unreducible,
        Reason::UnsupportedVersion,
        Reason::ConflictingDuplicate,
    ];

    /// Stable snake_case code.
    pub fn code(self) -> &'static str {
        match self {
            Reason::Malformed => "malformed",
            Reason::Oversized => "oversized",
            Reason::UnknownTopic => "unknown_topic",
            Reason::UnknownInstrument => "unknown_instrument",
            Reason::NonFinite => "non_finite",
            Reason::OutOfRange => "out_of_range",
            Reason::BadTime => "bad_time",
            Reason::TimeInFuture => "time_in_future",
            Reason::BeforeInstall => "before_install",
            Reason::Unreducible => "unreducible",
            Reason::UnsupportedVersion => "unsupported_version",
            Reason::ConflictingDuplicate => "conflicting_duplicate",
        }
    }
}

impl fmt::Display for Reason {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.code())
    }
}

/// A rejected input: the reason code and a human-readable detail.
#[derive(Debug, Clone, PartialEq)]
pub struct Reject {
    pub reason: Reason,
    pub detail: String,
}

impl Reject {
    pub fn new(reason: Reason, detail: impl Into<String>) -> Self {
        Reject {
            reason,
            detail: detail.into(),
        }
    }
}

impl fmt::Display for Reject {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.reason.code(), self.detail)
    }
}

/// Quality flags stored with a reading (a bit set). Flagged readings are stored, not rejected.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Hash)]
pub struct Flags(pub u32);

impl Flags {
    /// The payload carried no time; the arrival time was used.
    pub const TIME_FROM_ARRIVAL: Flags = Flags(1);
    /// A barometric correction was configured but no barometer reading was close enough in
    /// time; the value is uncorrected.
    pub const BARO_MISSING: Flags = Flags(1 << 1);
    /// A thermal correction was configured but the reading had no temperature; uncorrected.
    pub const TEMP_MISSING: Flags = Flags(1 << 2);
    /// Sensor health: the head is far from the trailing median (Hampel identifier).
    pub const SPIKE: Flags = Flags(1 << 3);
    /// Sensor health: the last `flatline_count` heads are identical within the tolerance.
    pub const FLATLINE: Flags = Flags(1 << 4);
    /// Sensor health: thermistor temperature implausible or jumped since the last reading.
    pub const THERMISTOR: Flags = Flags(1 << 5);
    /// Stamped more than `clock_skew_s` after its arrival: the logger's clock is ahead of ours.
    /// Stored, but kept out of every clock-driven state (rules, health, rates, derived values)
    /// so that its time cannot make the real readings after it look late.
    pub const TIME_AHEAD: Flags = Flags(1 << 6);
    /// Read by hand and entered with `seepd record` or the web form, not sent by a logger.
    pub const MANUAL: Flags = Flags(1 << 7);

    /// Names of the flags, for output and docs.
    pub const NAMES: [(Flags, &'static str); 8] = [
        (Flags::TIME_FROM_ARRIVAL, "time_from_arrival"),
        (Flags::BARO_MISSING, "baro_missing"),
        (Flags::TEMP_MISSING, "temp_missing"),
        (Flags::SPIKE, "spike"),
        (Flags::FLATLINE, "flatline"),
        (Flags::THERMISTOR, "thermistor"),
        (Flags::TIME_AHEAD, "time_ahead"),
        (Flags::MANUAL, "manual"),
    ];

    pub fn empty() -> Self {
        Flags(0)
    }
    pub fn contains(self, other: Flags) -> bool {
        self.0 & other.0 == other.0
    }
    pub fn insert(&mut self, other: Flags) {
        self.0 |= other.0;
    }
    pub fn is_empty(self) -> bool {
        self.0 == 0
    }
    /// The names of the set flags.
    pub fn names(self) -> Vec<&'static str> {
        Flags::NAMES
            .iter()
            .filter(|(f, _)| self.contains(*f))
            .map(|(_, n)| *n)
            .collect()
    }
}
