//! The API's own description: an OpenAPI 3.1 document served at
//! `GET /v1/openapi.json`, open to all callers.
//!
//! The document is `crates/server/openapi.json`, compiled in as it is
//! (`docs/openapi.json` links to it). It is written by hand, so the tests
//! below hold it to the code: every route in [`crate::route_list`] is
//! documented with its method and no other, each operation names the role
//! `auth` really asks for, every error code `ApiError` can send is listed,
//! and every `$ref` resolves.

use axum::http::header::CONTENT_TYPE;
use axum::response::{IntoResponse, Response};

/// Where the document is served.
pub const PATH: &str = "/v1/openapi.json";

/// The OpenAPI 3.1 document, as JSON text.
pub const OPENAPI_JSON: &str = include_str!("../openapi.json");

/// `GET /v1/openapi.json`
pub async fn document() -> Response {
    ([(CONTENT_TYPE, "application/json")], OPENAPI_JSON).into_response()
}

#[cfg(test)]
mod tests {
    use std::collections::BTreeSet;

    use chaffgate_store::{Label, Role, Verdict};
    use serde_json::Value;

    use super::*;
    use crate::error::ApiError;

    fn doc() -> Value {
        serde_json::from_str(OPENAPI_JSON).expect("openapi.json is JSON")
    }

    fn string_enum(doc: &Value, schema: &str) -> BTreeSet<String> {
        doc["components"]["schemas"][schema]["enum"]
            .as_array()
            .unwrap_or_else(|| panic!("schema {schema} has no enum"))
            .iter()
            .map(|value| value.as_str().expect("string").to_owned())
            .collect()
    }

    /// Path items' operations, as (path, method).
    fn documented(doc: &Value) -> BTreeSet<(String, String)> {
        let paths = doc["paths"].as_object().expect("paths");
        let mut found = BTreeSet::new();
        for (path, item) in paths {
            for method in item.as_object().expect("path item").keys() {
                found.insert((path.clone(), method.clone()));
            }
        }
        found
    }

    #[test]
    fn document_is_openapi_3_1() {
        // OpenAPI Specification 3.1.0, section 4.8.1: `openapi` is the
        // version of the specification the document uses.
        let doc = doc();
        let version = doc["openapi"].as_str().expect("openapi");
        assert!(version.starts_with("3.1"), "{version}");
        assert_eq!(
            doc["info"]["version"].as_str(),
            Some(env!("CARGO_PKG_VERSION"))
        );
    }

    #[test]
    fn every_route_is_documented_and_nothing_else() {
        let served: BTreeSet<(String, String)> = crate::route_list()
            .into_iter()
            .map(|(path, method)| (path.to_owned(), method.as_str().to_owned()))
            .collect();
        assert!(served.contains(&(PATH.to_owned(), "get".to_owned())));
        assert_eq!(documented(&doc()), served);
    }

    #[test]
    fn each_operation_names_the_role_auth_asks_for() {
        let doc = doc();
        for (path, method) in documented(&doc) {
            let operation = &doc["paths"][&path][&method];
            let security = operation["security"]
                .as_array()
                .unwrap_or_else(|| panic!("{method} {path} says nothing of security"));
            let documented_role = match security.as_slice() {
                [] => None,
                [requirement] => {
                    let roles = requirement["bearer"].as_array().expect("bearer roles");
                    assert_eq!(roles.len(), 1, "{method} {path}: one least role");
                    roles[0].as_str().map(str::to_owned)
                }
                _ => panic!("{method} {path}: one requirement at most"),
            };
            let concrete = path.replace("{id}", "01ARZ3NDEKTSV4RRFFQ69G5FAV");
            let needed = crate::auth::needed_role(&concrete).map(|role| role.as_str().to_owned());
            assert_eq!(documented_role, needed, "{method} {path}");
            if needed.is_some() {
                for status in ["401", "403"] {
                    assert!(
                        operation["responses"].get(status).is_some(),
                        "{method} {path} does not document {status}"
                    );
                }
            }
        }
        let roles: BTreeSet<&str> = Role::ALL.iter().map(|role| role.as_str()).collect();
        assert_eq!(roles, BTreeSet::from(["score", "moderate", "operate"]));
    }

