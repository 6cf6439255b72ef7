//! W3C Trace Context (https://www.w3.org/TR/trace-context/): an incoming
//! `traceparent` is honoured (its trace id is logged and carried on), and
//! every upstream call sends a `traceparent` with the same trace id and a
//! new parent id. Without a valid incoming header a new trace is started.
//! The context travels in a task-local set by the request middleware.

use std::hash::{BuildHasher, Hasher};
use std::sync::atomic::{AtomicU64, Ordering};

/// A trace context: 32 hex trace id, 16 hex parent (span) id, 2 hex flags.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TraceContext {
    /// The trace id (lowercase hex, 32 digits, not all zero).
    pub trace_id: String,
    /// This hop's span id (lowercase hex, 16 digits, not all zero).
    pub span_id: String,
    /// The caller's span id from the incoming header, when there was one.
    pub parent_id: Option<String>,
    /// Trace flags (hex, 2 digits).
    pub flags: String,
}

tokio::task_local! {
    static CURRENT: TraceContext;
}

static COUNTER: AtomicU64 = AtomicU64::new(1);

fn random_u64() -> u64 {
    // RandomState is seeded randomly per process; mix in a counter and the clock.
    let mut h = std::collections::hash_map::RandomState::new().build_hasher();
    h.write_u64(COUNTER.fetch_add(1, Ordering::Relaxed));
    h.write_u128(std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map_or(0, |d| d.as_nanos()));
    h.finish().max(1)
}

fn is_hex(s: &str, len: usize) -> bool {
    s.len() == len && s.bytes().all(|b| b.is_ascii_digit() || (b'a'..=b'f').contains(&b))
}

/// A fresh span id.
pub fn new_span_id() -> String {
    format!("{:016x}", random_u64())
}

impl TraceContext {
    /// Parse a `traceparent` header (version 00 layout; later versions are read by
    /// their first four fields, as the specification asks). None when invalid.
    pub fn parse(header: &str) -> Option<Self> {
        let mut parts = header.trim().split('-');
        let (version, trace_id, span_id, flags) = (parts.next()?, parts.next()?, parts.next()?, parts.next()?);
        if !is_hex(version, 2) || version == "ff" || (version == "00" && parts.next().is_some()) {
            return None;
        }
        if !is_hex(trace_id, 32) || trace_id.bytes().all(|b| b == b'0') {
            return None;
        }
        if !is_hex(span_id, 16) || span_id.bytes().all(|b| b == b'0') || !is_hex(flags, 2) {
            return None;
        }
        Some(Self {
            trace_id: trace_id.to_owned(),
            span_id: new_span_id(),
            parent_id: Some(span_id.to_owned()),
            flags: flags.to_owned(),
        })
    }

    /// A new trace. `sampled` sets the sampled flag: on when this service
    /// exports spans (it then records the trace), off otherwise.
    pub fn start(sampled: bool) -> Self {
        Self {
            trace_id: format!("{:016x}{:016x}", random_u64(), random_u64()),
            span_id: new_span_id(),
            parent_id: None,
            flags: if sampled { "01" } else { "00" }.into(),
        }
    }

    /// Whether the sampled flag (bit 0 of the flags) is set.
    pub fn sampled(&self) -> bool {
        u8::from_str_radix(&self.flags, 16).is_ok_and(|f| f & 1 == 1)
    }

    /// The header for an outgoing call made as span `span_id` of this trace.
    pub fn header_for(&self, span_id: &str) -> String {
        format!("00-{}-{}-{}", self.trace_id, span_id, self.flags)
    }
}

/// Run `f` with `ctx` as the current trace context.
pub async fn scope<F: std::future::Future>(ctx: TraceContext, f: F) -> F::Output {
    CURRENT.scope(ctx, f).await
}

/// The current trace context, if any.
pub fn current() -> Option<TraceContext> {
    CURRENT.try_with(Clone::clone).ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn valid_headers_are_read_and_invalid_ones_refused() {
        // The example of the W3C Trace Context recommendation, section 3.2.
        let t = TraceContext::parse("00-4bf92f3577b34da6a3ce929d0e0e4736-00f067aa0ba902b7-01").expect("valid");
        assert_eq!(t.trace_id, "4bf92f3577b34da6a3ce929d0e0e4736");
        assert_eq!(t.flags, "01");
        assert!(t.sampled());
        assert_ne!(t.span_id, "00f067aa0ba902b7", "our hop gets its own span id");
        assert_eq!(t.parent_id.as_deref(), Some("00f067aa0ba902b7"), "the caller's span is our parent");
        for bad in [
            "00-00000000000000000000000000000000-00f067aa0ba902b7-01",
            "00-4bf92f3577b34da6a3ce929d0e0e4736-0000000000000000-01",
            "00-4BF92F3577B34DA6A3CE929D0E0E4736-00f067aa0ba902b7-01",
            "ff-4bf92f3577b34da6a3ce929d0e0e4736-00f067aa0ba902b7-01",
            "00-4bf92f3577b34da6a3ce929d0e0e4736-00f067aa0ba902b7-01-extra",
            "garbage",
        ] {
            assert_eq!(TraceContext::parse(bad), None, "{bad}");
        }
        let child = t.header_for(&new_span_id());
        assert!(child.starts_with("00-4bf92f3577b34da6a3ce929d0e0e4736-") && child.ends_with("-01"), "{child}");
        assert!(TraceContext::parse(&child).is_some());
        assert!(TraceContext::start(true).sampled() && !TraceContext::start(false).sampled());
        assert_eq!(TraceContext::start(true).parent_id, None);
    }
}
