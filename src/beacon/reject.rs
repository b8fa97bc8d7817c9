//! Why a received beacon was refused, and counters of refusals by kind for telemetry.

use core::fmt;

use super::{DecodeError, WindowReject};

/// Why a received beacon was refused. Every kind is counted in [`RejectCounts`].
#[non_exhaustive]
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum RejectKind {
    /// Fewer bytes than a frame (cut off on the wire).
    TooShort,
    /// More bytes than a frame (two frames run together, or framing lost).
    TooLong,
    /// A frame version this receiver does not read (a newer sender).
    UnsupportedVersion,
    /// The CRC-32C did not match: damaged on the wire.
    BadCheck,
    /// The CRC matched but the authentication tag did not: forged, or from another network.
    BadTag,
    /// A frame with the receiver's own id: its own echo, or someone posing as it.
    OwnId,
    /// A sequence number already accepted from this sender: a duplicate or a replay.
    Duplicate,
    /// A sequence number further behind this sender's newest than the window remembers:
    /// an old frame replayed, or one held up far too long.
    TooOld,
    /// Not seen before but older than the newest frame already accepted from this sender;
    /// its phase is superseded, so it is not used.
    Late,
    /// A sender not heard before, and every replay-window slot is held by a sender heard
    /// within the stale time.
    PeersFull,
    /// The node's neighbour table refused the observation (full).
    NodeFull,
    /// Received later than the node's clock by more than its timeout
    /// ([`ObserveError::FromTheFuture`](crate::ObserveError::FromTheFuture)): the
    /// receive time handed in is wrong, or the node was not advanced for too long.
    FromTheFuture,
}

impl RejectKind {
    /// Every kind, in the order of [`RejectCounts::iter`].
    pub const ALL: [RejectKind; 12] = [
        RejectKind::TooShort,
        RejectKind::TooLong,
        RejectKind::UnsupportedVersion,
        RejectKind::BadCheck,
        RejectKind::BadTag,
        RejectKind::OwnId,
        RejectKind::Duplicate,
        RejectKind::TooOld,
        RejectKind::Late,
        RejectKind::PeersFull,
        RejectKind::NodeFull,
        RejectKind::FromTheFuture,
    ];

    /// A short lower-case name for logs and telemetry keys (`"bad_check"`, ...).
    pub const fn name(self) -> &'static str {
        match self {
            RejectKind::TooShort => "too_short",
            RejectKind::TooLong => "too_long",
            RejectKind::UnsupportedVersion => "unsupported_version",
            RejectKind::BadCheck => "bad_check",
            RejectKind::BadTag => "bad_tag",
            RejectKind::OwnId => "own_id",
            RejectKind::Duplicate => "duplicate",
            RejectKind::TooOld => "too_old",
            RejectKind::Late => "late",
            RejectKind::PeersFull => "peers_full",
            RejectKind::NodeFull => "node_full",
            RejectKind::FromTheFuture => "from_the_future",
        }
    }

    /// Position in [`RejectKind::ALL`].
    const fn index(self) -> usize {
        self as usize
    }
}

impl From<DecodeError> for RejectKind {
    fn from(e: DecodeError) -> RejectKind {
        match e {
            DecodeError::TooShort { .. } => RejectKind::TooShort,
            DecodeError::TooLong { .. } => RejectKind::TooLong,
            DecodeError::UnsupportedVersion { .. } => RejectKind::UnsupportedVersion,
            DecodeError::BadCheck => RejectKind::BadCheck,
            DecodeError::BadTag => RejectKind::BadTag,
        }
    }
}

impl From<WindowReject> for RejectKind {
    fn from(e: WindowReject) -> RejectKind {
        match e {
            WindowReject::Duplicate => RejectKind::Duplicate,
            WindowReject::TooOld { .. } => RejectKind::TooOld,
        }
    }
}

