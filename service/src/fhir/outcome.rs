//! OperationOutcome: request-level errors and the list of set-aside inputs.

use serde_json::{Value, json};

use super::profiles::ProfileError;

/// OperationOutcome.issue.severity.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IssueSeverityLevel {
    /// fatal
    Fatal,
    /// error
    Error,
    /// warning
    Warning,
    /// information
    Information,
}

impl IssueSeverityLevel {
    /// The FHIR code.
    pub fn code(self) -> &'static str {
        match self {
            Self::Fatal => "fatal",
            Self::Error => "error",
            Self::Warning => "warning",
            Self::Information => "information",
        }
    }
}

/// OperationOutcome.issue.code (IssueType, required binding).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IssueCode {
    /// invalid
    Invalid,
    /// structure
    Structure,
    /// required
    Required,
    /// value
    Value,
    /// duplicate
    Duplicate,
    /// not-supported
    NotSupported,
    /// business-rule
    BusinessRule,
    /// incomplete
    Incomplete,
    /// too-costly (request too large)
    TooCostly,
    /// informational
    Informational,
    /// exception
    Exception,
    /// not-found
    NotFound,
    /// throttled (too many requests at once)
    Throttled,
    /// timeout
    Timeout,
    /// login (authentication required)
    Login,
    /// security (credentials refused)
    Security,
    /// forbidden (not allowed)
    Forbidden,
}

impl IssueCode {
    /// The FHIR code.
    pub fn code(self) -> &'static str {
        match self {
            Self::Invalid => "invalid",
            Self::Structure => "structure",
            Self::Required => "required",
            Self::Value => "value",
            Self::Duplicate => "duplicate",
            Self::NotSupported => "not-supported",
            Self::BusinessRule => "business-rule",
            Self::Incomplete => "incomplete",
            Self::TooCostly => "too-costly",
            Self::Informational => "informational",
            Self::Exception => "exception",
            Self::NotFound => "not-found",
            Self::Throttled => "throttled",
            Self::Timeout => "timeout",
            Self::Login => "login",
            Self::Security => "security",
            Self::Forbidden => "forbidden",
        }
    }
}

/// One issue.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Issue {
    /// Severity.
    pub severity: IssueSeverityLevel,
    /// Type.
    pub code: IssueCode,
    /// FHIRPath expressions of the elements concerned.
    pub expression: Vec<String>,
    /// Human-readable text.
    pub diagnostics: String,
}

impl Issue {
    /// An error issue.
    pub fn error(code: IssueCode, expression: Vec<String>, diagnostics: impl Into<String>) -> Self {
        Self { severity: IssueSeverityLevel::Error, code, expression, diagnostics: diagnostics.into() }
    }

    /// As JSON.
    pub fn to_json(&self) -> Value {
        let mut v = json!({
            "severity": self.severity.code(),
            "code": self.code.code(),
            "diagnostics": self.diagnostics,
        });
        let exprs: Vec<&String> = self.expression.iter().filter(|e| !e.is_empty()).collect();
        if !exprs.is_empty() {
            v["expression"] = json!(exprs);
        }
        v
    }
}

/// A problem that ends the request, with its HTTP status.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct RequestError {
    /// HTTP status.
    pub status: u16,
    /// Issues.
    pub issues: Vec<Issue>,
}

impl RequestError {
    /// One error issue.
    pub fn single(status: u16, code: IssueCode, expression: impl Into<String>, diagnostics: impl Into<String>) -> Self {
        Self { status, issues: vec![Issue::error(code, vec![expression.into()], diagnostics)] }
    }

    /// From profile errors of the resource at `prefix`.
    pub fn from_profile(status: u16, prefix: &str, errors: &[ProfileError]) -> Self {
        Self {
            status,
            issues: errors
                .iter()
                .map(|e| Issue::error(IssueCode::Structure, vec![format!("{prefix}{}", e.path)], e.message.clone()))
                .collect(),
        }
    }

    /// The OperationOutcome body.
    pub fn to_operation_outcome(&self) -> Value {
        operation_outcome(None, &self.issues)
    }
}

impl std::fmt::Display for RequestError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let texts: Vec<&str> = self.issues.iter().map(|i| i.diagnostics.as_str()).collect();
        write!(f, "HTTP {}: {}", self.status, texts.join("; "))
    }
}

/// An OperationOutcome resource.
pub fn operation_outcome(id: Option<&str>, issues: &[Issue]) -> Value {
    let mut oo = json!({
        "resourceType": "OperationOutcome",
        "issue": issues.iter().map(Issue::to_json).collect::<Vec<_>>(),
    });
    if let Some(id) = id {
        oo["id"] = json!(id);
    }
    oo
}
