//! End-to-end tests of the `chaffgate` binary.

mod util;

mod cli;
mod demo;
mod demo_corpus;
mod logreg;
mod openapi;
mod server;
mod sms;
