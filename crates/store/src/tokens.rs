//! API tokens: who may call the service, and in which role.
//!
//! Only the SHA-256 of each secret is stored (lowercase hex); the server
//! hashes the bearer token of each request and looks the hash up. Revoking a
//! token keeps its row, and its name stays taken, so that a name in the
//! feedback log always means one token.

use sqlx::FromRow;

use crate::Store;
use crate::error::{StoreError, db};
use crate::types::Role;

/// A registered token.
#[derive(Debug, Clone, PartialEq, Eq, FromRow)]
pub struct TokenRow {
    /// Its id.
    pub id: i64,
    /// Its unique name.
    pub name: String,
    /// What it may do.
    pub role: Role,
    /// Lowercase hex SHA-256 of the secret.
    pub token_sha256: String,
    /// When it was added.
    pub created_at_ms: i64,
    /// When it was revoked; `None` while it is live.
    pub revoked_at_ms: Option<i64>,
}

const TOKEN_COLUMNS: &str = "id, name, role, token_sha256, created_at_ms, revoked_at_ms";

impl Store {
    /// Registers a token and returns its id. `token_sha256` is the lowercase
    /// hex SHA-256 of the secret; anything else is refused by the schema.
    pub async fn add_token(
        &self,
        name: &str,
        role: Role,
        token_sha256: &str,
        now_ms: i64,
    ) -> Result<i64, StoreError> {
        const ACTION: &str = "adding a token";
        let mut tx = self.begin_write(ACTION).await?;
        let (name_taken, secret_taken): (bool, bool) = sqlx::query_as(
            "SELECT EXISTS (SELECT 1 FROM tokens WHERE name = ?), \
                    EXISTS (SELECT 1 FROM tokens WHERE token_sha256 = ?)",
        )
        .bind(name)
        .bind(token_sha256)
        .fetch_one(&mut *tx)
        .await
        .map_err(db(ACTION))?;
        if name_taken {
            return Err(StoreError::TokenNameTaken {
                name: name.to_owned(),
            });
        }
        if secret_taken {
            return Err(StoreError::TokenSecretTaken);
        }
        let (id,): (i64,) = sqlx::query_as(
            "INSERT INTO tokens (name, role, token_sha256, created_at_ms) \
             VALUES (?, ?, ?, ?) RETURNING id",
        )
        .bind(name)
        .bind(role)
        .bind(token_sha256)
        .bind(now_ms)
        .fetch_one(&mut *tx)
        .await
        .map_err(db(ACTION))?;
        tx.commit().await.map_err(db(ACTION))?;
        Ok(id)
    }

    /// The live token whose secret hashes to `token_sha256`, if any.
    pub async fn token_by_hash(&self, token_sha256: &str) -> Result<Option<TokenRow>, StoreError> {
        let sql = format!(
            "SELECT {TOKEN_COLUMNS} FROM tokens WHERE token_sha256 = ? AND revoked_at_ms IS NULL"
        );
        sqlx::query_as(&sql)
            .bind(token_sha256)
            .fetch_optional(&self.pool)
            .await
            .map_err(db("looking up a token"))
    }

    /// Every token, live and revoked, by name.
    pub async fn tokens(&self) -> Result<Vec<TokenRow>, StoreError> {
        let sql = format!("SELECT {TOKEN_COLUMNS} FROM tokens ORDER BY name");
        sqlx::query_as(&sql)
            .fetch_all(&self.pool)
            .await
            .map_err(db("listing tokens"))
    }

    /// How many live tokens there are.
    pub async fn token_count(&self) -> Result<u64, StoreError> {
        let (count,): (i64,) =
            sqlx::query_as("SELECT count(*) FROM tokens WHERE revoked_at_ms IS NULL")
                .fetch_one(&self.pool)
                .await
                .map_err(db("counting tokens"))?;
        Ok(count.unsigned_abs())
    }

