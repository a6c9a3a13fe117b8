//! Rebuilds the store when a migration changes.
//!
//! `sqlx::migrate!` embeds the files under `migrations/` at compile time, and
//! cargo does not know that on its own.

fn main() {
    println!("cargo:rerun-if-changed=../../migrations");
}
