//! Access: bearer tokens with roles.
//!
//! Tokens are stored as SHA-256 digests (the secret itself is shown once,
//! when `chaffgate token add` makes it). Roles nest: `operate` may do
//! everything, `moderate` may also score and read decisions, `score` may
//! only score. A request without a valid token answers 401; a valid token
//! without the role answers 403.
//!
//! While no token exists at all the service is open, and the binary then
//! refuses to listen anywhere but loopback. The live tokens are read from
//! the database at start and every few seconds, so tokens added or revoked
//! with the command take effect without a restart and checking one costs
//! no query.

use std::collections::HashMap;
use std::sync::{Arc, RwLock};
use std::time::Duration;

use axum::extract::{Request, State};
use axum::http::header::AUTHORIZATION;
use axum::middleware::Next;
use axum::response::{IntoResponse, Response};
use chaffgate_store::{Role, Store};
use sha2::{Digest, Sha256};

use crate::error::ApiError;
use crate::judge::lower_hex;
use crate::state::AppState;

/// How often the token table is re-read.
pub const REFRESH_EVERY: Duration = Duration::from_secs(5);

/// Who made a request, once authenticated.
#[derive(Debug, Clone)]
pub struct Caller {
    /// The token's name; `None` while no token exists (open mode).
    pub name: Option<String>,
    pub role: Role,
}

/// Live tokens by digest.
#[derive(Default)]
pub struct TokenBook {
    by_digest: RwLock<HashMap<String, (String, Role)>>,
}

impl TokenBook {
    /// Re-reads the live tokens.
    pub async fn refresh(&self, store: &Store) -> Result<(), chaffgate_store::StoreError> {
        let rows = store.tokens().await?;
        let live: HashMap<String, (String, Role)> = rows
            .into_iter()
            .filter(|row| row.revoked_at_ms.is_none())
            .map(|row| (row.token_sha256, (row.name, row.role)))
            .collect();
        let mut book = match self.by_digest.write() {
            Ok(book) => book,
            Err(poisoned) => poisoned.into_inner(),
        };
        *book = live;
        Ok(())
    }

    pub fn is_empty(&self) -> bool {
        match self.by_digest.read() {
            Ok(book) => book.is_empty(),
            Err(poisoned) => poisoned.into_inner().is_empty(),
        }
    }

    fn find(&self, secret: &str) -> Option<(String, Role)> {
        let digest = token_digest(secret);
        let book = match self.by_digest.read() {
            Ok(book) => book,
            Err(poisoned) => poisoned.into_inner(),
        };
        book.get(&digest).cloned()
    }
}

/// Lowercase hex SHA-256 of a token secret, as stored.
pub fn token_digest(secret: &str) -> String {
    lower_hex(&Sha256::digest(secret.as_bytes()))
}

/// Whether `role` may act where `needed` is required.
pub fn allows(role: Role, needed: Role) -> bool {
    fn rank(role: Role) -> u8 {
        match role {
            Role::Score => 0,
            Role::Moderate => 1,
            Role::Operate => 2,
        }
    }
    rank(role) >= rank(needed)
}

/// The role a route needs; `None` for the open ones.
pub(crate) fn needed_role(path: &str) -> Option<Role> {
    // Page shells hold no data; their fragments need the role below.
    if path == "/healthz"
        || path == "/readyz"
        || path == crate::openapi::PATH
        || crate::pages::is_shell(path)
    {
        return None;
    }
    if path == crate::pages::review::QUEUE_PATH {
        return Some(Role::Moderate);
    }
    if path.starts_with("/v1/score") {
        return Some(Role::Score);
    }
    if path.starts_with("/v1/feedback") || path.starts_with("/v1/decisions") {
        return Some(Role::Moderate);
    }
    Some(Role::Operate)
}

/// Checks the bearer token against the route's role and records the caller.
pub async fn authenticate(
    State(state): State<AppState>,
    mut request: Request,
    next: Next,
) -> Response {
    let Some(needed) = needed_role(request.uri().path()) else {
        return next.run(request).await;
    };
    let tokens = state.tokens();
    if tokens.is_empty() {
        request.extensions_mut().insert(Caller {
            name: None,
            role: Role::Operate,
        });
        return next.run(request).await;
    }
    let header = request
        .headers()
        .get(AUTHORIZATION)
        .and_then(|value| value.to_str().ok());
    let Some(secret) = header.and_then(|value| value.strip_prefix("Bearer ")) else {
        return ApiError::Unauthenticated(
            "this service needs a token: send Authorization: Bearer <token>".to_owned(),
        )
        .into_response();
    };
    let Some((name, role)) = tokens.find(secret.trim()) else {
        return ApiError::Unauthenticated("the token is unknown or revoked".to_owned())
            .into_response();
    };
    if !allows(role, needed) {
        return ApiError::Forbidden(format!(
            "token {name:?} has role {role}; this needs role {needed} (or one above it)"
        ))
        .into_response();
    }
    request.extensions_mut().insert(Caller {
        name: Some(name),
        role,
    });
    next.run(request).await
}

/// Re-reads the token table every [`REFRESH_EVERY`].
pub async fn keep_fresh(book: Arc<TokenBook>, store: Store) {
    let mut every = tokio::time::interval(REFRESH_EVERY);
    every.set_missed_tick_behavior(tokio::time::MissedTickBehavior::Delay);
    loop {
        every.tick().await;
        if let Err(err) = book.refresh(&store).await {
            tracing::warn!(error = %err, "re-reading access tokens failed; keeping the last list");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn roles_nest_operate_over_moderate_over_score() {
        assert!(allows(Role::Operate, Role::Score));
        assert!(allows(Role::Operate, Role::Moderate));
        assert!(allows(Role::Moderate, Role::Score));
        assert!(!allows(Role::Score, Role::Moderate));
        assert!(!allows(Role::Moderate, Role::Operate));
    }

    #[test]
    fn routes_need_the_documented_roles() {
        assert_eq!(needed_role("/healthz"), None);
        assert_eq!(needed_role("/v1/openapi.json"), None);
        assert_eq!(needed_role("/v1/score/batch"), Some(Role::Score));
        assert_eq!(needed_role("/v1/decisions/01"), Some(Role::Moderate));
        assert_eq!(needed_role("/v1/model"), Some(Role::Operate));
        assert_eq!(needed_role("/metrics"), Some(Role::Operate));
        assert_eq!(needed_role("/review"), None);
        assert_eq!(needed_role("/review/queue"), Some(Role::Moderate));
        assert_eq!(needed_role("/review/other"), Some(Role::Operate));
    }

    #[test]
    fn digest_is_sha256_hex() {
        // SHA-256("abc") from FIPS 180-2, Appendix B.1.
        assert_eq!(
            token_digest("abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }
}
