//! The container's contract without a container engine: read the final stage
//! of deploy/Dockerfile (ENV, USER, EXPOSE, ENTRYPOINT, CMD) and run the
//! service binary exactly that way (same arguments, only that environment,
//! the same port, the numeric user when the test runs as root), then check
//! that the probes answer, that it serves an assessment, and that SIGTERM
//! stops it cleanly.

use std::io::Read;
use std::os::unix::process::CommandExt;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use crate::helpers::repo_path as repo;

/// What the Dockerfile's final stage says.
#[derive(Debug, Default)]
struct Contract {
    env: Vec<(String, String)>,
    user: Option<(u32, u32)>,
    expose: Vec<u16>,
    entrypoint: Vec<String>,
    cmd: Vec<String>,
}

fn exec_form(rest: &str) -> Vec<String> {
    serde_json::from_str(rest.trim()).unwrap_or_else(|e| panic!("ENTRYPOINT/CMD must use the exec form ({e}): {rest}"))
}

fn contract() -> Contract {
    let text = std::fs::read_to_string(repo("deploy/Dockerfile")).expect("deploy/Dockerfile");
    let final_stage = text.rsplit_once("\nFROM ").map(|(_, s)| s).expect("a multi-stage Dockerfile");
    let mut c = Contract::default();
    for line in final_stage.lines().map(str::trim).filter(|l| !l.starts_with('#')) {
        let Some((word, rest)) = line.split_once(' ') else { continue };
        match word {
            "ENV" => {
                let (k, v) = rest.split_once('=').expect("ENV KEY=value");
                c.env.push((k.trim().to_owned(), v.trim().to_owned()));
            }
            "USER" => {
                let (u, g) = rest.trim().split_once(':').expect("USER uid:gid");
                c.user = Some((u.parse().expect("a numeric uid"), g.parse().expect("a numeric gid")));
            }
            "EXPOSE" => c.expose.extend(rest.split_whitespace().map(|p| p.parse::<u16>().expect("a port"))),
            "ENTRYPOINT" => c.entrypoint = exec_form(rest),
            "CMD" => c.cmd = exec_form(rest),
            _ => {}
        }
    }
    c
}

fn running_as_root() -> bool {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| s.lines().find(|l| l.starts_with("Uid:")).map(|l| l.split_whitespace().nth(1) == Some("0")))
        .unwrap_or(false)
}

struct Running(Child);

