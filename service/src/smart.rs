//! SMART Backend Services authorization for the upstream client: an OAuth 2.0
//! client_credentials grant with a signed JWT client assertion (RS384 or
//! ES384), the access token cached until shortly before it expires and
//! refreshed once when the FHIR server answers 401.
//!
//! Source: HL7 SMART App Launch 2.x, "Backend Services" (client assertion
//! claims iss = sub = client_id, aud = token URL, exp at most five minutes
//! ahead, a unique jti; header alg, kid, typ JWT). RFC 7523 for the assertion
//! type.

use std::sync::atomic::{AtomicU64, Ordering};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use jsonwebtoken::{Algorithm, EncodingKey, Header};
use serde::{Deserialize, Serialize};

/// The client assertion lives this long (the specification's maximum is five minutes).
pub const ASSERTION_LIFETIME: Duration = Duration::from_secs(300);
/// A cached token is renewed this long before its stated expiry (clock skew and flight time).
pub const EXPIRY_MARGIN: Duration = Duration::from_secs(30);
/// The OAuth client assertion type for a JWT (RFC 7523).
pub const ASSERTION_TYPE: &str = "urn:ietf:params:oauth:client-assertion-type:jwt-bearer";

/// Signing algorithm of the client assertion.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SigningAlg {
    /// RSASSA-PKCS1-v1_5 with SHA-384.
    Rs384,
    /// ECDSA P-384 with SHA-384.
    Es384,
}

impl std::str::FromStr for SigningAlg {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, Self::Err> {
        match s {
            "RS384" => Ok(Self::Rs384),
            "ES384" => Ok(Self::Es384),
            other => Err(format!("signing algorithm must be RS384 or ES384, not '{other}'")),
        }
    }
}

/// Settings of the token source.
#[derive(Clone)]
pub struct SmartSettings {
    /// The authorization server's token endpoint.
    pub token_url: String,
    /// The client id registered with the EHR.
    pub client_id: String,
    /// Requested scopes (space separated).
    pub scope: String,
    /// Key id announced in the JWT header (the key's `kid` in the registered JWK Set).
    pub key_id: String,
    /// Signing algorithm.
    pub alg: SigningAlg,
}

impl std::fmt::Debug for SmartSettings {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SmartSettings")
            .field("token_url", &self.token_url)
            .field("client_id", &self.client_id)
            .field("scope", &self.scope)
            .field("key_id", &self.key_id)
            .field("alg", &self.alg)
            .finish_non_exhaustive()
    }
}

#[derive(Clone)]
struct CachedToken {
    value: String,
    renew_at: Instant,
}

/// Obtains and caches access tokens. Shared by every call of a client.
pub struct TokenSource {
    settings: SmartSettings,
    key: EncodingKey,
    cache: tokio::sync::Mutex<Option<CachedToken>>,
}

impl std::fmt::Debug for TokenSource {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("TokenSource").field("settings", &self.settings).finish_non_exhaustive()
    }
}

#[derive(Serialize)]
struct AssertionClaims<'a> {
    iss: &'a str,
    sub: &'a str,
    aud: &'a str,
    exp: u64,
    iat: u64,
    jti: String,
}

#[derive(Deserialize)]
struct TokenResponse {
    access_token: String,
    #[serde(default)]
    expires_in: Option<u64>,
}

/// A token that could not be obtained.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TokenError {
    /// What went wrong.
    pub how: String,
    /// A timeout (the upstream call is then a 504, not a 502).
    pub timed_out: bool,
}

impl From<String> for TokenError {
    fn from(how: String) -> Self {
        Self { how, timed_out: false }
    }
}

static JTI_COUNTER: AtomicU64 = AtomicU64::new(0);

impl TokenSource {
    /// A token source over a PEM private key (PKCS#8; PKCS#1 also accepted for RSA).
    pub fn new(settings: SmartSettings, private_key_pem: &[u8]) -> Result<Self, String> {
        let key = match settings.alg {
            SigningAlg::Rs384 => EncodingKey::from_rsa_pem(private_key_pem),
            SigningAlg::Es384 => EncodingKey::from_ec_pem(private_key_pem),
        }
        .map_err(|e| format!("the private key is not a {:?} PEM key: {e}", settings.alg))?;
        let source = Self { settings, key, cache: tokio::sync::Mutex::new(None) };
        // Sign once now so that a key of the wrong kind fails at start, not at the first request.
        source.assertion()?;
        Ok(source)
    }

