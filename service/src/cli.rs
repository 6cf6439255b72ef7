//! The command line: `assess FILE|-` and `serve`.

use std::io::{Read, Write as _};

/// Print a line on standard output. A closed pipe (`calcium-cds rules show | head`)
/// is not an error worth a panic: the write fails quietly and the command ends as usual.
macro_rules! out {
    ($($arg:tt)*) => {{
        let _ = writeln!(std::io::stdout().lock(), $($arg)*);
    }};
}

/// Print a line on standard error; a closed or broken stderr is not worth a panic either.
macro_rules! err {
    ($($arg:tt)*) => {{
        let _ = writeln!(std::io::stderr().lock(), $($arg)*);
    }};
}

/// Print on standard output without a newline (see `out!`).
macro_rules! out_raw {
    ($($arg:tt)*) => {{
        let _ = write!(std::io::stdout().lock(), $($arg)*);
    }};
}
use std::process::ExitCode;

use crate::config::{
    ArgSources, AssessArgs, CheckArgs, Cli, Command, ConfigCommand, RulesCommand, ServeArgs, SynthArgs, load_rules,
};
use crate::engine::Engine;
use crate::fhir::datetime;

/// Exit code for a request the service refuses (its OperationOutcome is printed).
pub const EXIT_REQUEST_ERROR: u8 = 2;
/// Exit code for a configuration or start-up problem.
pub const EXIT_CONFIG_ERROR: u8 = 1;
/// Exit code of `assess` when its request file is missing or unreadable: a usage
/// problem, not a refused request (66 is EX_NOINPUT in the BSD sysexits.h list).
pub const EXIT_INPUT_UNREADABLE: u8 = 66;

/// Run the parsed command line.
pub fn run(cli: Cli, sources: &ArgSources) -> ExitCode {
    match cli.command {
        Command::Assess(args) => assess(&args),
        Command::Serve(args) => serve(&args),
        Command::Config(ConfigCommand::Check(args)) => config_check(&args, sources),
        Command::Rules(cmd) => rules_command(&cmd),
        Command::Check(args) => check_cases(&args),
        Command::Synth(args) => synth(&args),
    }
}

fn unix_now() -> i64 {
    std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).map(|d| d.as_secs() as i64).unwrap_or(0)
}

/// Parse `--now`, or take the system clock.
fn clock(now: Option<&String>) -> Result<(i64, bool), ExitCode> {
    match now {
        Some(text) => match datetime::parse_date_time(text) {
            Ok(t) if t.date_only.is_none() => Ok((t.when.latest, true)),
            _ => {
                err!(
                    "calcium-cds: --now must be an RFC 3339 date-time with seconds and an offset, e.g. 2026-11-30T15:00:00Z"
                );
                Err(ExitCode::from(EXIT_CONFIG_ERROR))
            }
        },
        None => Ok((unix_now(), false)),
    }
}

fn synth(args: &SynthArgs) -> ExitCode {
    use crate::synth;
    let cat = match synth::Catalogue::embedded() {
        Ok(c) => c,
        Err(e) => {
            err!("calcium-cds: {e}");
            return ExitCode::from(EXIT_CONFIG_ERROR);
        }
    };
    if args.list {
        out_raw!("{}", synth::list_text(&cat));
        return ExitCode::SUCCESS;
    }
    let (now, _) = match clock(args.now.as_ref()) {
        Ok(c) => c,
        Err(code) => return code,
    };
    let fail = |msg: String| {
        err!("calcium-cds: synth: {msg}");
        ExitCode::from(EXIT_CONFIG_ERROR)
    };
    let engine = match engine(args.rules.rules.as_ref()) {
        Ok(e) => e,
        Err(e) => return fail(e),
    };
    let (Some(scenario), Some(age_text)) = (&args.scenario, &args.age) else {
        return fail("--scenario and --age are needed (or --list)".into());
    };
    let age_days = match synth::parse_age(age_text) {
        Ok(d) => d,
        Err(e) => return fail(e.0),
    };
    let sex = match args.sex.as_deref().map(synth::Sex::parse).transpose() {
        Ok(s) => s,
        Err(e) => return fail(e.0),
    };
    if args.count > 1 && args.out.is_none() {
        return fail("--count above 1 needs --out DIR".into());
    }
    if let Some(dir) = &args.out
        && let Err(e) = std::fs::create_dir_all(dir)
    {
        return fail(format!("cannot create {}: {e}", dir.display()));
    }
    for i in 0..u64::from(args.count) {
        let seed = args.seed.wrapping_add(i);
        let req = synth::Request { scenario: scenario.clone(), age_days, sex, seed, now };
        let bundle = match synth::make(&engine.rules.rules, &cat, &req) {
            Ok(b) => b,
            Err(e) => return fail(e.0),
        };
        let text = serde_json::to_string_pretty(&bundle).unwrap_or_default();
        match &args.out {
            None => out!("{text}"),
            Some(dir) => {
                let path = dir.join(format!("{scenario}-{age_text}-seed{seed}.json"));
                if let Err(e) = std::fs::write(&path, format!("{text}\n")) {
                    return fail(format!("cannot write {}: {e}", path.display()));
                }
                out!("{}", path.display());
            }
        }
    }
    ExitCode::SUCCESS
}

