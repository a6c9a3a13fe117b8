//! End-to-end tests of the `chaffgate` binary.

mod util;

mod browser;
mod cli;
mod logreg;
mod server;
mod sms;
