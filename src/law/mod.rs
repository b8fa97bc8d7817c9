//! Coupling laws: how hard a neighbour `Δ` counts ahead pulls on this node.
//!
//! A law maps the wrapped phase difference `Δ = θ_neighbour − θ_self` (counts, see
//! [`Phase::diff`](crate::Phase::diff)) to a pull in counts. Every law here is *odd*
//! (`pull(-Δ) == -pull(Δ)`, so two nodes with equal gains pull each other by equal and
//! opposite amounts) and has slope 1 at `Δ = 0`, so the per-update gain `kp` means the
//! same thing under every law in the small-signal regime: ε of x⁺ = (I − εL)x.
//!
//! | law | pull(Δ) | FPU | bit-exact across targets |
//! |---|---|---|---|
//! | [`Linear`] | Δ (0 at exactly half a turn) | no | yes |
//! | [`Sine`] | (2^32/2π)·sin(2πΔ/2^32), integer polynomial | no | yes |
//! | `SineLibm` (feature `libm`) | the same through `libm::sinf` | `f32` | no promise |
//! | `SineMicromath` (feature `micromath`) | the same through `micromath` | `f32` | no promise |

mod linear;
mod sine;
#[cfg(feature = "libm")]
mod sine_libm;
#[cfg(feature = "micromath")]
mod sine_micromath;

pub use linear::Linear;
pub use sine::{SINE_AMPLITUDE, SINE_MAX_ERROR, Sine, sine_pull};
#[cfg(feature = "libm")]
pub use sine_libm::SineLibm;
#[cfg(feature = "micromath")]
pub use sine_micromath::SineMicromath;

/// One coupling law: a pure, odd function of the wrapped phase difference.
///
/// To add a law: a unit struct implementing this trait in its own file, a variant in
/// [`Law`], and one arm in [`Law::pull`] and in the node's dispatch.
pub trait Coupling {
    /// The pull, in counts, exerted by a neighbour `diff` counts ahead.
    /// Must be odd and must not panic for any input.
    fn pull(diff: i32) -> i32;
}

/// The coupling law a node runs, chosen in its [`Config`](crate::Config).
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[non_exhaustive]
pub enum Law {
    /// Linear consensus on the wrapped difference.
    Linear,
    /// Sine (Kuramoto-type) coupling, integer path.
    #[default]
    Sine,
    /// Sine coupling through `libm::sinf` (accurate `f32`).
    #[cfg(feature = "libm")]
    SineLibm,
    /// Sine coupling through `micromath` (fast `f32` approximation).
    #[cfg(feature = "micromath")]
    SineMicromath,
}

impl Law {
    /// The pull of this law for one difference (dispatches on the variant; the node hoists
    /// this match out of its neighbour loop).
    #[must_use]
    pub fn pull(self, diff: i32) -> i32 {
        match self {
            Law::Linear => Linear::pull(diff),
            Law::Sine => Sine::pull(diff),
            #[cfg(feature = "libm")]
            Law::SineLibm => SineLibm::pull(diff),
            #[cfg(feature = "micromath")]
            Law::SineMicromath => SineMicromath::pull(diff),
        }
    }

    /// True for the integer laws, whose results are identical on every target.
    #[must_use]
    pub const fn is_bit_exact(self) -> bool {
        matches!(self, Law::Linear | Law::Sine)
    }
}