    /// A fresh signed client assertion.
    pub fn assertion(&self) -> Result<String, String> {
        let now = SystemTime::now().duration_since(UNIX_EPOCH).map_err(|e| e.to_string())?;
        let n = JTI_COUNTER.fetch_add(1, Ordering::Relaxed);
        let claims = AssertionClaims {
            iss: &self.settings.client_id,
            sub: &self.settings.client_id,
            aud: &self.settings.token_url,
            iat: now.as_secs(),
            exp: now.as_secs() + ASSERTION_LIFETIME.as_secs(),
            jti: format!("{:x}-{:x}-{n:x}", now.as_nanos(), std::process::id()),
        };
        let mut header = Header::new(match self.settings.alg {
            SigningAlg::Rs384 => Algorithm::RS384,
            SigningAlg::Es384 => Algorithm::ES384,
        });
        header.kid = Some(self.settings.key_id.clone());
        header.typ = Some("JWT".into());
        jsonwebtoken::encode(&header, &claims, &self.key)
            .map_err(|e| format!("the client assertion was not signed: {e}"))
    }

    /// The current access token, fetched when none is cached or it is about to expire.
    /// The token request gets `call_timeout`, never past `deadline` (counted after
    /// waiting for a parallel call's fetch).
    pub async fn token(
        &self,
        http: &reqwest::Client,
        call_timeout: Duration,
        deadline: Instant,
    ) -> Result<String, TokenError> {
        let mut cache = self.cache.lock().await;
        if let Some(t) = cache.as_ref().filter(|t| Instant::now() < t.renew_at) {
            return Ok(t.value.clone());
        }
        let timeout = call_timeout.min(deadline.saturating_duration_since(Instant::now()));
        if timeout.is_zero() {
            return Err(TokenError {
                how: "the overall deadline passed before a token was obtained".into(),
                timed_out: true,
            });
        }
        let fetched = self.fetch(http, timeout).await?;
        let value = fetched.access_token.clone();
        // Renewed EXPIRY_MARGIN before expiry; a token that lives shorter than
        // twice the margin is renewed at half its life. Without expires_in
        // (required by the specification) the token is used for this call only.
        *cache = fetched.expires_in.map(Duration::from_secs).map(|life| CachedToken {
            value: value.clone(),
            renew_at: Instant::now() + life.saturating_sub(EXPIRY_MARGIN).max(life / 2),
        });
        Ok(value)
    }

    /// Forget `used` if it is still the cached token (the server refused it).
    /// Calls refused in parallel with the same token cause one refresh, not many.
    pub async fn invalidate(&self, used: &str) {
        let mut cache = self.cache.lock().await;
        if cache.as_ref().is_some_and(|t| t.value == used) {
            *cache = None;
        }
    }

    async fn fetch(&self, http: &reqwest::Client, timeout: Duration) -> Result<TokenResponse, TokenError> {
        let assertion = self.assertion()?;
        let form = [
            ("grant_type", "client_credentials"),
            ("scope", self.settings.scope.as_str()),
            ("client_assertion_type", ASSERTION_TYPE),
            ("client_assertion", assertion.as_str()),
        ];
        let resp = http
            .post(&self.settings.token_url)
            .header(reqwest::header::ACCEPT, "application/json")
            .form(&form)
            .timeout(timeout)
            .send()
            .await
            .map_err(|e| TokenError {
                how: if e.is_timeout() {
                    format!("the token endpoint did not answer within {} ms", timeout.as_millis())
                } else {
                    format!("the token endpoint could not be reached: {e}")
                },
                timed_out: e.is_timeout(),
            })?;
        let status = resp.status();
        if !status.is_success() {
            return Err(format!("the token endpoint answered HTTP {}", status.as_u16()).into());
        }
        let body = resp.bytes().await.map_err(|e| format!("the token response was not read: {e}"))?;
        let token: TokenResponse =
            serde_json::from_slice(&body).map_err(|e| format!("the token response has no usable access_token: {e}"))?;
        if token.access_token.is_empty() {
            return Err("the token response has an empty access_token".to_owned().into());
        }
        Ok(token)
    }
}
