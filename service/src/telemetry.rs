//! Logging: JSON lines on stdout, one per request, never any patient data.
//!
//! What may be logged: method, route template, status, latency, request id,
//! guidance status, severity and counts. What may not: bodies, names,
//! identifiers, birth dates, resource ids (DEVELOPERS.md: telemetry).
//!
//! Logging never blocks a request and never takes the service down: a log
//! line is handed to a bounded queue and written by a thread of its own. A
//! line the queue has no room for, or that the writer cannot write (a pipe
//! whose reader has gone, a closed descriptor), is dropped and counted
//! (`calcium_cds_log_lines_dropped_total` in /metrics). Request threads never
//! touch stdout or stderr, so a broken or stalled log pipe cannot stall or
//! panic them.

use std::io::Write;
use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
use std::sync::mpsc::{Receiver, SyncSender, TrySendError};
use std::sync::{Mutex, OnceLock};
use std::time::{Duration, Instant};

use tracing_subscriber::EnvFilter;
use tracing_subscriber::fmt::MakeWriter;

/// Log lines waiting for the writer thread at most (operational bound: at a
/// few hundred bytes a line, about 2 MiB).
pub const LOG_QUEUE_LINES: usize = 8192;

/// Lines dropped since start: no room in the queue, or the write failed.
static DROPPED: AtomicU64 = AtomicU64::new(0);
/// Lines queued and not yet written (or dropped) by the writer thread.
static PENDING: AtomicUsize = AtomicUsize::new(0);
/// The queue's sending end, once `init` has run.
static QUEUE: OnceLock<SyncSender<Vec<u8>>> = OnceLock::new();

/// Log lines dropped since start (what /metrics reports).
pub fn dropped_lines() -> u64 {
    DROPPED.load(Ordering::Relaxed)
}

/// Hand one finished line to the queue; never blocks.
fn enqueue(sender: &SyncSender<Vec<u8>>, line: Vec<u8>) {
    PENDING.fetch_add(1, Ordering::SeqCst);
    match sender.try_send(line) {
        Ok(()) => {}
        Err(TrySendError::Full(_) | TrySendError::Disconnected(_)) => {
            PENDING.fetch_sub(1, Ordering::SeqCst);
            DROPPED.fetch_add(1, Ordering::Relaxed);
        }
    }
}

/// The writer thread: write each line to `out`; a line that fails is counted
/// as dropped and the thread carries on (the next line may succeed).
fn drain(rx: &Receiver<Vec<u8>>, out: &mut dyn Write) {
    while let Ok(line) = rx.recv() {
        if out.write_all(&line).and_then(|()| out.flush()).is_err() {
            DROPPED.fetch_add(1, Ordering::Relaxed);
        }
        PENDING.fetch_sub(1, Ordering::SeqCst);
    }
}

/// Wait (at most `bound`) until the queued lines are written or dropped, so
/// that the last lines before exit are not lost. Never waits past `bound`,
/// even when the log pipe is stalled.
pub fn flush(bound: Duration) {
    let start = Instant::now();
    while PENDING.load(Ordering::SeqCst) > 0 && start.elapsed() < bound {
        std::thread::sleep(Duration::from_millis(5));
    }
}

/// A `MakeWriter` whose writers collect one event and queue it when dropped.
#[derive(Clone)]
struct QueueWriter {
    sender: SyncSender<Vec<u8>>,
}

/// One event's bytes on their way to the queue.
struct Line {
    sender: SyncSender<Vec<u8>>,
    buf: Vec<u8>,
}

impl Write for Line {
    fn write(&mut self, data: &[u8]) -> std::io::Result<usize> {
        self.buf.extend_from_slice(data);
        Ok(data.len())
    }

    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

impl Drop for Line {
    fn drop(&mut self) {
        if !self.buf.is_empty() {
            enqueue(&self.sender, std::mem::take(&mut self.buf));
        }
    }
}

impl<'a> MakeWriter<'a> for QueueWriter {
    type Writer = Line;

    fn make_writer(&'a self) -> Self::Writer {
        Line { sender: self.sender.clone(), buf: Vec::with_capacity(256) }
    }
}

/// Start the writer thread on `out` (once per process); the queue's sender.
fn start_queue(out: Box<dyn Write + Send>) -> Option<SyncSender<Vec<u8>>> {
    static STARTED: Mutex<bool> = Mutex::new(false);
    let mut started = STARTED.lock().ok()?;
    if *started {
        return QUEUE.get().cloned();
    }
    let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<u8>>(LOG_QUEUE_LINES);
    let mut out = out;
    std::thread::Builder::new().name("log-writer".into()).spawn(move || drain(&rx, &mut out)).ok()?;
    let _ = QUEUE.set(tx.clone());
    *started = true;
    Some(tx)
}

/// Install the global subscriber, writing to stdout through the queue. `json`
/// selects JSON lines; the filter comes from `CALCIUM_CDS_LOG` (default
/// `info`). Safe to call more than once.
pub fn init(json: bool) {
    let Some(sender) = start_queue(Box::new(std::io::stdout())) else { return };
    let filter = EnvFilter::try_from_env("CALCIUM_CDS_LOG").unwrap_or_else(|_| EnvFilter::new("info"));
    let builder = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(QueueWriter { sender })
        .with_target(false)
        .with_ansi(false)
        // The writer never fails; and the subscriber's own error report goes to stderr, which may be broken too.
        .log_internal_errors(false);
    let _ = if json { builder.json().flatten_event(true).try_init() } else { builder.compact().try_init() };
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A sink that always fails, as a pipe whose reader has gone does.
    struct Broken;
    impl Write for Broken {
        fn write(&mut self, _: &[u8]) -> std::io::Result<usize> {
            Err(std::io::Error::from(std::io::ErrorKind::BrokenPipe))
        }
        fn flush(&mut self) -> std::io::Result<()> {
            Ok(())
        }
    }

    // The counters are process-wide, so each test compares before and after
    // (other tests in this binary never log through the queue).

    #[test]
    fn a_full_queue_drops_and_counts_instead_of_waiting() {
        // A queue of 2 with no reader: the first two fit, the third is dropped at once.
        let (tx, _rx) = std::sync::mpsc::sync_channel::<Vec<u8>>(2);
        let before = dropped_lines();
        for _ in 0..3 {
            enqueue(&tx, b"line\n".to_vec());
        }
        assert!(dropped_lines() > before, "the third line is counted as dropped");
    }

    #[test]
    fn failed_writes_are_counted_and_the_writer_carries_on() {
        let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<u8>>(4);
        tx.send(b"a\n".to_vec()).unwrap();
        tx.send(b"b\n".to_vec()).unwrap();
        drop(tx);
        let before = DROPPED.load(Ordering::Relaxed);
        PENDING.fetch_add(2, Ordering::SeqCst);
        drain(&rx, &mut Broken);
        // Both lines were tried (the writer did not stop at the first failure).
        assert!(DROPPED.load(Ordering::Relaxed) >= before + 2);
    }

    #[test]
    fn written_lines_arrive_whole_and_in_order() {
        let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<u8>>(4);
        let writer = QueueWriter { sender: tx };
        for text in ["one\n", "two\n"] {
            let mut w = writer.make_writer();
            w.write_all(text.as_bytes()).unwrap();
        }
        drop(writer);
        let mut out = Vec::new();
        drain(&rx, &mut out);
        assert_eq!(String::from_utf8(out).unwrap(), "one\ntwo\n");
    }
}
