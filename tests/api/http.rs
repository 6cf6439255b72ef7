//! The HTTP surface: metadata, OperationDefinition, probes, routing, media
//! types, request ids.

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use serde_json::Value;

use crate::helpers::{
    FHIR_JSON, Lab, Scenario, assert_r4_valid, assert_r4_valid_except_fhir_version, content_type, spawn_app,
};

async fn fhir_body(response: reqwest::Response, expected_status: u16) -> Value {
    let status = response.status().as_u16();
    let ct = content_type(&response);
    let text = response.text().await.expect("a body");
    assert_eq!(status, expected_status, "body: {text}");
    assert!(ct.starts_with(FHIR_JSON), "Content-Type was {ct:?}");
    serde_json::from_str(&text).unwrap_or_else(|e| panic!("body is not JSON ({e}): {text}"))
}

#[tokio::test]
async fn metadata_is_a_capability_statement_declaring_assess() {
    let app = spawn_app().await;
    let cs = fhir_body(app.get("/fhir/metadata").await, 200).await;

    assert_eq!(cs["resourceType"], "CapabilityStatement");
    assert_eq!(cs["fhirVersion"], "4.0.1");
    assert_eq!(cs["software"]["version"], env!("CARGO_PKG_VERSION"));
    let operations: Vec<&Value> = cs["rest"]
        .as_array()
        .into_iter()
        .flatten()
        .filter(|r| r["mode"] == "server")
        .flat_map(|r| r["operation"].as_array().into_iter().flatten())
        .collect();
    let assess = operations.iter().find(|o| o["name"] == "assess").expect("an operation named assess");
    let definition = assess["definition"].as_str().unwrap_or("");
    assert!(definition.ends_with("/OperationDefinition/assess"), "definition {definition}");
    assert_r4_valid_except_fhir_version(&cs);
}

#[tokio::test]
async fn operation_definition_is_valid_r4() {
    let app = spawn_app().await;
    let od = fhir_body(app.get("/fhir/OperationDefinition/assess").await, 200).await;

    assert_eq!(od["resourceType"], "OperationDefinition");
    assert_eq!(od["code"], "assess");
    assert_eq!(od["system"], true);
    let names: Vec<(&str, &str)> = od["parameter"]
        .as_array()
        .into_iter()
        .flatten()
        .map(|p| (p["name"].as_str().unwrap_or(""), p["use"].as_str().unwrap_or("")))
        .collect();
    assert!(names.contains(&("bundle", "in")), "{names:?}");
    assert!(names.contains(&("return", "out")), "{names:?}");
    assert_r4_valid(&od);
}

#[tokio::test]
async fn probes_answer_200() {
    let app = spawn_app().await;
    for path in ["/livez", "/readyz"] {
        let response = app.get(path).await;
        assert_eq!(response.status().as_u16(), 200, "{path}");
    }
}

#[tokio::test]
async fn an_unknown_path_is_a_404_operation_outcome() {
    let app = spawn_app().await;
    for path in ["/fhir/Patient/123", "/nothing-here", "/fhir/$asses"] {
        let oo = fhir_body(app.get(path).await, 404).await;
        assert_eq!(oo["resourceType"], "OperationOutcome", "{path}");
        assert_eq!(oo["issue"][0]["code"], "not-found", "{path}: {oo}");
        assert_r4_valid(&oo);
    }
}

#[tokio::test]
async fn get_on_assess_is_a_405_operation_outcome() {
    let app = spawn_app().await;
    let oo = fhir_body(app.get("/fhir/$assess").await, 405).await;
    assert_eq!(oo["resourceType"], "OperationOutcome");
    assert_eq!(oo["issue"][0]["severity"], "error", "{oo}");
    assert_r4_valid(&oo);
}

/// RFC 9110 section 15.5.6: a 405 response MUST carry an Allow header listing
/// the methods the resource supports.
#[tokio::test]
async fn get_on_assess_names_the_allowed_method() {
    let app = spawn_app().await;
    let response = app.get("/fhir/$assess").await;
    assert_eq!(response.status().as_u16(), 405);
    let allow = response.headers().get(reqwest::header::ALLOW).and_then(|v| v.to_str().ok()).unwrap_or("").to_owned();
    assert!(allow.split(',').any(|m| m.trim() == "POST"), "Allow: {allow:?}");
}