    /// Revokes the live token with this name. Returns `false` if there is
    /// none.
    pub async fn revoke_token(&self, name: &str, now_ms: i64) -> Result<bool, StoreError> {
        let done = sqlx::query(
            "UPDATE tokens SET revoked_at_ms = ? WHERE name = ? AND revoked_at_ms IS NULL",
        )
        .bind(now_ms)
        .bind(name)
        .execute(&self.pool)
        .await
        .map_err(db("revoking a token"))?;
        Ok(done.rows_affected() == 1)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::test_support::scratch;

    /// A made-up hash: 64 lowercase hex digits.
    fn hash(n: u8) -> String {
        format!("{n:02x}").repeat(32)
    }

    #[tokio::test]
    async fn add_then_look_up_by_hash() {
        let (_dir, store) = scratch().await;
        assert_eq!(store.token_count().await.unwrap(), 0);
        let id = store
            .add_token("gateway", Role::Score, &hash(1), 100)
            .await
            .unwrap();
        let row = store.token_by_hash(&hash(1)).await.unwrap().unwrap();
        assert_eq!(
            row,
            TokenRow {
                id,
                name: "gateway".to_owned(),
                role: Role::Score,
                token_sha256: hash(1),
                created_at_ms: 100,
                revoked_at_ms: None,
            }
        );
        assert_eq!(store.token_by_hash(&hash(2)).await.unwrap(), None);
        assert_eq!(store.token_count().await.unwrap(), 1);
        store.close().await;
    }

    #[tokio::test]
    async fn every_role_is_stored_and_read_back() {
        let (_dir, store) = scratch().await;
        for (n, role) in Role::ALL.iter().enumerate() {
            let n = u8::try_from(n).unwrap();
            store
                .add_token(role.as_str(), *role, &hash(n), 1)
                .await
                .unwrap();
            let row = store.token_by_hash(&hash(n)).await.unwrap().unwrap();
            assert_eq!(row.role, *role);
            // The column holds the same word as_str gives.
            let (stored,): (String,) = sqlx::query_as("SELECT role FROM tokens WHERE id = ?")
                .bind(row.id)
                .fetch_one(&store.pool)
                .await
                .unwrap();
            assert_eq!(stored, role.as_str());
        }
        store.close().await;
    }

    #[tokio::test]
    async fn a_taken_name_or_secret_is_refused() {
        let (_dir, store) = scratch().await;
        store
            .add_token("desk", Role::Moderate, &hash(1), 100)
            .await
            .unwrap();
        let err = store
            .add_token("desk", Role::Operate, &hash(2), 200)
            .await
            .unwrap_err();
        assert!(
            matches!(&err, StoreError::TokenNameTaken { name } if name == "desk"),
            "{err:?}"
        );
        let err = store
            .add_token("other", Role::Operate, &hash(1), 200)
            .await
            .unwrap_err();
        assert!(matches!(err, StoreError::TokenSecretTaken), "{err:?}");
        // Not hex: refused by the schema.
        let err = store
            .add_token("bad", Role::Score, &"Z".repeat(64), 200)
            .await
            .unwrap_err();
        assert!(matches!(err, StoreError::Database { .. }), "{err:?}");
        assert_eq!(store.token_count().await.unwrap(), 1);
        store.close().await;
    }

    #[tokio::test]
    async fn revoked_tokens_are_not_found_and_keep_their_name() {
        let (_dir, store) = scratch().await;
        store
            .add_token("old", Role::Operate, &hash(1), 100)
            .await
            .unwrap();
        store
            .add_token("new", Role::Operate, &hash(2), 100)
            .await
            .unwrap();
        assert!(store.revoke_token("old", 200).await.unwrap());
        assert!(!store.revoke_token("old", 300).await.unwrap());
        assert!(!store.revoke_token("missing", 300).await.unwrap());

        assert_eq!(store.token_by_hash(&hash(1)).await.unwrap(), None);
        assert!(store.token_by_hash(&hash(2)).await.unwrap().is_some());
        assert_eq!(store.token_count().await.unwrap(), 1);
        let err = store
            .add_token("old", Role::Operate, &hash(3), 400)
            .await
            .unwrap_err();
        assert!(matches!(err, StoreError::TokenNameTaken { .. }), "{err:?}");

        let all = store.tokens().await.unwrap();
        let names: Vec<(&str, Option<i64>)> = all
            .iter()
            .map(|t| (t.name.as_str(), t.revoked_at_ms))
            .collect();
        assert_eq!(names, [("new", None), ("old", Some(200))]);
        store.close().await;
    }
}
