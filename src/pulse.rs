//! A sync-pulse output on an `embedded-hal` 1.0 [`OutputPin`] (feature `hal`).
//!
//! The pin goes high when the node's phase passes through zero and low again
//! `width_ticks` timer ticks later, once per turn. Corrections that step the phase back
//! across zero do not cause a second pulse in the same turn (the node's
//! [`cycles`](crate::Node::cycles) count is net of them).

use crate::Node;
use embedded_hal::digital::OutputPin;

/// What a [`SyncPulse::poll`] did to the pin.
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Edge {
    /// Nothing changed.
    None,
    /// The pin was raised: the phase passed through zero.
    Rising,
    /// The pin was lowered: the pulse width elapsed.
    Falling,
}

/// Drives one output pin with a pulse at every zero crossing of a node's phase.
///
/// Call [`poll`](SyncPulse::poll) after each `advance_to`/`update` of the node (from the
/// timer interrupt, say). The edge lands on the first poll after the crossing; the pulse
/// ends on the first poll at least `width_ticks` after the crossing itself, so the width
/// is accurate to the polling interval.
///
/// ```
/// # use embedded_hal_mock::eh1::digital::{Mock, State, Transaction};
/// use entrain::pulse::{Edge, SyncPulse};
/// use entrain::{Config, Node, Phase};
/// # let pin = Mock::new(&[Transaction::set(State::High), Transaction::set(State::Low)]);
/// let config = Config::builder(1_000, 100).build().unwrap();
/// let mut node: Node<1> = Node::new(config, Phase::from_turns(0.9), 0);
/// let mut pulse = SyncPulse::new(pin, 10, &node);
/// node.advance_to(101); // a tenth of a turn on: passes zero
/// assert_eq!(pulse.poll(&node), Ok(Edge::Rising));
/// node.advance_to(105);
/// assert_eq!(pulse.poll(&node), Ok(Edge::None));
/// node.advance_to(111);
/// assert_eq!(pulse.poll(&node), Ok(Edge::Falling));
/// # pulse.release().done();
/// ```
#[derive(Debug)]
pub struct SyncPulse<P> {
    pin: P,
    width_ticks: u32,
    fired: u32,
    high_until: Option<u32>,
}

impl<P: OutputPin> SyncPulse<P> {
    /// A pulse driver on `pin`, `width_ticks` timer ticks wide (at least 1), armed for the
    /// next zero crossing of `node`. The pin is left as it is until the first edge.
    pub fn new<const N: usize>(pin: P, width_ticks: u32, node: &Node<N>) -> Self {
        SyncPulse {
            pin,
            width_ticks: width_ticks.max(1),
            fired: node.cycles(),
            high_until: None,
        }
    }

    /// Raise or lower the pin as the node's phase requires.
    ///
    /// # Errors
    /// The pin's own error, from `set_high`/`set_low`; the driver's state is unchanged
    /// then, so the next poll tries again.
    pub fn poll<const N: usize>(&mut self, node: &Node<N>) -> Result<Edge, P::Error> {
        let now = node.now_ticks();
        let cycles = node.cycles();
        if cycles.wrapping_sub(self.fired) as i32 > 0 {
            // Ticks since the crossing: phase fraction × ticks per period.
            let since = ((u64::from(node.phase().counts())
                * u64::from(node.config().ticks_per_period()))
                >> 32) as u32;
            self.pin.set_high()?;
            self.fired = cycles;
            self.high_until = Some(now.wrapping_sub(since).wrapping_add(self.width_ticks));
            return Ok(Edge::Rising);
        }
        if let Some(until) = self.high_until {
            if now.wrapping_sub(until) as i32 >= 0 {
                self.pin.set_low()?;
                self.high_until = None;
                return Ok(Edge::Falling);
            }
        }
        Ok(Edge::None)
    }

    /// True while the pulse is high.
    #[must_use]
    pub fn is_high(&self) -> bool {
        self.high_until.is_some()
    }

    /// Give the pin back.
    pub fn release(self) -> P {
        self.pin
    }
}
