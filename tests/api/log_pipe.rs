//! Logging never stops the service (issue 14): the binary runs with its log
//! on a real pipe whose reader goes away (or is gone before it starts, or
//! with its standard streams closed), and must still answer every request and
//! probe, count the log lines it could not write, and stop on SIGTERM.
//!
//! No timing assertions: every wait is a generous bound on something that
//! must happen.

use std::io::{BufRead, BufReader};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

struct Running(Child);

impl Drop for Running {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// A free loopback port (bound and released; the binary binds it next).
fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0").and_then(|l| l.local_addr()).map(|a| a.port()).expect("a free port")
}

fn serve_command(port: u16) -> Command {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_calcium-cds"));
    cmd.arg("serve")
        .env_clear()
        .env("CALCIUM_CDS_LISTEN", format!("127.0.0.1:{port}"))
        .env("CALCIUM_CDS_LOG", "info")
        .env("CALCIUM_CDS_SHUTDOWN_DELAY_MS", "100");
    cmd
}

async fn status_of(client: &reqwest::Client, url: &str) -> Option<u16> {
    client.get(url).send().await.ok().map(|r| r.status().as_u16())
}

/// Wait (bounded) until /readyz answers 200; a process that exits first fails the test.
async fn wait_ready(child: &mut Running, client: &reqwest::Client, base: &str) {
    let start = Instant::now();
    loop {
        if status_of(client, &format!("{base}/readyz")).await == Some(200) {
            return;
        }
        if let Ok(Some(exit)) = child.0.try_wait() {
            panic!("the service exited ({exit}) before it was ready");
        }
        assert!(start.elapsed() < Duration::from_secs(30), "the service did not become ready");
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
}

/// Requests of every kind still get their full answer.
async fn requests_are_answered(client: &reqwest::Client, base: &str) {
    let example = crate::helpers::example_at_now("ionized-low-seizure-toddler");
    for round in 0..3 {
        let resp = client
            .post(format!("{base}/fhir/$assess"))
            .header("content-type", "application/fhir+json")
            .body(example.clone())
            .send()
            .await
            .unwrap_or_else(|e| panic!("round {round}: an answer to $assess, not a dropped connection: {e}"));
        assert_eq!(resp.status().as_u16(), 200, "round {round}");
        let body: serde_json::Value = resp.json().await.expect("a whole JSON body");
        assert_eq!(body["resourceType"], "Bundle");
        assert_eq!(status_of(client, &format!("{base}/fhir/metadata")).await, Some(200), "round {round}: metadata");
        assert_eq!(status_of(client, &format!("{base}/livez")).await, Some(200), "round {round}: liveness");
        assert_eq!(status_of(client, &format!("{base}/readyz")).await, Some(200), "round {round}: readiness");
    }
}

/// The dropped-log-lines counter, read from /metrics.
async fn dropped_lines(client: &reqwest::Client, base: &str) -> u64 {
    let text = client
        .get(format!("{base}/metrics"))
        .send()
        .await
        .expect("metrics answer")
        .text()
        .await
        .expect("a metrics body");
    text.lines()
        .find_map(|l| l.strip_prefix("calcium_cds_log_lines_dropped_total "))
        .and_then(|v| v.trim().parse().ok())
        .unwrap_or_else(|| panic!("no calcium_cds_log_lines_dropped_total in {text}"))
}

/// Wait (bounded) until the counter of dropped log lines is above zero: the
/// request lines that could not be written were counted, not waited on.
async fn drops_are_counted(client: &reqwest::Client, base: &str) {
    let start = Instant::now();
    loop {
        if dropped_lines(client, base).await > 0 {
            return;
        }
        assert!(start.elapsed() < Duration::from_secs(20), "no dropped log line was counted");
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
}

/// SIGTERM, then a clean exit within a generous bound.
async fn sigterm_stops_it(mut child: Running) {
    let pid = child.0.id().to_string();
    assert!(Command::new("kill").args(["-TERM", &pid]).status().expect("kill runs").success());
    let start = Instant::now();
    let exit = loop {
        if let Ok(Some(status)) = child.0.try_wait() {
            break status;
        }
        assert!(start.elapsed() < Duration::from_secs(30), "the service did not exit after SIGTERM");
        tokio::time::sleep(Duration::from_millis(50)).await;
    };
    assert!(exit.success(), "a clean exit after SIGTERM: {exit}");
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_log_reader_that_goes_away_stops_neither_requests_nor_probes_nor_sigterm() {
    // Arrange: the log on pipes; read stdout until the "listening" line (logs go to stdout).
    let port = free_port();
    let mut child =
        Running(serve_command(port).stdout(Stdio::piped()).stderr(Stdio::piped()).spawn().expect("the binary starts"));
    let stdout = child.0.stdout.take().expect("stdout");
    let (tx, rx) = std::sync::mpsc::channel();
    std::thread::spawn(move || {
        let mut reader = BufReader::new(stdout);
        let mut line = String::new();
        while reader.read_line(&mut line).unwrap_or(0) > 0 {
            let v: serde_json::Value = serde_json::from_str(&line).unwrap_or_default();
            if v["message"] == "listening" {
                // The reader goes away here: the pipe's only read end is dropped with `reader`.
                let _ = tx.send(line.clone());
                return;
            }
            line.clear();
        }
    });
    // Bounded: a service that logs elsewhere fails here instead of hanging the test.
    let listening = rx.recv_timeout(Duration::from_secs(30)).ok();
    assert!(listening.is_some(), "the 'listening' line is a JSON line on stdout");
    drop(child.0.stderr.take());
    let client = reqwest::Client::new();
    let base = format!("http://127.0.0.1:{port}");

    // Act and assert: every request is answered, the lost lines are counted, SIGTERM stops it.
    requests_are_answered(&client, &base).await;
    drops_are_counted(&client, &base).await;
    sigterm_stops_it(child).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn log_pipes_broken_before_start_do_not_stop_the_service() {
    // Arrange: stdout and stderr on pipes whose read ends are closed before the binary starts.
    let (reader, writer) = std::io::pipe().expect("a pipe");
    drop(reader);
    let port = free_port();
    let mut child = Running(
        serve_command(port)
            .stdout(writer.try_clone().expect("the write end"))
            .stderr(writer)
            .spawn()
            .expect("the binary starts"),
    );
    let client = reqwest::Client::new();
    let base = format!("http://127.0.0.1:{port}");

    // Act and assert.
    wait_ready(&mut child, &client, &base).await;
    requests_are_answered(&client, &base).await;
    drops_are_counted(&client, &base).await;
    sigterm_stops_it(child).await;
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn closed_standard_streams_at_start_do_not_stop_the_service() {
    // Arrange: stdout and stderr closed (not redirected) when the binary starts, as `2>&- >&-` does.
    let port = free_port();
    let mut cmd = Command::new("sh");
    cmd.args(["-c", r#"exec "$0" serve >&- 2>&-"#, env!("CARGO_BIN_EXE_calcium-cds")])
        .env_clear()
        .env("CALCIUM_CDS_LISTEN", format!("127.0.0.1:{port}"))
        .env("CALCIUM_CDS_LOG", "info")
        .env("CALCIUM_CDS_SHUTDOWN_DELAY_MS", "100")
        .stdin(Stdio::null());
    let mut child = Running(cmd.spawn().expect("sh starts the binary"));
    let client = reqwest::Client::new();
    let base = format!("http://127.0.0.1:{port}");

    // Act and assert (the lines go nowhere; whether they count as dropped depends on
    // what the platform puts on a closed descriptor, so only the service is checked).
    wait_ready(&mut child, &client, &base).await;
    requests_are_answered(&client, &base).await;
    sigterm_stops_it(child).await;
}
