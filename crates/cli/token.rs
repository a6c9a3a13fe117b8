//! `chaffgate token`: add, list and revoke access tokens.
//!
//! A new token's secret is printed once and only its SHA-256 digest is
//! stored; a lost secret cannot be recovered, only revoked and replaced.
//! A running server picks changes up within a few seconds.

use anyhow::{Context, bail};
use chaffgate_server::auth::token_digest;
use chaffgate_server::judge::lower_hex;
use chaffgate_server::state::now_ms;
use chaffgate_store::{Role, Store};

use crate::config::Config;
use crate::serve::DATABASE_FILE;

async fn open_store(config: &Config) -> anyhow::Result<Store> {
    let data_dir = &config.server.data_dir;
    let database = data_dir.join(DATABASE_FILE);
    Store::open(&database)
        .await
        .with_context(|| format!("opening database {}", database.display()))
}

/// A new token secret: 32 random bytes in lowercase hex.
pub fn new_secret() -> String {
    lower_hex(&rand::random::<[u8; 32]>())
}

pub async fn add(config: &Config, name: &str, role: Role) -> anyhow::Result<()> {
    if name.trim().is_empty() || name.len() > 200 {
        bail!("--name {name:?}: must be 1 to 200 characters");
    }
    let store = open_store(config).await?;
    let secret = new_secret();
    let result = store
        .add_token(name, role, &token_digest(&secret), now_ms())
        .await;
    store.close().await;
    match result {
        Ok(_) => {}
        Err(chaffgate_store::StoreError::TokenNameTaken { .. }) => {
            bail!("a token named {name:?} already exists; pick another name or revoke it first")
        }
        Err(err) => return Err(err).context("adding the token"),
    }
    eprintln!("token {name:?} with role {role} added; it is shown only this once:");
    println!("{secret}");
    Ok(())
}

pub async fn list(config: &Config) -> anyhow::Result<()> {
    let store = open_store(config).await?;
    let rows = store.tokens().await?;
    store.close().await;
    if rows.is_empty() {
        println!("no tokens: the service is open on loopback only");
        return Ok(());
    }
    println!("{:<24} {:<9} {:<8}", "name", "role", "state");
    for row in rows {
        let state = if row.revoked_at_ms.is_some() {
            "revoked"
        } else {
            "live"
        };
        println!("{:<24} {:<9} {:<8}", row.name, row.role.as_str(), state);
    }
    Ok(())
}

pub async fn revoke(config: &Config, name: &str) -> anyhow::Result<()> {
    let store = open_store(config).await?;
    let revoked = store.revoke_token(name, now_ms()).await;
    store.close().await;
    if !revoked? {
        bail!("no live token named {name:?}");
    }
    println!("token {name:?} revoked");
    Ok(())
}