impl Drop for Running {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

async fn get_status(client: &reqwest::Client, url: &str) -> Option<u16> {
    client.get(url).send().await.ok().map(|r| r.status().as_u16())
}

#[test]
fn the_dockerfile_states_a_non_root_user_and_the_listen_address() {
    let c = contract();
    let (uid, gid) = c.user.expect("a USER line");
    assert!(uid != 0 && gid != 0, "the image runs as a non-root numeric user");
    assert_eq!(c.expose, [8080]);
    assert!(c.env.contains(&("CALCIUM_CDS_LISTEN".into(), "0.0.0.0:8080".into())), "{:?}", c.env);
    assert_eq!(c.entrypoint, ["/usr/local/bin/calcium-cds"]);
    assert_eq!(c.cmd, ["serve"]);
    let ignore = std::fs::read_to_string(repo(".dockerignore")).expect(".dockerignore");
    assert!(ignore.lines().any(|l| l.trim() == "target/"), "the build context leaves target/ out");
}

#[tokio::test]
async fn the_binary_run_as_the_image_runs_it_answers_the_probes_and_stops_on_sigterm() {
    // Arrange: the image's command, environment and user.
    let c = contract();
    let port = c.expose[0];
    // As in the image: the binary in a directory every user can read, mode 0555.
    let dir = std::env::temp_dir().join(format!("calcium-cds-image-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("a directory for the binary");
    std::fs::set_permissions(&dir, std::os::unix::fs::PermissionsExt::from_mode(0o755)).expect("dir mode");
    let binary = dir.join("calcium-cds");
    std::fs::copy(env!("CARGO_BIN_EXE_calcium-cds"), &binary).expect("the binary is copied");
    std::fs::set_permissions(&binary, std::os::unix::fs::PermissionsExt::from_mode(0o555)).expect("binary mode");
    let mut cmd = Command::new(&binary);
    cmd.args(&c.cmd).env_clear().envs(c.env.iter().map(|(k, v)| (k, v))).stdout(Stdio::piped()).stderr(Stdio::piped());
    if running_as_root() {
        let (uid, gid) = c.user.expect("a USER line");
        cmd.uid(uid).gid(gid);
    }
    let mut child = Running(cmd.spawn().expect("the binary starts"));
    let client = reqwest::Client::new();
    let base = format!("http://127.0.0.1:{port}");

    // Act: wait (bounded) for the readiness probe.
    let start = Instant::now();
    let mut ready = None;
    while start.elapsed() < Duration::from_secs(20) {
        if let Some(status) = get_status(&client, &format!("{base}/readyz")).await {
            ready = Some(status);
            break;
        }
        if let Ok(Some(exit)) = child.0.try_wait() {
            let mut err = String::new();
            let _ = child.0.stderr.take().map(|mut e| e.read_to_string(&mut err));
            panic!("the service exited ({exit}) before it was ready (is port {port} free?): {err}");
        }
        tokio::time::sleep(Duration::from_millis(100)).await;
    }

    // Assert: probes, a real assessment, then a clean stop on SIGTERM.
    assert_eq!(ready, Some(200), "readiness");
    assert_eq!(get_status(&client, &format!("{base}/livez")).await, Some(200), "liveness");
    let example = crate::helpers::example("ionized-low-seizure-toddler");
    let resp = client
        .post(format!("{base}/fhir/$assess"))
        .header("content-type", "application/fhir+json")
        .body(example)
        .send()
        .await
        .expect("an answer");
    assert_eq!(resp.status().as_u16(), 200);
    let pid = child.0.id().to_string();
    let sent = Command::new("kill").args(["-TERM", &pid]).status().expect("kill runs");
    assert!(sent.success());
    // Readiness goes false first, while the listener still answers (the drain delay).
    let mut not_ready = None;
    let drain = Instant::now();
    while drain.elapsed() < Duration::from_secs(3) {
        if get_status(&client, &format!("{base}/readyz")).await == Some(503) {
            not_ready = Some(drain.elapsed());
            break;
        }
        tokio::time::sleep(Duration::from_millis(50)).await;
    }
    assert!(not_ready.is_some(), "readiness went false after SIGTERM while still listening");
    assert_eq!(get_status(&client, &format!("{base}/livez")).await, Some(200), "alive while draining");
    let stop = Instant::now();
    let mut exit = None;
    while stop.elapsed() < Duration::from_secs(40) {
        if let Ok(Some(status)) = child.0.try_wait() {
            exit = Some(status);
            break;
        }
        tokio::time::sleep(Duration::from_millis(100)).await;
    }
    let exit = exit.expect("the service stops after SIGTERM");
    assert!(exit.success(), "a clean exit after SIGTERM: {exit}");
    let _ = std::fs::remove_dir_all(&dir);
}

/// A free loopback port (bound and released; the binary binds it next).
fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0").and_then(|l| l.local_addr()).map(|a| a.port()).expect("a free port")
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn a_request_in_flight_at_sigterm_is_answered_before_the_process_exits() {
    use crate::upstream::PATIENT_ID;

    // Arrange: an EHR whose Observation search takes 1.5 s, and the binary pointed at it.
    let ehr = crate::upstream::ehr_with_labs(Duration::from_millis(1500)).await;
    let port = free_port();
    let mut child = Running(
        Command::new(env!("CARGO_BIN_EXE_calcium-cds"))
            .arg("serve")
            .env_clear()
            .env("CALCIUM_CDS_LISTEN", format!("127.0.0.1:{port}"))
            .env("CALCIUM_CDS_FHIR_BASE_URL", ehr.uri())
            .env("CALCIUM_CDS_SHUTDOWN_DELAY_MS", "200")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("the binary starts"),
    );
    let client = reqwest::Client::new();
    let base = format!("http://127.0.0.1:{port}");
    let start = Instant::now();
    while get_status(&client, &format!("{base}/readyz")).await != Some(200) {
        assert!(start.elapsed() < Duration::from_secs(20), "the service did not become ready");
        tokio::time::sleep(Duration::from_millis(50)).await;
    }

    // Act: start a patient assessment, wait until it is waiting on the slow search, then SIGTERM.
    let in_flight = tokio::spawn({
        let client = client.clone();
        let url = format!("{base}/fhir/Patient/{PATIENT_ID}/$assess");
        async move { client.post(url).send().await.map(|r| r.status().as_u16()) }
    });
    let waiting = Instant::now();
    loop {
        let requests = ehr.received_requests().await.unwrap_or_default();
        if requests.iter().any(|r| r.url.path() == "/Observation") {
            break;
        }
        assert!(waiting.elapsed() < Duration::from_secs(10), "the assessment never reached the Observation search");
        tokio::time::sleep(Duration::from_millis(20)).await;
    }
    let pid = child.0.id().to_string();
    assert!(Command::new("kill").args(["-TERM", &pid]).status().expect("kill runs").success());

    // Assert: the in-flight request gets its full answer, and then the process exits cleanly.
    let status = in_flight.await.expect("the request task").expect("an answer, not a dropped connection");
    assert_eq!(status, 200, "the request in flight at SIGTERM is answered");
    let stop = Instant::now();
    let exit = loop {
        if let Ok(Some(status)) = child.0.try_wait() {
            break status;
        }
        assert!(stop.elapsed() < Duration::from_secs(30), "the service did not exit after SIGTERM");
        tokio::time::sleep(Duration::from_millis(50)).await;
    };
    assert!(exit.success(), "a clean exit: {exit}");
    assert_eq!(get_status(&client, &format!("{base}/livez")).await, None, "the listener is closed");
}
