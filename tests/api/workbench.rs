//! The workbench routes: the embedded page and assets (own origin only, a
//! strict Content-Security-Policy, no external URL), the scenario list, the
//! synthetic-bundle maker, and the switch that turns it all off. The page
//! itself is driven in headless Chromium by tests/workbench/e2e.mjs (.ci/run).

#![allow(clippy::unwrap_used, clippy::expect_used, clippy::panic)]

use serde_json::Value;

use crate::helpers::{assert_r4_valid, default_settings, spawn_app, spawn_app_settings};

#[tokio::test]
async fn the_page_and_its_assets_are_served_with_a_same_origin_policy_and_no_external_urls() {
    let app = spawn_app().await;
    for (path, kind) in [
        ("/workbench", "text/html"),
        ("/workbench/", "text/html"),
        ("/workbench/app.js", "text/javascript"),
        ("/workbench/app.css", "text/css"),
    ] {
        let r = app.get(path).await;
        assert_eq!(r.status().as_u16(), 200, "{path}");
        let h = r.headers().clone();
        assert!(h["content-type"].to_str().unwrap().starts_with(kind), "{path}");
        let csp = h["content-security-policy"].to_str().unwrap();
        assert!(csp.contains("default-src 'self'") && !csp.contains("unsafe-inline"), "{csp}");
        let body = r.text().await.unwrap();
        // Nothing is fetched from elsewhere: no absolute URL to another origin in any asset.
        for scheme in ["http://", "https://", "//cdn", "@import"] {
            assert!(!body.contains(scheme), "{path} contains {scheme}");
        }
    }
    let page = app.get("/workbench").await.text().await.unwrap();
    assert!(page.contains("/workbench/app.js") && page.contains("/workbench/app.css"));
    assert!(page.to_lowercase().contains("advisory"), "the page says it is advisory");
}

#[tokio::test]
async fn scenarios_are_listed_and_a_synthetic_bundle_is_r4_valid_and_assessable() {
    let app = spawn_app().await;
    let list: Value = app.get("/workbench/scenarios").await.json().await.unwrap();
    let names: Vec<&str> = list["scenarios"].as_array().unwrap().iter().map(|s| s["name"].as_str().unwrap()).collect();
    assert!(names.len() >= 40 && names.contains(&"vitamin-d-deficiency"), "{names:?}");
    let r = app.get("/workbench/synth?scenario=vitamin-d-deficiency&age=18mo&seed=7&sex=female").await;
    assert_eq!(r.status().as_u16(), 200);
    let bundle: Value = r.json().await.unwrap();
    assert_r4_valid(&bundle);
    let result = app.assess_ok(&bundle).await;
    assert_eq!(crate::helpers::guidance_status(&result), "success");
    // Bad parameters: 400 naming the parameter; an unknown scenario too.
    for (q, element) in [
        ("scenario=vitamin-d-deficiency&age=twelve", "age"),
        ("scenario=vitamin-d-deficiency&age=18mo&seed=x", "seed"),
        ("scenario=vitamin-d-deficiency&age=18mo&sex=other", "sex"),
        ("scenario=no-such&age=18mo", "scenario"),
        ("age=18mo", "scenario"),
    ] {
        let r = app.get(&format!("/workbench/synth?{q}")).await;
        assert_eq!(r.status().as_u16(), 400, "{q}");
        let oo: Value = r.json().await.unwrap();
        assert_eq!(oo["issue"][0]["expression"][0], element, "{q}");
    }
    // An age outside the scenario: 422, with the reason.
    let r = app.get("/workbench/synth?scenario=early-neonatal&age=7y").await;
    assert_eq!(r.status().as_u16(), 422);
}

#[tokio::test]
async fn switched_off_the_workbench_routes_are_gone() {
    let app = spawn_app_settings(calcium_cds::config::ServeArgs { workbench: false, ..default_settings() }).await;
    for path in ["/workbench", "/workbench/app.js", "/workbench/scenarios", "/workbench/synth?scenario=x&age=1y"] {
        assert_eq!(app.get(path).await.status().as_u16(), 404, "{path}");
    }
    // The service itself still answers.
    assert_eq!(app.get("/readyz").await.status().as_u16(), 200);
}