/// Exit code of `check` when a case does not match its expectation.
pub const EXIT_CASE_MISMATCH: u8 = 1;
/// Exit code of `check` when the cases or the rules cannot be read.
pub const EXIT_CASES_UNREADABLE: u8 = 2;

fn check_cases(args: &CheckArgs) -> ExitCode {
    let engine = match engine(args.rules.rules.as_ref()) {
        Ok(e) => e,
        Err(e) => {
            err!("calcium-cds: rules: {e}");
            return ExitCode::from(EXIT_CASES_UNREADABLE);
        }
    };
    let results = match crate::cases::run_dir(&engine, &args.dir) {
        Ok(r) => r,
        Err(e) => {
            err!("calcium-cds: {e}");
            return ExitCode::from(EXIT_CASES_UNREADABLE);
        }
    };
    out!("# rule set {}", engine.rules.label());
    out_raw!("{}", crate::cases::table(&results));
    if let Some(path) = &args.junit {
        let suite = format!("calcium-cds cases ({})", engine.rules.label());
        if let Err(e) = std::fs::write(path, crate::cases::junit(&results, &suite)) {
            err!("calcium-cds: cannot write {}: {e}", path.display());
            return ExitCode::from(EXIT_CASES_UNREADABLE);
        }
    }
    if results.iter().all(crate::cases::CaseResult::passed) {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(EXIT_CASE_MISMATCH)
    }
}

/// Exit code of `rules diff` when the rule sets differ (as diff(1) does).
pub const EXIT_DIFFERENT: u8 = 1;
/// Exit code of `rules diff` when a rule set cannot be read.
pub const EXIT_DIFF_TROUBLE: u8 = 2;

fn read_site(path: &std::path::Path) -> Result<(String, String), String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("cannot read {}: {e}", path.display()))?;
    Ok((path.display().to_string(), text))
}

fn rules_command(cmd: &RulesCommand) -> ExitCode {
    use crate::rules::tools;
    let fail = |code: u8, lines: &[String]| {
        for l in lines {
            err!("{l}");
        }
        ExitCode::from(code)
    };
    match cmd {
        RulesCommand::Check { file } => {
            let (name, text) = match read_site(file) {
                Ok(x) => x,
                Err(e) => return fail(EXIT_CONFIG_ERROR, &[e]),
            };
            match tools::check_site(&name, &text) {
                Ok(rules) => {
                    out!("{name}: ok, rule set {}", rules.label());
                    ExitCode::SUCCESS
                }
                Err(problems) => {
                    let lines: Vec<String> = problems.iter().map(ToString::to_string).collect();
                    fail(EXIT_CONFIG_ERROR, &lines)
                }
            }
        }
        RulesCommand::Show { rules } => {
            let site = match rules.as_deref().map(read_site).transpose() {
                Ok(s) => s,
                Err(e) => return fail(EXIT_CONFIG_ERROR, &[e]),
            };
            match tools::show(site.as_ref().map(|(n, t)| (n.as_str(), t.as_str()))) {
                Ok(lines) => {
                    for (path, value, origin) in lines {
                        let origin = if origin == tools::Origin::Site { "site" } else { "default" };
                        out!("{path} = {value}  # {origin}");
                    }
                    ExitCode::SUCCESS
                }
                Err(problems) => {
                    let lines: Vec<String> = problems.iter().map(ToString::to_string).collect();
                    fail(EXIT_CONFIG_ERROR, &lines)
                }
            }
        }
        RulesCommand::Diff { a, b } => {
            let doc = |which: &str| -> Result<serde_json::Value, String> {
                if which == "default" {
                    return tools::merged_document(None).map_err(|e| e.to_string());
                }
                let (name, text) = read_site(std::path::Path::new(which))?;
                tools::check_site(&name, &text)
                    .map_err(|p| p.iter().map(ToString::to_string).collect::<Vec<_>>().join("\n"))?;
                tools::merged_document(Some((&name, &text))).map_err(|e| e.to_string())
            };
            let (da, db) = match (doc(a), doc(b)) {
                (Ok(x), Ok(y)) => (x, y),
                (Err(e), _) | (_, Err(e)) => return fail(EXIT_DIFF_TROUBLE, &[e]),
            };
            let changes = tools::diff(&da, &db);
            for c in &changes {
                out!("{c}");
            }
            if changes.is_empty() {
                out!("# the rule sets are the same");
                ExitCode::SUCCESS
            } else {
                out!("# {} difference(s)", changes.len());
                ExitCode::from(EXIT_DIFFERENT)
            }
        }
    }
}

