//! Alerts: conditions the engineer must not miss. Each has a key, a
//! severity, a message and the stream time it was first raised; it stays on
//! the list (latched) until acknowledged, even after its condition clears.
//! Every raise, clear and acknowledgement is also written as an annotation
//! line in the recording.
//!
//! The book ([`book`]) keeps the list; each family decides whether its
//! conditions hold, from explicit inputs, and is evaluated at every
//! snapshot tick in this order (the order of the annotations depends on
//! it): source health ([`health`]), stale channels, message rates, range
//! and speed agreement ([`staleness`]), physics limits ([`limits`]), and
//! the engineer's own rules ([`rules`]).

pub mod book;
pub mod health;
pub mod limits;
pub mod rules;
pub mod staleness;
pub mod wording;

pub use book::{Alert, AlertBook, Transition};
pub use wording::AlertText;
