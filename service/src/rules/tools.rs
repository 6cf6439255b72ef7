//! Tools for the people who own the rules (`calcium-cds rules ...`): check a
//! site file and point at the line of each problem, show the effective rules
//! with where each value came from, and compare two rule sets.
//!
//! Rule documents are flattened to one line per value, `path = value`, with
//! paths as the schema errors write them (`bands[2].ionized.lower`,
//! `causes[4].findings[0].effect`); a table in an array is one entry.

use std::collections::BTreeMap;

use serde_json::Value;

use super::load::{self, LoadedRules, RuleError};

/// One problem in a site file, located as well as the text allows.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Problem {
    /// The file the problem is in (the site file, or the merged rules when
    /// the site file does not name the value).
    pub file: String,
    /// 1-based line in that file, when found.
    pub line: Option<usize>,
    /// Rule path (`bands[2].ionized.lower`), empty for a syntax error.
    pub path: String,
    /// What is wrong.
    pub message: String,
}

impl std::fmt::Display for Problem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match (self.line, self.path.is_empty()) {
            (Some(l), true) => write!(f, "{}:{l}: {}", self.file, self.message),
            (Some(l), false) => write!(f, "{}:{l}: {}: {}", self.file, self.path, self.message),
            (None, true) => write!(f, "{}: {}", self.file, self.message),
            (None, false) => write!(f, "{}: {}: {}", self.file, self.path, self.message),
        }
    }
}

/// Load `text` (named `name`) over the defaults; the rules, or every problem located.
pub fn check_site(name: &str, text: &str) -> Result<LoadedRules, Vec<Problem>> {
    load::load(Some((name, text))).map_err(|e| {
        let merged = load::merged_document(Some((name, text)), load::SiteName::AsWritten).ok();
        problems(name, text, &e, merged.as_ref())
    })
}

fn problems(name: &str, text: &str, err: &RuleError, merged: Option<&Value>) -> Vec<Problem> {
    match err {
        RuleError::Syntax { file, message } => {
            vec![Problem {
                file: file.clone(),
                line: syntax_line(message),
                path: String::new(),
                message: first_line(message),
            }]
        }
        RuleError::Schema(lines) | RuleError::Inconsistent(lines) => lines
            .iter()
            .map(|l| {
                let l = l.trim();
                let l = l.strip_prefix("at ").unwrap_or(l);
                let (path, message) = l.split_once(": ").unwrap_or(("", l));
                let path = path.trim().to_owned();
                match locate_in(text, &path, merged) {
                    Some(line) => {
                        Problem { file: name.to_owned(), line: Some(line), path, message: message.to_owned() }
                    }
                    None => Problem { file: "merged rules".into(), line: None, path, message: message.to_owned() },
                }
            })
            .collect(),
        RuleError::BadSchema(m) => {
            vec![Problem { file: "rules.schema.json".into(), line: None, path: String::new(), message: m.clone() }]
        }
    }
}

fn first_line(message: &str) -> String {
    message.lines().find(|l| !l.trim().is_empty()).unwrap_or(message).trim().to_owned()
}

/// The line number in a toml parser message ("... at line 3, column 7").
fn syntax_line(message: &str) -> Option<usize> {
    let rest = &message[message.find("line ")? + 5..];
    rest.split(|c: char| !c.is_ascii_digit()).next()?.parse().ok()
}

/// The line of the site file that sets `path`: each named segment of the
/// path is looked for in turn (as a table header part or as a key) after the
/// line of the one before; the line of the deepest one found. None when the
/// file names none of them (the value is from the defaults).
pub fn locate(text: &str, path: &str) -> Option<usize> {
    locate_in(text, path, None)
}