/// Validate everything `serve` would use, without listening; print the effective
/// configuration with its sources, secrets masked. Exit 0 when it would start.
fn config_check(args: &ServeArgs, sources: &ArgSources) -> ExitCode {
    let mut problems = Vec::new();
    let rules = match engine(args.rules.rules.as_ref()) {
        Ok(e) => e.rules.label(),
        Err(e) => {
            problems.push(format!("rules: {e}"));
            String::new()
        }
    };
    problems.extend(args.startup_problems());
    out!("# calcium-cds {} effective configuration", crate::engine::VERSION);
    out!("{}", sources.render());
    if !rules.is_empty() {
        out!("# rule set: {rules}");
    }
    if problems.is_empty() {
        out!("# ok: the service would start with this configuration");
        ExitCode::SUCCESS
    } else {
        for p in &problems {
            err!("calcium-cds: {p}");
        }
        ExitCode::from(EXIT_CONFIG_ERROR)
    }
}

fn engine(site: Option<&std::path::PathBuf>) -> Result<Engine, String> {
    Engine::new(load_rules(site)?)
}

fn assess(args: &AssessArgs) -> ExitCode {
    let (now, fixed) = match clock(args.now.as_ref()) {
        Ok(c) => c,
        Err(code) => return code,
    };
    let engine = match engine(args.rules.rules.as_ref()) {
        Ok(e) => e,
        Err(e) => {
            err!("calcium-cds: {e}");
            return ExitCode::from(EXIT_CONFIG_ERROR);
        }
    };
    let mut body = Vec::new();
    let read = if args.file == "-" {
        std::io::stdin().read_to_end(&mut body).map(|_| ())
    } else {
        std::fs::read(&args.file).map(|b| body = b)
    };
    if let Err(e) = read {
        err!("calcium-cds: cannot read {}: {e}", args.file);
        return ExitCode::from(EXIT_INPUT_UNREADABLE);
    }
    match engine.assess_with(&body, now, fixed, args.explain) {
        Ok(outcome) => {
            if let Some(steps) = &outcome.trace {
                let _ = write!(
                    std::io::stderr().lock(),
                    "{}",
                    crate::clinical::explain::text(steps, &engine.rules.rules.texts.advisory)
                );
            }
            out!("{}", serde_json::to_string_pretty(&outcome.bundle).unwrap_or_default());
            ExitCode::SUCCESS
        }
        Err(err) => {
            out!("{}", serde_json::to_string_pretty(&err.to_operation_outcome()).unwrap_or_default());
            err!("calcium-cds: request refused ({err})");
            ExitCode::from(EXIT_REQUEST_ERROR)
        }
    }
}

fn serve(args: &ServeArgs) -> ExitCode {
    crate::telemetry::init(true);
    let problems = args.startup_problems();
    if !problems.is_empty() {
        for p in &problems {
            err!("calcium-cds: {p}");
        }
        return ExitCode::from(EXIT_CONFIG_ERROR);
    }
    let engine = match engine(args.rules.rules.as_ref()) {
        Ok(e) => e,
        Err(e) => {
            tracing::error!(error = %e, "rules could not be loaded");
            err!("calcium-cds: {e}");
            return ExitCode::from(EXIT_CONFIG_ERROR);
        }
    };
    let rules_label = engine.rules.label();
    let system = actix_web::rt::System::new();
    let result = system.block_on(async {
        let app = crate::http::Application::build(args, engine)?;
        tracing::info!(port = app.port(), rules = %rules_label, version = crate::engine::VERSION, "listening");
        app.run_until_signalled(std::time::Duration::from_millis(args.limits.shutdown_delay_ms))
            .await
            .map_err(|e| e.to_string())
    });
    let code = match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            tracing::error!(error = %e, "the service stopped");
            err!("calcium-cds: {e}");
            ExitCode::from(EXIT_CONFIG_ERROR)
        }
    };
    // The last log lines ("shutdown complete"), within a bound: a stalled log pipe must not hold the exit.
    crate::telemetry::flush(std::time::Duration::from_secs(2));
    code
}
