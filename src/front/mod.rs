//! Front end: from samples to an envelope the edge stage can read.
//!
//! [`envelope`] is the whole-band detector (magnitude of every IQ sample, or the recorded
//! envelope), integrated and dumped down to an analysis rate.

pub mod envelope;
