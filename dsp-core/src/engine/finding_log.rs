//! The live findings with a memory: when each first appeared and whether it still holds.
//!
//! The live findings of a snapshot say what is wrong now; a reviewer also wants to know what
//! came and went. The log keeps one entry per finding code and channel set, with the time it
//! was first seen (seconds of audio since the start of the analysis or since the log's last
//! reset) and whether the latest snapshot still reports it. It is updated on the analysis
//! thread with each snapshot (never on the audio thread) and published in
//! [`Snapshot::finding_log`](super::Snapshot::finding_log).

use super::snapshot::{Finding, FindingCode};

/// One finding as the log remembers it.
#[derive(Clone, Debug, PartialEq)]
pub struct LoggedFinding {
    /// The finding as last reported (its message may carry counts that changed since).
    pub finding: Finding,
    /// When it first appeared: seconds of audio since the start, or since the last reset.
    pub first_seen_s: f64,
    /// When it was last reported, same clock.
    pub last_seen_s: f64,
    /// Reported by the latest snapshot.
    pub active: bool,
}

/// The log; see the module docs.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FindingLog {
    entries: Vec<LoggedFinding>,
    /// Audio time of the start of the log's clock, seconds.
    origin_s: f64,
    /// The clock restarted at a reset (rather than at the start of the analysis).
    reset: bool,
}

impl FindingLog {
    /// Records the findings reported at audio time `now_s`: new ones are added, known ones
    /// refreshed, the others marked as no longer active. Entries stay ordered most severe
    /// first, then active before past, then by first appearance.
    pub fn update(&mut self, now_s: f64, current: &[Finding]) {
        let clock_s = (now_s - self.origin_s).max(0.0);
        for entry in &mut self.entries {
            entry.active = false;
        }
        for finding in current {
            match self
                .entries
                .iter_mut()
                .find(|e| same_finding(&e.finding, finding.code, &finding.channels))
            {
                Some(entry) => {
                    entry.finding.clone_from(finding);
                    entry.last_seen_s = clock_s;
                    entry.active = true;
                }
                None => self.entries.push(LoggedFinding {
                    finding: finding.clone(),
                    first_seen_s: clock_s,
                    last_seen_s: clock_s,
                    active: true,
                }),
            }
        }
        self.entries.sort_by(|a, b| {
            b.finding
                .severity
                .cmp(&a.finding.severity)
                .then(b.active.cmp(&a.active))
                .then(a.first_seen_s.total_cmp(&b.first_seen_s))
        });
    }

    /// Forgets every entry; first-seen times count from audio time `now_s` on.
    pub fn reset(&mut self, now_s: f64) {
        self.entries.clear();
        self.origin_s = now_s;
        self.reset = true;
    }

    /// The entries, most severe first (see [`update`](Self::update)).
    pub fn entries(&self) -> &[LoggedFinding] {
        &self.entries
    }

    /// True when the clock counts from a reset rather than from the start of the analysis.
    pub fn counts_from_reset(&self) -> bool {
        self.reset
    }
}

fn same_finding(a: &Finding, code: FindingCode, channels: &[usize]) -> bool {
    a.code == code && a.channels == channels
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::Severity;

    fn finding(severity: Severity, code: FindingCode, channels: &[usize], msg: &str) -> Finding {
        Finding {
            severity,
            code,
            message: msg.to_owned(),
            channels: channels.to_vec(),
        }
    }

    #[test]
    fn first_seen_stays_active_follows_and_order_is_by_severity() {
        let mut log = FindingLog::default();
        let dc = finding(Severity::Info, FindingCode::DcOffset, &[2], "dc");
        let over = finding(Severity::Warning, FindingCode::OverOmni, &[3], "over 1");
        let clip = finding(Severity::Error, FindingCode::Clipping, &[0], "clip");
        log.update(1.0, std::slice::from_ref(&dc));
        log.update(2.5, &[dc.clone(), over.clone()]);
        let over_again = Finding {
            message: "over 2".to_owned(),
            ..over.clone()
        };
        log.update(4.0, &[over_again, clip.clone()]);
        let e = log.entries();
        assert_eq!(e.len(), 3);
        assert_eq!(e[0].finding.code, FindingCode::Clipping);
        assert_eq!((e[0].first_seen_s, e[0].active), (4.0, true));
        assert_eq!(e[1].finding.code, FindingCode::OverOmni);
        assert_eq!((e[1].first_seen_s, e[1].last_seen_s), (2.5, 4.0));
        assert_eq!(e[1].finding.message, "over 2", "the latest wording is kept");
        assert_eq!(e[2].finding.code, FindingCode::DcOffset);
        assert_eq!((e[2].first_seen_s, e[2].active), (1.0, false));

        // The same code on other channels is another finding.
        log.update(
            5.0,
            &[finding(Severity::Warning, FindingCode::OverOmni, &[4], "x")],
        );
        assert_eq!(log.entries().len(), 4);
        assert!(!log.counts_from_reset());

        log.reset(10.0);
        assert!(log.entries().is_empty());
        assert!(log.counts_from_reset());
        log.update(12.5, &[dc]);
        assert_eq!(log.entries()[0].first_seen_s, 2.5, "counted from the reset");
    }

    #[test]
    fn active_entries_come_before_past_ones_of_the_same_severity() {
        let mut log = FindingLog::default();
        let a = finding(Severity::Warning, FindingCode::OverOmni, &[1], "a");
        let b = finding(Severity::Warning, FindingCode::OverOmni, &[2], "b");
        log.update(1.0, std::slice::from_ref(&a));
        log.update(2.0, std::slice::from_ref(&b));
        assert_eq!(log.entries()[0].finding.channels, vec![2]);
        assert!(!log.entries()[1].active);
    }
}