/// Every route answers a method it does not serve with 405 and its Allow
/// (found by the schemathesis run: TRACE /metrics was a 404).
#[tokio::test]
async fn every_route_answers_an_undeclared_method_with_405_and_allow() {
    let app = spawn_app().await;
    let routes = [
        ("/fhir/$assess", "POST"),
        ("/fhir/Patient/lch-juniper-5/$assess", "POST"),
        ("/notifications", "POST"),
        ("/fhir/metadata", "GET"),
        ("/fhir/OperationDefinition/assess", "GET"),
        ("/livez", "GET"),
        ("/readyz", "GET"),
        ("/metrics", "GET"),
    ];
    for (path, allowed) in routes {
        for method in [reqwest::Method::PUT, reqwest::Method::DELETE, reqwest::Method::PATCH] {
            let response = app.client.request(method.clone(), format!("{}{path}", app.address)).send().await.unwrap();
            assert_eq!(response.status().as_u16(), 405, "{method} {path}");
            let allow = response.headers().get(reqwest::header::ALLOW).and_then(|v| v.to_str().ok()).map(str::to_owned);
            assert_eq!(allow.as_deref(), Some(allowed), "{method} {path}");
        }
    }
}

#[tokio::test]
async fn a_sent_request_id_is_echoed() {
    let app = spawn_app().await;
    let response = app
        .client
        .get(format!("{}/livez", app.address))
        .header("X-Request-Id", "larkspur-trace-0042")
        .send()
        .await
        .expect("sent");
    assert_eq!(response.status().as_u16(), 200);
    assert_eq!(response.headers().get("x-request-id").and_then(|v| v.to_str().ok()), Some("larkspur-trace-0042"));
}

#[tokio::test]
async fn a_request_id_is_generated_when_absent() {
    let app = spawn_app().await;
    let first = app.get("/livez").await;
    let second = app.get("/fhir/metadata").await;
    let id = |r: &reqwest::Response| r.headers().get("x-request-id").and_then(|v| v.to_str().ok()).map(str::to_owned);
    let (a, b) = (id(&first).expect("an id on the first"), id(&second).expect("an id on the second"));
    assert!(!a.is_empty() && !b.is_empty());
    assert_ne!(a, b, "each request gets its own id");
}

#[tokio::test]
async fn an_error_response_also_carries_the_request_id() {
    let app = spawn_app().await;
    let response = app
        .client
        .post(format!("{}/fhir/$assess", app.address))
        .header("X-Request-Id", "err-77")
        .header(reqwest::header::CONTENT_TYPE, FHIR_JSON)
        .body("not json")
        .send()
        .await
        .expect("sent");
    assert_eq!(response.status().as_u16(), 400);
    assert_eq!(response.headers().get("x-request-id").and_then(|v| v.to_str().ok()), Some("err-77"));
}

#[tokio::test]
async fn json_and_fhir_json_with_charset_are_both_accepted() {
    let app = spawn_app().await;
    let body = Scenario::new().add(Lab::IonizedCa, "ica-1", 1.22, 2.0).bundle().to_string();
    for ct in ["application/json", "application/fhir+json; charset=utf-8", "application/fhir+json"] {
        let bundle = fhir_body(app.post_assess(body.clone(), ct).await, 200).await;
        assert_eq!(bundle["resourceType"], "Bundle", "{ct}");
        assert_eq!(bundle["type"], "collection", "{ct}");
        assert_r4_valid(&bundle);
    }
}

/// The paths and methods of fhir-profiles/openapi.yaml (the `paths:` block: a
/// path at two spaces, its methods at four).
fn openapi_routes() -> Vec<(String, String)> {
    let text = std::fs::read_to_string(crate::helpers::repo_path("fhir-profiles/openapi.yaml")).unwrap();
    let mut out = Vec::new();
    let mut path = None;
    let mut in_paths = false;
    for line in text.lines() {
        if !line.starts_with(' ') {
            in_paths = line.trim_end() == "paths:";
            continue;
        }
        if !in_paths {
            continue;
        }
        if let Some(p) = line.strip_prefix("  /").and_then(|l| l.strip_suffix(':')) {
            path = Some(format!("/{p}"));
        } else if let (Some(p), Some(m)) = (&path, line.strip_prefix("    ").and_then(|l| l.strip_suffix(':')))
            && ["get", "post", "put", "delete", "patch"].contains(&m)
        {
            out.push((m.to_uppercase(), p.clone()));
        }
    }
    out
}

