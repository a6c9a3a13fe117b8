//! End-to-end tests of the `chaffgate` binary.

mod util;

mod cli;
mod drift;
mod logreg;
mod server;
mod sms;
