//! Inbound authorization (off by default): every FHIR route but the
//! CapabilityStatement and the OperationDefinition requires an OAuth 2.0
//! bearer JWT, checked against a JWKS (file or URL, read at start): the
//! signature (RS256/RS384/ES256/ES384, the key chosen by `kid`), `iss`, `aud`,
//! `exp` and `nbf`, and the SMART v2 system scope the route needs (v1 scopes
//! are read too). The probes stay open; `/metrics` optionally requires a token.

use std::collections::BTreeSet;

use jsonwebtoken::jwk::JwkSet;
use jsonwebtoken::{Algorithm, DecodingKey, Validation};
use serde::Deserialize;

/// The refusal text when no JWKS key matches the token.
const UNKNOWN_KID: &str = "no key in the JWKS matches the token's kid";

fn parse_jwks(text: &str) -> Result<JwkSet, String> {
    let keys: JwkSet = serde_json::from_str(text).map_err(|e| format!("the JWKS is not a JWK Set: {e}"))?;
    if keys.keys.is_empty() {
        return Err("the JWKS has no keys".into());
    }
    Ok(keys)
}

/// Read a JWKS over HTTP(S).
pub async fn fetch_jwks(url: &str) -> Result<String, String> {
    let resp = reqwest::Client::new()
        .get(url)
        .timeout(std::time::Duration::from_secs(10))
        .send()
        .await
        .map_err(|e| format!("the JWKS at {url} could not be read: {e}"))?;
    if !resp.status().is_success() {
        return Err(format!("the JWKS at {url} answered HTTP {}", resp.status().as_u16()));
    }
    resp.text().await.map_err(|e| format!("the JWKS at {url} could not be read: {e}"))
}

/// Clock skew allowed on `exp` and `nbf`, seconds.
pub const LEEWAY_SECONDS: u64 = 30;

/// Algorithms accepted for inbound tokens (asymmetric only).
const ALGORITHMS: [Algorithm; 4] = [Algorithm::RS256, Algorithm::RS384, Algorithm::ES256, Algorithm::ES384];

/// Why a request is refused.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Refusal {
    /// No bearer token: 401.
    Missing,
    /// A token that does not verify or has expired: 401 (`invalid_token`).
    Invalid(String),
    /// A valid token without the needed scope: 403 (`insufficient_scope`).
    Scope(String),
}

/// The scope each protected route needs (DEVELOPERS.md: inbound authorization).
pub fn needed_for(route: &str) -> Option<Needed> {
    match route {
        "/fhir/$assess" | "/fhir/Patient/{id}/$assess" => {
            Some(Needed { resource: "GuidanceResponse", permission: 'c' })
        }
        "/notifications" => Some(Needed { resource: "Bundle", permission: 'c' }),
        _ => None,
    }
}

/// A scope a route needs: resource type and one SMART v2 permission letter.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Needed {
    /// FHIR resource type.
    pub resource: &'static str,
    /// One of c, r, u, d, s.
    pub permission: char,
}

impl std::fmt::Display for Needed {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "system/{}.{}", self.resource, self.permission)
    }
}

/// Does one granted scope (v2 `system/Type.cruds`, v1 `system/Type.read|write|*`) allow `need`?
/// A scope with a query restriction (`?...`) is not taken as a grant: conservative.
pub fn grants(scope: &str, need: Needed) -> bool {
    let Some(rest) = scope.strip_prefix("system/") else { return false };
    if rest.contains('?') {
        return false;
    }
    let Some((resource, perms)) = rest.split_once('.') else { return false };
    if resource != "*" && resource != need.resource {
        return false;
    }
    let letters = match perms {
        "read" => "rs",
        "write" => "cud",
        "*" => "cruds",
        v2 if !v2.is_empty() && v2.chars().all(|c| "cruds".contains(c)) => v2,
        _ => return false,
    };
    letters.contains(need.permission)
}

#[derive(Deserialize)]
struct Claims {
    #[serde(default)]
    scope: Option<String>,
}

/// Where the JWKS was read from, for re-reading on an unknown `kid` (key rotation).
#[derive(Debug, Clone)]
pub struct JwksSource {
    /// The JWKS URL.
    pub url: String,
    /// Least time between two reads on an unknown key id.
    pub min_interval: std::time::Duration,
    /// Time after which the JWKS is read again regardless (so that a removed key stops being trusted).
    pub max_age: std::time::Duration,
}

/// The configured verifier.
pub struct Verifier {
    keys: std::sync::RwLock<JwkSet>,
    issuer: String,
    audience: String,
    source: Option<JwksSource>,
    last_read: tokio::sync::Mutex<std::time::Instant>,
}

impl std::fmt::Debug for Verifier {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Verifier")
            .field("issuer", &self.issuer)
            .field("audience", &self.audience)
            .finish_non_exhaustive()
    }
}

impl Verifier {
    /// A verifier over a JWKS document.
    pub fn new(jwks_json: &str, issuer: String, audience: String, source: Option<JwksSource>) -> Result<Self, String> {
        let keys = parse_jwks(jwks_json)?;
        Ok(Self {
            keys: std::sync::RwLock::new(keys),
            issuer,
            audience,
            source,
            last_read: tokio::sync::Mutex::new(std::time::Instant::now()),
        })
    }

