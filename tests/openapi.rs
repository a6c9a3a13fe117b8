//! The API description served by a real daemon: open to every caller, an
//! OpenAPI 3.1 document, and covering every route the router serves.

use std::collections::BTreeSet;

use crate::util::{TestServer, chaffgate, stdout};

#[test]
fn openapi_document_is_served_openly_and_covers_every_route() {
    let dir = tempfile::tempdir().unwrap();
    // With a token in place the service is closed, so an answer without
    // one shows the document is open on purpose.
    let out = chaffgate(
        dir.path(),
        &["token", "add", "--role", "operate", "--name", "ops"],
        "",
    );
    assert!(out.status.success(), "{}", crate::util::stderr(&out));
    assert_eq!(stdout(&out).trim().len(), 64);
    let server = TestServer::start_in(dir.path(), &[]);
    assert_eq!(server.get("/v1/model").0, 401);

    let (status, doc) = server.get("/v1/openapi.json");
    assert_eq!(status, 200, "{doc}");
    assert!(doc.is_object(), "not JSON: {doc}");
    // OpenAPI Specification 3.1.0, section 4.8.1: the `openapi` field names
    // the specification version the document follows.
    let version = doc["openapi"].as_str().expect("openapi field");
    assert!(version.starts_with("3.1"), "{version}");

    // Every route the router registers is documented with its method. The
    // list comes from the router's own table, so a route added without
    // documentation fails here.
    let paths = doc["paths"].as_object().expect("paths");
    let routes = chaffgate_server::route_list();
    assert!(routes.len() >= 11, "{routes:?}");
    for (path, method) in &routes {
        let method = method.as_str();
        assert!(
            paths.get(*path).and_then(|item| item.get(method)).is_some(),
            "{method} {path} is served but not documented"
        );
    }
    let served: BTreeSet<&str> = routes.iter().map(|(path, _)| *path).collect();
    for path in paths.keys() {
        assert!(
            served.contains(path.as_str()),
            "{path} is documented but not served"
        );
    }

    // What is served is the document in the repository, and docs/ links to
    // that same file.
    let compiled: serde_json::Value =
        serde_json::from_str(chaffgate_server::openapi::OPENAPI_JSON).unwrap();
    assert_eq!(doc, compiled);
    let docs_copy = std::fs::read_to_string(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/openapi.json"),
    )
    .expect("docs/openapi.json");
    assert_eq!(
        serde_json::from_str::<serde_json::Value>(&docs_copy).unwrap(),
        doc
    );
    assert!(server.stop());
}
