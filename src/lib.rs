//! ooksift sifts on-off-keyed (OOK) bursts out of 433 MHz captures: it recovers each button's
//! code, line code and symbol timing, compares codes across transmitters, and measures
//! airtime for energy and duty-cycle budgets.
//!
//! The pipeline, one module per stage (see `DEVELOPERS.md`):
//!
//! ```text
//! source → front → edges → bursts → timing/coding → frames → report
//! ```
//!
//! [`synth`] is the inverse: codes and a channel model in, a capture and its truth out.

pub mod budget;
pub mod bursts;
pub mod coding;
pub mod compare;
pub mod decode;
pub mod edges;
pub mod frames;
pub mod front;
pub mod interchange;
pub mod output;
pub mod plot;
pub mod report;
pub mod rng;
pub mod source;
pub mod synth;
pub mod timing;
pub mod trellis;
pub mod units;