    /// Where the JWKS is re-read from, when it came from a URL.
    pub fn source(&self) -> Option<&JwksSource> {
        self.source.as_ref()
    }

    /// Read the JWKS URL again and replace the keys (kept as they were when
    /// the read fails). `min_gap`: skip when the last read is more recent.
    /// True when the keys were replaced.
    pub async fn reread(&self, min_gap: std::time::Duration, why: &'static str) -> bool {
        let Some(source) = &self.source else { return false };
        let mut last = self.last_read.lock().await;
        if last.elapsed() < min_gap {
            return false;
        }
        *last = std::time::Instant::now();
        match fetch_jwks(&source.url).await.and_then(|text| parse_jwks(&text)) {
            Ok(keys) => {
                if let Ok(mut k) = self.keys.write() {
                    *k = keys;
                }
                tracing::info!(why, "JWKS read again");
                true
            }
            Err(e) => {
                tracing::warn!(why, error = %e, "JWKS could not be read again; the keys read before stay");
                false
            }
        }
    }

    /// Check, and when the token names a key the JWKS lacks and the JWKS came
    /// from a URL, read it again (at most once per `min_interval`) and check once more.
    pub async fn check_refreshing(&self, authorization: Option<&str>, need: Option<Needed>) -> Result<(), Refusal> {
        match self.check(authorization, need) {
            Err(Refusal::Invalid(why)) if why == UNKNOWN_KID => {
                let Some(source) = &self.source else { return Err(Refusal::Invalid(why)) };
                if !self.reread(source.min_interval, "a token names an unknown key id").await {
                    return Err(Refusal::Invalid(why));
                }
                self.check(authorization, need)
            }
            other => other,
        }
    }

    /// Check the Authorization header value for `need`.
    /// `need` None: any valid token (e.g. for `/metrics`).
    pub fn check(&self, authorization: Option<&str>, need: Option<Needed>) -> Result<(), Refusal> {
        let token = authorization
            .and_then(|h| h.strip_prefix("Bearer ").or_else(|| h.strip_prefix("bearer ")))
            .map(str::trim)
            .filter(|t| !t.is_empty())
            .ok_or(Refusal::Missing)?;
        let header =
            jsonwebtoken::decode_header(token).map_err(|_| Refusal::Invalid("the token is not a JWT".into()))?;
        if !ALGORITHMS.contains(&header.alg) {
            return Err(Refusal::Invalid(format!("the algorithm {:?} is not accepted", header.alg)));
        }
        let key = {
            let keys = self.keys.read().map_err(|_| Refusal::Invalid("the JWKS is unavailable".into()))?;
            let jwk = match &header.kid {
                Some(kid) => keys.find(kid),
                None if keys.keys.len() == 1 => keys.keys.first(),
                None => None,
            }
            .ok_or_else(|| Refusal::Invalid(UNKNOWN_KID.into()))?;
            DecodingKey::from_jwk(jwk).map_err(|_| Refusal::Invalid("the JWKS key cannot be used".into()))?
        };
        let mut validation = Validation::new(header.alg);
        validation.set_issuer(&[&self.issuer]);
        validation.set_audience(&[&self.audience]);
        validation.set_required_spec_claims(&["exp", "iss", "aud"]);
        validation.validate_nbf = true;
        validation.leeway = LEEWAY_SECONDS;
        let data = jsonwebtoken::decode::<Claims>(token, &key, &validation).map_err(|e| {
            use jsonwebtoken::errors::ErrorKind;
            Refusal::Invalid(
                match e.kind() {
                    ErrorKind::ExpiredSignature => "the token has expired",
                    ErrorKind::ImmatureSignature => "the token is not valid yet (nbf)",
                    ErrorKind::InvalidIssuer => "the token's issuer is not accepted",
                    ErrorKind::InvalidAudience => "the token's audience is not this service",
                    ErrorKind::InvalidSignature => "the token's signature does not verify",
                    ErrorKind::MissingRequiredClaim(_) => "the token lacks exp, iss or aud",
                    _ => "the token is not valid",
                }
                .to_owned(),
            )
        })?;
        let Some(need) = need else { return Ok(()) };
        let granted: BTreeSet<&str> = data.claims.scope.as_deref().unwrap_or("").split_whitespace().collect();
        if granted.iter().any(|s| grants(s, need)) {
            Ok(())
        } else {
            Err(Refusal::Scope(format!("the token lacks the scope {need}")))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scopes_grant_by_resource_and_permission() {
        let need = Needed { resource: "GuidanceResponse", permission: 'c' };
        assert!(grants("system/GuidanceResponse.c", need));
        assert!(grants("system/GuidanceResponse.cruds", need));
        assert!(grants("system/*.c", need));
        assert!(grants("system/GuidanceResponse.write", need), "v1 write");
        assert!(!grants("system/GuidanceResponse.rs", need));
        assert!(!grants("system/GuidanceResponse.read", need));
        assert!(!grants("user/GuidanceResponse.c", need));
        assert!(!grants("system/Observation.c", need));
        assert!(!grants("system/GuidanceResponse.c?category=x", need), "restricted scopes are not grants");
        assert!(!grants("system/GuidanceResponse.cx", need));
    }
}
