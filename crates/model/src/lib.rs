//! The junk model: logistic regression over hashed sparse features.
//!
//! Owns the weights, the two per-coordinate adaptive update rules (AdaGrad
//! and FTRL-Proximal), prediction, explanations and the checkpoint file
//! format. It sees only sparse feature vectors `&[(u32, f32)]`: pairs of a
//! hashed slot index and a value, sorted by index with no index repeated. It
//! knows nothing of HTTP, SQL or text; the text crate turns messages into
//! such vectors and the server's learner task feeds verdicts back in.
//!
//! The model computes `p_junk = sigma(w . x)`, with `sigma` the logistic
//! function. There is no separate bias term: callers that want one add a
//! feature whose value is always 1.
//!
//! What must stay true:
//!
//! * The same examples in the same order give bit-identical state. Nothing
//!   here reads the clock, spawns threads or iterates a hash map. All
//!   arithmetic is plain IEEE 754 `f64` (no fused or reordered operations)
//!   except `exp` in the logistic function, which comes from the platform's
//!   maths library: builds on one platform agree bit for bit, a different
//!   maths library may differ in the last bit of `p_junk`.
//! * Every stored number is finite, so a checkpoint can always be written and
//!   read back.
//! * `predict` and `learn` never allocate and never panic, whatever the
//!   indices and values they are given.

mod batch;
pub mod checkpoint;
mod logistic;
mod model;
mod rule;
mod table;
mod update;

pub use batch::BatchFit;
pub use checkpoint::{
    CheckpointError, CheckpointHeader, FormatError, checkpoint_from_bytes, checkpoint_to_bytes,
    read_checkpoint, write_checkpoint,
};
pub use logistic::{log_loss, sigmoid};
pub use model::{BITS_RANGE, Contribution, Model, ModelError};
pub use rule::{RuleProblem, UpdateRule};