/// As `locate`; with the merged document, an index into an array of tables
/// (`causes[20]`) is resolved to that entry's key (`id`, `analyte` or `code`)
/// and the search goes on inside the site file's `[[causes]]` entry with that
/// key, since the merged index is not the entry's place in the file.
pub fn locate_in(text: &str, path: &str, merged: Option<&Value>) -> Option<usize> {
    let lines: Vec<&str> = text.lines().collect();
    let mut from = 0;
    let mut found = None;
    let mut node = merged;
    for part in path.split('.').map(str::trim).filter(|p| !p.is_empty()) {
        let (name, indices): (&str, Vec<&str>) = match part.split_once('[') {
            Some((n, rest)) => (n, rest.split('[').map(|i| i.trim_end_matches(']')).collect()),
            None => (part, Vec::new()),
        };
        node = node.and_then(|n| n.get(name));
        const KEYS: [&str; 3] = ["id", "analyte", "code"];
        // An entry is named by its merged index (`causes[20]`) or by its key (`bands[child]`).
        let (entry, keyed) = match indices.first() {
            Some(i) => match i.parse::<usize>() {
                Ok(i) => {
                    let entry = node.and_then(|n| n.get(i));
                    let keyed = entry.and_then(|e| {
                        KEYS.iter().find_map(|k| e.get(*k).and_then(Value::as_str).map(|v| (*k, v.to_owned())))
                    });
                    (entry, keyed.map(|(k, v)| (vec![k], v)))
                }
                Err(_) => {
                    let entry = node.and_then(Value::as_array).and_then(|a| {
                        a.iter().find(|e| KEYS.iter().any(|k| e.get(*k).and_then(Value::as_str) == Some(*i)))
                    });
                    (entry, Some((KEYS.to_vec(), (*i).to_owned())))
                }
            },
            None => (None, None),
        };
        let hit = match keyed {
            Some((keys, value)) => keys.iter().find_map(|key| entry_header(&lines, from, name, key, &value)),
            None => lines.iter().enumerate().skip(from).find(|(_, l)| names(l, name)).map(|(i, _)| i),
        };
        if let Some(i) = hit {
            found = Some(i + 1);
            from = i + 1;
        }
        node = if indices.is_empty() { node } else { entry };
    }
    found
}

/// The line index of the `[[name]]` header whose entry sets `key = "value"`.
fn entry_header(lines: &[&str], from: usize, name: &str, key: &str, value: &str) -> Option<usize> {
    let header = format!("[[{name}]]");
    let mut current = None;
    for (i, l) in lines.iter().enumerate().skip(from) {
        let t = l.trim();
        if t.starts_with("[[") || (t.starts_with('[') && !t.starts_with(&format!("[{name}."))) {
            current = (t.replace(' ', "") == header).then_some(i);
            continue;
        }
        if let (Some(h), Some((k, v))) = (current, t.split_once('='))
            && k.trim() == key
            && v.trim().trim_matches('"') == value
        {
            return Some(h);
        }
    }
    None
}

/// Whether a TOML line names `seg`: a key `seg = ...` or a header `[a.seg]` / `[[seg]]`.
fn names(line: &str, seg: &str) -> bool {
    let l = line.trim();
    if l.starts_with('#') {
        return false;
    }
    if l.starts_with('[') {
        let inner = l.trim_start_matches('[').split(']').next().unwrap_or("");
        return inner.split('.').any(|p| p.trim().trim_matches('"') == seg);
    }
    l.split_once('=').is_some_and(|(k, _)| k.trim().trim_matches('"') == seg)
}

/// The merged rule document (defaults, plus `site` when given, as written), unchecked.
pub fn merged_document(site: Option<(&str, &str)>) -> Result<Value, RuleError> {
    load::merged_document(site, load::SiteName::AsWritten)
}

/// One line per value: path to the value's JSON text.
pub fn flatten(doc: &Value) -> BTreeMap<String, String> {
    let mut out = BTreeMap::new();
    walk(doc, String::new(), &mut out);
    out
}

fn walk(v: &Value, path: String, out: &mut BTreeMap<String, String>) {
    match v {
        Value::Object(m) => {
            for (k, x) in m {
                let p = if path.is_empty() { k.clone() } else { format!("{path}.{k}") };
                walk(x, p, out);
            }
        }
        // Arrays of tables by index; arrays of scalars as one value.
        Value::Array(a) if a.iter().any(|x| x.is_object() || x.is_array()) => {
            for (i, x) in a.iter().enumerate() {
                walk(x, format!("{path}[{i}]"), out);
            }
        }
        other => {
            out.insert(path, other.to_string());
        }
    }
}

/// Where a value in force came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Origin {
    /// The embedded defaults.
    Default,
    /// The site file (a value it added or changed).
    Site,
}

/// The effective rules, one line per value with its origin; the site file is
/// checked first (an error lists its problems).
pub fn show(site: Option<(&str, &str)>) -> Result<Vec<(String, String, Origin)>, Vec<Problem>> {
    if let Some((name, text)) = site {
        check_site(name, text)?;
    }
    let problem =
        |e: RuleError| vec![Problem { file: "rules".into(), line: None, path: String::new(), message: e.to_string() }];
    let defaults = flatten(&merged_document(None).map_err(problem)?);
    let merged = flatten(&merged_document(site).map_err(problem)?);
    Ok(merged
        .into_iter()
        .map(|(path, value)| {
            let origin = if defaults.get(&path) == Some(&value) { Origin::Default } else { Origin::Site };
            (path, value, origin)
        })
        .collect())
}