    #[test]
    fn every_error_code_is_listed() {
        let boxed: Box<dyn std::error::Error + Send + Sync> = "x".into();
        let every = [
            ApiError::InvalidJson(String::new()),
            ApiError::UnsupportedMediaType(String::new()),
            ApiError::BodyTooLarge(String::new()),
            ApiError::InvalidMessage(String::new()),
            ApiError::EmptyMessage,
            ApiError::MessageTooLarge { bytes: 0, limit: 0 },
            ApiError::BatchSize { count: 0, limit: 0 },
            ApiError::InvalidParameter(String::new()),
            ApiError::UnknownDecision(String::new()),
            ApiError::DecisionExpired(String::new()),
            ApiError::InvalidFeedback(String::new()),
            ApiError::IdempotencyKeyReused(String::new()),
            ApiError::UnknownCheckpoint(0),
            ApiError::CheckpointUnusable(String::new()),
            ApiError::Unauthenticated(String::new()),
            ApiError::Forbidden(String::new()),
            ApiError::Unavailable,
            ApiError::Internal(boxed),
        ];
        // No wildcard: a new variant does not compile until it is added to
        // the list above (and so checked against the document).
        for error in &every {
            match error {
                ApiError::InvalidJson(_)
                | ApiError::UnsupportedMediaType(_)
                | ApiError::BodyTooLarge(_)
                | ApiError::InvalidMessage(_)
                | ApiError::EmptyMessage
                | ApiError::MessageTooLarge { .. }
                | ApiError::BatchSize { .. }
                | ApiError::InvalidParameter(_)
                | ApiError::UnknownDecision(_)
                | ApiError::DecisionExpired(_)
                | ApiError::InvalidFeedback(_)
                | ApiError::IdempotencyKeyReused(_)
                | ApiError::UnknownCheckpoint(_)
                | ApiError::CheckpointUnusable(_)
                | ApiError::Unauthenticated(_)
                | ApiError::Forbidden(_)
                | ApiError::Unavailable
                | ApiError::Internal(_) => {}
            }
        }
        let mut codes: BTreeSet<String> = every.iter().map(|e| e.code().to_owned()).collect();
        // The fallback for unknown paths (`routes::not_found`).
        codes.insert("not_found".to_owned());
        // A known path with a method it does not take (`routes::method_not_allowed`).
        codes.insert("method_not_allowed".to_owned());
        assert_eq!(string_enum(&doc(), "ErrorCode"), codes);

        // Each status an error can have is documented on some operation.
        let doc = doc();
        let mut statuses = BTreeSet::new();
        for (path, method) in documented(&doc) {
            if let Some(responses) = doc["paths"][&path][&method]["responses"].as_object() {
                statuses.extend(responses.keys().cloned());
            }
        }
        for error in &every {
            let status = error.status().as_u16().to_string();
            assert!(statuses.contains(&status), "{} ({status})", error.code());
        }
    }

    #[test]
    fn verdicts_and_labels_match_the_store() {
        let doc = doc();
        let verdicts: BTreeSet<String> =
            Verdict::ALL.iter().map(|v| v.as_str().to_owned()).collect();
        assert_eq!(string_enum(&doc, "Verdict"), verdicts);
        let labels: BTreeSet<String> = Label::ALL.iter().map(|l| l.as_str().to_owned()).collect();
        assert_eq!(string_enum(&doc, "Label"), labels);
    }

    #[test]
    fn every_reference_resolves() {
        fn walk(doc: &Value, value: &Value, seen: &mut usize) {
            match value {
                Value::Object(map) => {
                    if let Some(Value::String(target)) = map.get("$ref") {
                        let pointer = target
                            .strip_prefix('#')
                            .unwrap_or_else(|| panic!("{target} is not local"));
                        assert!(doc.pointer(pointer).is_some(), "{target} does not resolve");
                        *seen += 1;
                    }
                    for child in map.values() {
                        walk(doc, child, seen);
                    }
                }
                Value::Array(items) => {
                    for child in items {
                        walk(doc, child, seen);
                    }
                }
                _ => {}
            }
        }
        let doc = doc();
        let mut seen = 0;
        walk(&doc, &doc, &mut seen);
        assert!(seen > 50, "only {seen} references");
    }
}
