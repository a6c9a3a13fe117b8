//! End-to-end tests of the `chaffgate` binary.

mod util;

mod browser;
mod cli;
mod demo;
mod demo_corpus;
mod drift;
mod logreg;
mod openapi;
mod server;
mod sms;
mod tally;