/// One difference between two rule sets.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Change {
    /// Only in the second.
    Added(String, String),
    /// Only in the first.
    Removed(String, String),
    /// In both, different.
    Changed(String, String, String),
}

impl std::fmt::Display for Change {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Self::Added(p, v) => write!(f, "+ {p} = {v}"),
            Self::Removed(p, v) => write!(f, "- {p} = {v}"),
            Self::Changed(p, a, b) => write!(f, "~ {p}: {a} -> {b}"),
        }
    }
}

/// The differences between two merged rule documents, by path.
pub fn diff(a: &Value, b: &Value) -> Vec<Change> {
    let (a, b) = (flatten(a), flatten(b));
    let mut out = Vec::new();
    for (p, va) in &a {
        match b.get(p) {
            None => out.push(Change::Removed(p.clone(), va.clone())),
            Some(vb) if vb != va => out.push(Change::Changed(p.clone(), va.clone(), vb.clone())),
            Some(_) => {}
        }
    }
    for (p, vb) in &b {
        if !a.contains_key(p) {
            out.push(Change::Added(p.clone(), vb.clone()));
        }
    }
    out.sort_by(|x, y| path_of(x).cmp(path_of(y)));
    out
}

fn path_of(c: &Change) -> &str {
    match c {
        Change::Added(p, _) | Change::Removed(p, _) | Change::Changed(p, _, _) => p,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_site_file_problem_is_located_at_its_line() {
        let site = "[ruleset]\nversion = \"site-2\"\n\n[albumin_adjustment]\n# the slope\nconventional_slope_mg_dl_per_g_dl = \"steep\"\n";
        let problems = check_site("larkspur.toml", site).expect_err("a string where a number belongs");
        let p = problems.iter().find(|p| p.path.contains("conventional_slope")).expect("the slope is named");
        assert_eq!((p.file.as_str(), p.line), ("larkspur.toml", Some(6)), "{p}");
    }

    #[test]
    fn a_syntax_error_names_its_line() {
        let problems = check_site("larkspur.toml", "[ruleset]\nversion = \n").expect_err("not TOML");
        assert_eq!(problems.len(), 1);
        assert_eq!(problems[0].line, Some(2), "{}", problems[0]);
    }

    #[test]
    fn a_problem_in_a_later_array_entry_points_at_that_entry() {
        // Two site causes; the second has a bad effect. Its merged index (after the 19
        // default causes) is not its place in the file: the line is that of its own entry.
        let site = "[[causes]]\nid = \"aa\"\nlabel = \"A\"\nsource = \"s\"\nfindings = [ { lab = \"phosphate\", is = \"low\", effect = \"for\", source = \"s\" } ]\n\n[[causes]]\nid = \"zz\"\nlabel = \"Z\"\nsource = \"s\"\nfindings = [ { lab = \"phosphate\", is = \"low\", effect = \"sideways\", source = \"s\" } ]\n";
        let problems = check_site("larkspur.toml", site).expect_err("refused");
        assert_eq!(problems.len(), 1, "{problems:?}");
        assert_eq!(problems[0].line, Some(11), "{}", problems[0]);
    }

    #[test]
    fn locate_follows_the_path_through_headers_and_keys() {
        let text = "[a]\nx = 1\n[b.c]\nx = 2\ny = 3\n";
        assert_eq!(locate(text, "b.c.x"), Some(4));
        assert_eq!(locate(text, "a.x"), Some(2));
        assert_eq!(locate(text, "zzz.q"), None);
    }

    #[test]
    fn show_marks_site_values_and_diff_lists_them() {
        let site = "[albumin_adjustment]\nconventional_slope_mg_dl_per_g_dl = 1.0\n";
        let shown = show(Some(("larkspur.toml", site))).expect("a valid site file");
        let slope = shown.iter().find(|(p, _, _)| p == "albumin_adjustment.conventional_slope_mg_dl_per_g_dl").unwrap();
        assert_eq!((slope.1.as_str(), slope.2), ("1.0", Origin::Site));
        assert!(shown.iter().filter(|(_, _, o)| *o == Origin::Site).count() >= 1);
        assert!(shown.iter().any(|(p, _, o)| p.starts_with("bands[") && *o == Origin::Default));
        let a = merged_document(None).unwrap();
        let b = merged_document(Some(("larkspur.toml", site))).unwrap();
        let changes = diff(&a, &b);
        assert_eq!(changes.len(), 1, "{changes:?}");
        assert!(
            matches!(&changes[0], Change::Changed(p, _, to) if p.ends_with("conventional_slope_mg_dl_per_g_dl") && to == "1.0")
        );
    }
}