/// Issue 14, section 6: the declared routes are the router's and the OpenAPI
/// description's, and the CapabilityStatement and OperationDefinition declare
/// the instance level, /notifications and every result resource type.
#[tokio::test]
async fn the_service_describes_every_route_and_every_result_type() {
    use calcium_cds::http::ROUTES;
    let declared: std::collections::BTreeSet<(String, String)> =
        ROUTES.iter().map(|(m, p, _)| ((*m).to_owned(), (*p).to_owned())).collect();
    let openapi: std::collections::BTreeSet<(String, String)> = openapi_routes().into_iter().collect();
    assert_eq!(declared, openapi, "ROUTES (left) and fhir-profiles/openapi.yaml (right)");

    let app = spawn_app().await;
    let client = reqwest::Client::new();
    for (method, path, _) in ROUTES {
        let url = format!("{}{}", app.address, path.replace("{id}", "p-1"));
        let (right, wrong) = if *method == "GET" {
            (client.get(&url), client.post(&url).header("Content-Type", "application/fhir+json").body("{}"))
        } else {
            (client.post(&url).header("Content-Type", "application/fhir+json").body("{}"), client.get(&url))
        };
        // The router has the route: neither unknown nor the wrong method.
        let status = right.send().await.unwrap().status().as_u16();
        assert!(status != 404 && status != 405, "{method} {path}: {status}");
        let response = wrong.send().await.unwrap();
        assert_eq!(response.status().as_u16(), 405, "{path} with the other method");
        assert_eq!(response.headers()["allow"], *method, "{path}");
    }

    let types: std::collections::BTreeSet<String> =
        calcium_cds::fhir::write::RESULT_RESOURCE_TYPES.iter().map(|t| (*t).to_owned()).collect();
    let seen = crate::references::types_seen(&crate::references::all_answers());
    assert_eq!(types, seen, "declared result types (left) and the types in every example's and case's answer");

    let od = fhir_body(app.get("/fhir/OperationDefinition/assess").await, 200).await;
    assert_eq!(od["system"], true);
    assert_eq!(od["instance"], true, "POST /fhir/Patient/{{id}}/$assess");
    assert_eq!(od["type"], false, "no type-level route");
    assert_eq!(od["resource"], serde_json::json!(["Patient"]));
    let ret = od["parameter"].as_array().unwrap().iter().find(|p| p["name"] == "return").unwrap();
    let doc = ret["documentation"].as_str().unwrap();
    for t in &seen {
        assert!(doc.contains(t.as_str()), "return documentation lacks {t}: {doc}");
    }
    assert_r4_valid(&od);

    let cs = fhir_body(app.get("/fhir/metadata").await, 200).await;
    let rest = &cs["rest"][0];
    let resources = rest["resource"].as_array().unwrap();
    let patient = resources.iter().find(|r| r["type"] == "Patient").expect("a Patient resource entry");
    assert_eq!(patient["operation"][0]["name"], "assess");
    assert!(patient["operation"][0]["definition"].as_str().unwrap().ends_with("/OperationDefinition/assess"));
    let result_types: std::collections::BTreeSet<String> = resources
        .iter()
        .filter(|r| r.get("operation").is_none())
        .map(|r| r["type"].as_str().unwrap().to_owned())
        .collect();
    assert_eq!(result_types, seen, "CapabilityStatement result resource entries (left), types in the answers (right)");
    let documentation = rest["documentation"].as_str().unwrap();
    let listed: std::collections::BTreeSet<(String, String)> = documentation
        .lines()
        .filter_map(|l| l.strip_prefix("- `"))
        .filter_map(|l| l.split_once('`').map(|(route, _)| route))
        .filter_map(|r| r.split_once(' ').map(|(m, p)| (m.to_owned(), p.to_owned())))
        .collect();
    assert_eq!(listed, declared, "routes in rest.documentation (left) and ROUTES (right)");
    assert_r4_valid_except_fhir_version(&cs);
}

/// The files in fhir-profiles are what the service serves (the derived parts
/// included), so that the published descriptions cannot drift from the routes.
#[tokio::test]
async fn the_published_files_are_what_the_service_serves() {
    let app = spawn_app().await;
    for (path, file) in [
        ("/fhir/metadata", "fhir-profiles/CapabilityStatement-calcium-cds.json"),
        ("/fhir/OperationDefinition/assess", "fhir-profiles/OperationDefinition-assess.json"),
    ] {
        let mut served = fhir_body(app.get(path).await, 200).await;
        let text = std::fs::read_to_string(crate::helpers::repo_path(file)).unwrap();
        let mut published: Value = serde_json::from_str(&text).unwrap();
        for v in [&mut served, &mut published] {
            if let Some(s) = v.get_mut("software") {
                s["version"] = Value::Null;
            }
        }
        assert_eq!(served, published, "{file}");
    }
}
