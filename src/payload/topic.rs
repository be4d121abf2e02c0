//! Topic patterns: turning a subscription pattern into an MQTT filter and matching concrete
//! topics against it, capturing the `{logger}`, `{channel}`, `{instrument}` and `{site}` levels.
//!
//! Patterns are validated by `config`; this module only trusts that placeholders are whole
//! levels. Topics come from the broker and are treated as untrusted text: matching never panics.

/// Values captured from a topic by a subscription pattern.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct TopicFields {
    /// Captured by `{logger}`: the datalogger that published the message.
    pub logger: Option<String>,
    /// Captured by `{channel}`: the logger channel the message is about.
    pub channel: Option<String>,
    /// Captured by `{instrument}`: an instrument id, which maps without a channel table.
    pub instrument: Option<String>,
    /// Captured by `{site}`: the site id, for messages and checks.
    pub site: Option<String>,
}

/// The placeholder name of a pattern level (`{logger}` → `logger`), or None for a literal.
fn placeholder(level: &str) -> Option<&str> {
    level.strip_prefix('{')?.strip_suffix('}')
}

/// The MQTT filter for a pattern: each `{name}` level becomes `+`.
pub fn pattern_to_filter(pattern: &str) -> String {
    pattern
        .split('/')
        .map(|level| {
            if placeholder(level).is_some() {
                "+"
            } else {
                level
            }
        })
        .collect::<Vec<_>>()
        .join("/")
}

/// Match a concrete topic against a pattern (levels split on '/'; a placeholder level matches any
/// one non-empty level; literal levels must be equal). None if it does not match.
///
/// Unknown placeholder names match any non-empty level and capture nothing. A placeholder that
/// appears twice must capture the same text both times.
pub fn match_topic(pattern: &str, topic: &str) -> Option<TopicFields> {
    let mut pattern_levels = pattern.split('/');
    let mut topic_levels = topic.split('/');
    let mut fields = TopicFields::default();
    loop {
        match (pattern_levels.next(), topic_levels.next()) {
            (None, None) => return Some(fields),
            (Some(p), Some(t)) => match placeholder(p) {
                Some(name) => {
                    if t.is_empty() {
                        return None;
                    }
                    let slot = match name {
                        "logger" => &mut fields.logger,
                        "channel" => &mut fields.channel,
                        "instrument" => &mut fields.instrument,
                        "site" => &mut fields.site,
                        _ => continue,
                    };
                    match slot {
                        Some(previous) if previous != t => return None,
                        _ => *slot = Some(t.to_string()),
                    }
                }
                None if p == t => {}
                None => return None,
            },
            // Different numbers of levels.
            _ => return None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn filter_replaces_each_placeholder_level() {
        assert_eq!(pattern_to_filter("demo/{logger}/json"), "demo/+/json");
        assert_eq!(
            pattern_to_filter("field/{site}/{logger}/{channel}"),
            "field/+/+/+"
        );
        assert_eq!(pattern_to_filter("plain/topic"), "plain/topic");
        // Only whole-level placeholders are replaced.
        assert_eq!(pattern_to_filter("a/x{logger}/b"), "a/x{logger}/b");
    }

    #[test]
    fn match_captures_named_levels() {
        let f = match_topic("field/{site}/{logger}/{channel}", "field/tarn/L7/4").expect("match");
        assert_eq!(f.site.as_deref(), Some("tarn"));
        assert_eq!(f.logger.as_deref(), Some("L7"));
        assert_eq!(f.channel.as_deref(), Some("4"));
        assert_eq!(f.instrument, None);

        let f = match_topic("x/{instrument}", "x/PZ-12").expect("match");
        assert_eq!(f.instrument.as_deref(), Some("PZ-12"));
    }

    #[test]
    fn literal_mismatch_does_not_match() {
        assert_eq!(match_topic("demo/{logger}/json", "demo/L1/csv"), None);
        assert_eq!(match_topic("demo/{logger}/json", "Demo/L1/json"), None);
    }

    #[test]
    fn different_level_counts_do_not_match() {
        assert_eq!(
            match_topic("demo/{logger}/json", "demo/L1/json/extra"),
            None
        );
        assert_eq!(match_topic("demo/{logger}/json", "demo/json"), None);
        assert_eq!(match_topic("demo/{logger}/json", "demo/L1/json/"), None);
        assert_eq!(match_topic("demo/{logger}", ""), None);
    }

    #[test]
    fn placeholder_needs_a_non_empty_level() {
        assert_eq!(match_topic("demo/{logger}/json", "demo//json"), None);
        assert_eq!(match_topic("{logger}/json", "/json"), None);
    }

    #[test]
    fn empty_literal_levels_match_each_other() {
        let f = match_topic("/lead/{logger}", "/lead/L2").expect("match");
        assert_eq!(f.logger.as_deref(), Some("L2"));
    }

    #[test]
    fn unknown_placeholder_matches_but_captures_nothing() {
        let f = match_topic("a/{thing}/{logger}", "a/x/L3").expect("match");
        assert_eq!(f.logger.as_deref(), Some("L3"));
        assert_eq!(match_topic("a/{thing}", "a/"), None);
    }

    #[test]
    fn repeated_placeholder_must_agree() {
        assert!(match_topic("{logger}/x/{logger}", "L1/x/L1").is_some());
        assert_eq!(match_topic("{logger}/x/{logger}", "L1/x/L2"), None);
    }

    #[test]
    fn filter_and_match_agree_on_examples() {
        let pattern = "demo/{logger}/senml";
        assert_eq!(pattern_to_filter(pattern), "demo/+/senml");
        assert!(match_topic(pattern, "demo/logger-01/senml").is_some());
    }
}
