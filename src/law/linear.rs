//! Linear coupling on the wrapped difference.

use super::Coupling;

/// Linear consensus: the pull is the wrapped difference itself.
///
/// Exactly half a turn (`Δ = -2^31`) has no preferred direction and pulls 0, which keeps
/// the law odd everywhere.
///
/// ```
/// use entrain::law::{Coupling, Linear};
/// assert_eq!(Linear::pull(1234), 1234);
/// assert_eq!(Linear::pull(-1234), -1234);
/// assert_eq!(Linear::pull(i32::MIN), 0);
/// ```
#[derive(Clone, Copy, PartialEq, Eq, Debug, Default)]
pub struct Linear;

impl Coupling for Linear {
    #[inline(always)]
    fn pull(diff: i32) -> i32 {
        if diff == i32::MIN { 0 } else { diff }
    }
}