impl fmt::Display for RejectKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            RejectKind::TooShort => "beacon refused: shorter than a frame",
            RejectKind::TooLong => "beacon refused: longer than a frame",
            RejectKind::UnsupportedVersion => "beacon refused: frame version not supported",
            RejectKind::BadCheck => "beacon refused: CRC-32C check failed",
            RejectKind::BadTag => "beacon refused: authentication tag does not match the key",
            RejectKind::OwnId => "beacon refused: carries this node's own id",
            RejectKind::Duplicate => "beacon refused: sequence number already accepted",
            RejectKind::TooOld => "beacon refused: sequence number behind the replay window",
            RejectKind::Late => "beacon refused: older than a frame already accepted",
            RejectKind::PeersFull => "beacon refused: replay-window table full of live senders",
            RejectKind::NodeFull => "beacon refused: node neighbour table full",
            RejectKind::FromTheFuture => {
                "beacon refused: received later than the node's clock by more than the timeout"
            }
        })
    }
}

impl core::error::Error for RejectKind {}

/// Refusals counted by [`RejectKind`], saturating at `u32::MAX`.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
pub struct RejectCounts {
    counts: [u32; RejectKind::ALL.len()],
}

impl RejectCounts {
    /// All counters at zero.
    pub const fn new() -> RejectCounts {
        RejectCounts {
            counts: [0; RejectKind::ALL.len()],
        }
    }

    /// Counts one refusal of `kind`.
    pub fn record(&mut self, kind: RejectKind) {
        if let Some(c) = self.counts.get_mut(kind.index()) {
            *c = c.saturating_add(1);
        }
    }

    /// Refusals of `kind` so far.
    pub fn count(&self, kind: RejectKind) -> u32 {
        self.counts.get(kind.index()).copied().unwrap_or(0)
    }

    /// Refusals of every kind together (saturating).
    pub fn total(&self) -> u32 {
        self.counts.iter().fold(0u32, |a, &c| a.saturating_add(c))
    }

    /// `(kind, count)` for every kind, in the order of [`RejectKind::ALL`].
    pub fn iter(&self) -> impl Iterator<Item = (RejectKind, u32)> + '_ {
        RejectKind::ALL
            .iter()
            .zip(self.counts.iter())
            .map(|(&k, &c)| (k, c))
    }

    /// Sets every counter back to zero.
    pub fn clear(&mut self) {
        *self = RejectCounts::new();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_lists_every_kind_at_its_own_index() {
        for (i, k) in RejectKind::ALL.iter().enumerate() {
            assert_eq!(k.index(), i, "{k:?}");
        }
    }

    #[test]
    fn names_are_distinct() {
        for (i, a) in RejectKind::ALL.iter().enumerate() {
            for b in RejectKind::ALL.iter().skip(i + 1) {
                assert_ne!(a.name(), b.name());
            }
        }
    }

    #[test]
    fn counts_by_kind_and_saturates() {
        let mut c = RejectCounts::new();
        c.record(RejectKind::BadCheck);
        c.record(RejectKind::BadCheck);
        c.record(RejectKind::Duplicate);
        assert_eq!(c.count(RejectKind::BadCheck), 2);
        assert_eq!(c.count(RejectKind::Duplicate), 1);
        assert_eq!(c.count(RejectKind::BadTag), 0);
        assert_eq!(c.total(), 3);
        let listed: u32 = c.iter().map(|(_, n)| n).sum();
        assert_eq!(listed, 3);
        c.counts[0] = u32::MAX;
        c.record(RejectKind::TooShort);
        assert_eq!(c.count(RejectKind::TooShort), u32::MAX);
        assert_eq!(c.total(), u32::MAX);
        c.clear();
        assert_eq!(c.total(), 0);
    }

    #[test]
    fn decode_and_window_errors_map_to_their_kinds() {
        assert_eq!(
            RejectKind::from(DecodeError::TooShort { len: 3 }),
            RejectKind::TooShort
        );
        assert_eq!(
            RejectKind::from(DecodeError::UnsupportedVersion { found: 9 }),
            RejectKind::UnsupportedVersion
        );
        assert_eq!(RejectKind::from(DecodeError::BadTag), RejectKind::BadTag);
        assert_eq!(
            RejectKind::from(WindowReject::TooOld { behind: 70 }),
            RejectKind::TooOld
        );
        assert_eq!(
            RejectKind::from(WindowReject::Duplicate),
            RejectKind::Duplicate
        );
    }
}
