//! The specimen check of a result: Specimen.condition (HL7 v2 table 0493) of
//! the Specimen the Observation refers to (contained, in the Bundle, or
//! fetched from the EHR into it), the result's own flags
//! (Observation.interpretation) and words in its notes. The policy (what each
//! flag means for which analyte) is rule data (`specimen.toml`).
//!
//! A coded flag whose policy sets the analyte aside keeps the result out of
//! the facts (listed with a warning); every other flag leaves the result in
//! use and is handed to the core as a `SpecimenFinding`, so the answer says
//! what was found and what was done. Words in a note only ever give a
//! caution. A Specimen that is referenced but cannot be read is a finding
//! too: the check did not run.

use serde_json::Value;

use super::{
    Entry, Index, Reader, SpecimenAction, SpecimenFinding, SpecimenReadFrom, codings, describe_codes, str_at,
};
use crate::clinical::facts::{Measurement, Source};
use crate::clinical::format::num;
use crate::rules::model::SpecimenFlag;

/// One problem read from the Observation, its Specimen or a note, before it
/// is tied to a result.
#[derive(Debug, Clone)]
pub(super) struct RawFlag<'r> {
    /// The rule entry; None for a condition the rules do not know, or an unread Specimen.
    flag: Option<&'r SpecimenFlag>,
    read_from: SpecimenReadFrom,
    /// Where in the request (for the set-aside list).
    path: String,
    specimen: Option<Source>,
    /// What was found, in words.
    found: String,
}

/// The longest quote taken from a note.
const QUOTE_CHARS: usize = 160;

fn quote(text: &str) -> String {
    let t: String = text.chars().take(QUOTE_CHARS).collect();
    if t.chars().count() < text.chars().count() { format!("'{t}...'") } else { format!("'{t}'") }
}

fn notes(v: &Value) -> impl Iterator<Item = (usize, &str)> {
    v.get("note").and_then(Value::as_array).into_iter().flatten().enumerate().filter_map(|(i, n)| Some((i, str_at(n, "text")?)))
}

impl<'a> Reader<'a> {
    fn flag_for(&self, system: &str, code: &str) -> Option<&'a SpecimenFlag> {
        self.rules.specimen.flags.iter().find(|f| f.system == system && f.code == code)
    }

    /// Flags whose text stems occur in `text` (lower-cased).
    fn text_flags(&self, text: &str) -> Vec<&'a SpecimenFlag> {
        let lower = text.to_lowercase();
        self.rules
            .specimen
            .flags
            .iter()
            .filter(|f| f.text_terms.iter().any(|t| lower.contains(t.as_str())))
            .collect()
    }

    /// Every specimen problem of one Observation.
    pub(super) fn specimen_flags(&mut self, e: &Entry<'_>, index: &Index<'_>, entries: &[Entry<'_>]) -> Vec<RawFlag<'a>> {
        let r = e.resource;
        let at = self.at(e.index);
        let mut out = Vec::new();
        // The result's own flags.
        for (i, concept) in r.get("interpretation").and_then(Value::as_array).into_iter().flatten().enumerate() {
            for (system, code) in codings(Some(concept)) {
                if let Some(flag) = self.flag_for(system, code) {
                    out.push(RawFlag {
                        flag: Some(flag),
                        read_from: SpecimenReadFrom::Interpretation,
                        path: format!("{at}.interpretation[{i}]"),
                        specimen: None,
                        found: format!("{system}|{code} ({})", flag.display),
                    });
                }
            }
        }
        for (i, text) in notes(r) {
            for flag in self.text_flags(text) {
                out.push(RawFlag {
                    flag: Some(flag),
                    read_from: SpecimenReadFrom::NoteText,
                    path: format!("{at}.note[{i}].text"),
                    specimen: None,
                    found: format!("the words of Observation.note: {}", quote(text)),
                });
            }
        }
        // The Specimen.
        if let Some(reference) = r.get("specimen") {
            match self.resolve_specimen(e, reference, index, entries) {
                Ok((specimen, source, spath)) => out.extend(self.conditions(specimen, &source, &spath)),
                Err(why) => out.push(RawFlag {
                    flag: None,
                    read_from: SpecimenReadFrom::Reference,
                    path: format!("{at}.specimen"),
                    specimen: None,
                    found: why,
                }),
            }
        }
        // A coded flag makes the same flag read from text redundant.
        let coded: Vec<&str> = out
            .iter()
            .filter(|f| f.read_from != SpecimenReadFrom::NoteText)
            .filter_map(|f| f.flag.map(|x| x.key.as_str()))
            .collect::<Vec<_>>();
        let coded: Vec<String> = coded.into_iter().map(str::to_owned).collect();
        let mut seen: Vec<(String, bool)> = Vec::new();
        out.retain(|f| {
            let Some(flag) = f.flag else { return true };
            let text = f.read_from == SpecimenReadFrom::NoteText;
            if text && coded.contains(&flag.key) {
                return false;
            }
            let k = (flag.key.clone(), text);
            if seen.contains(&k) {
                return false;
            }
            seen.push(k);
            true
        });
        out
    }

    /// The Specimen an Observation refers to, with its source and location.
    fn resolve_specimen<'v>(
        &self,
        e: &'v Entry<'_>,
        reference: &'v Value,
        index: &Index<'_>,
        entries: &'v [Entry<'_>],
    ) -> Result<(&'v Value, Source, String), String> {
        let Some(text) = str_at(reference, "reference") else {
            return Err(
                "Observation.specimen names a specimen without a literal reference (identifier or display only), so its condition could not be read"
                    .to_owned(),
            );
        };
        if let Some(local) = text.strip_prefix('#') {
            let contained = e.resource.get("contained").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
            return match contained.iter().enumerate().find(|(_, c)| str_at(c, "id") == Some(local)) {
                Some((k, c)) if str_at(c, "resourceType") == Some("Specimen") => {
                    let path = format!("{}.contained[{k}]", self.at(e.index));
                    Ok((c, Source { resource_type: "Specimen".into(), reference: None, expression: path.clone() }, path))
                }
                Some(_) => Err(format!("Observation.specimen '{text}' is a contained resource that is not a Specimen")),
                None => Err(format!("Observation.specimen '{text}' does not resolve to a contained resource")),
            };
        }
        match index.resolve(text, e.full_url).and_then(|i| entries.iter().find(|x| x.index == i)) {
            Some(s) if s.resource_type == "Specimen" => Ok((s.resource, self.source(s, ""), self.at(s.index))),
            Some(_) => Err(format!("Observation.specimen '{text}' refers to a resource that is not a Specimen")),
            None => Err(format!(
                "the Specimen '{text}' is neither contained in the result nor in the request (nor returned by the EHR when the context was gathered there)"
            )),
        }
    }

    /// The problems recorded on a Specimen: coded conditions, condition text, notes.
    fn conditions(&self, specimen: &Value, source: &Source, at: &str) -> Vec<RawFlag<'a>> {
        let mut out = Vec::new();
        let list = specimen.get("condition").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
        for (i, concept) in list.iter().enumerate() {
            let path = format!("{at}.condition[{i}]");
            let mut known = false;
            for (system, code) in codings(Some(concept)) {
                if let Some(flag) = self.flag_for(system, code) {
                    known = true;
                    out.push(RawFlag {
                        flag: Some(flag),
                        read_from: SpecimenReadFrom::Condition,
                        path: path.clone(),
                        specimen: Some(source.clone()),
                        found: format!("{system}|{code} ({})", flag.display),
                    });
                }
            }
            if known {
                continue;
            }
            let text = str_at(concept, "text");
            let by_text = text.map(|t| self.text_flags(t)).unwrap_or_default();
            if by_text.is_empty() {
                // A condition the rules do not know: shown, with a caution.
                out.push(RawFlag {
                    flag: None,
                    read_from: SpecimenReadFrom::Condition,
                    path,
                    specimen: Some(source.clone()),
                    found: describe_codes(Some(concept)),
                });
            } else {
                for flag in by_text {
                    out.push(RawFlag {
                        flag: Some(flag),
                        read_from: SpecimenReadFrom::NoteText,
                        path: format!("{path}.text"),
                        specimen: Some(source.clone()),
                        found: format!("the words of Specimen.condition.text: {}", quote(text.unwrap_or_default())),
                    });
                }
            }
        }
        for (i, text) in notes(specimen) {
            for flag in self.text_flags(text) {
                out.push(RawFlag {
                    flag: Some(flag),
                    read_from: SpecimenReadFrom::NoteText,
                    path: format!("{at}.note[{i}].text"),
                    specimen: Some(source.clone()),
                    found: format!("the words of Specimen.note: {}", quote(text)),
                });
            }
        }
        out
    }

    /// Apply the flags to one result: record the findings; false when the
    /// result is set aside.
    pub(super) fn specimen_check(
        &mut self,
        e: &Entry<'_>,
        m: &Measurement,
        flags: &[RawFlag<'a>],
        findings: &mut Vec<SpecimenFinding>,
    ) -> bool {
        let result_text = format!("{} {} {} at {}", m.code.display, num(m.reported_value, 2), m.reported_unit, m.when_text);
        let spec = &self.rules.specimen;
        let mut keep = true;
        for raw in flags {
            let (key, label, action, effect, mitigation, source, severity) = match raw.flag {
                Some(flag) => {
                    let coded = raw.read_from != SpecimenReadFrom::NoteText;
                    let action = if flag.severity.is_none() {
                        SpecimenAction::NoEffect
                    } else if coded && flag.sets_aside(m.analyte) {
                        SpecimenAction::SetAside
                    } else {
                        SpecimenAction::Caution
                    };
                    let source = if coded { flag.source.clone() } else { format!("{}; {}", spec.text_source, flag.source) };
                    (
                        flag.key.clone(),
                        flag.label.clone(),
                        action,
                        flag.effect.clone(),
                        flag.mitigation.clone(),
                        source,
                        flag.severity,
                    )
                }
                None if raw.read_from == SpecimenReadFrom::Reference => (
                    "unread".to_owned(),
                    "not read".to_owned(),
                    SpecimenAction::Unread,
                    format!(
                        "The result refers to a specimen that could not be read ({}): the specimen check did not run, so a clotted or hemolyzed sample cannot be ruled out.",
                        raw.found
                    ),
                    "Check the sample's condition with the laboratory (clotted, hemolyzed) before relying on the result.".to_owned(),
                    spec.unread_source.clone(),
                    Some(spec.unread_severity),
                ),
                None => (
                    "other-condition".to_owned(),
                    "with a condition the rules do not know".to_owned(),
                    SpecimenAction::Caution,
                    format!(
                        "The specimen's condition is recorded as {}, which these rules have no policy for; the result is used with this caution.",
                        raw.found
                    ),
                    "Ask the laboratory what the condition means for this result.".to_owned(),
                    spec.other_condition_source.clone(),
                    Some(spec.other_condition_severity),
                ),
            };
            if action == SpecimenAction::SetAside {
                keep = false;
                let at = self.at(e.index);
                self.aside(
                    e,
                    raw.path.strip_prefix(at.as_str()).unwrap_or(".specimen"),
                    format!("{}: the specimen is {label} ({}; {}): {effect}", m.code.display, raw.found, raw.read_from.label()),
                );
            } else if action == SpecimenAction::Unread {
                self.push(
                    e,
                    ".specimen",
                    format!("{}: the specimen check could not run: {}", m.code.display, raw.found),
                    super::IssueSeverityLevel::Warning,
                    super::IssueCode::NotFound,
                );
            }
            findings.push(SpecimenFinding {
                key,
                label,
                action,
                read_from: raw.read_from,
                analyte: m.analyte,
                result_text: result_text.clone(),
                result: if action == SpecimenAction::SetAside { self.source(e, "") } else { m.source.clone() },
                specimen: raw.specimen.clone(),
                found: raw.found.clone(),
                effect,
                mitigation,
                source,
                severity,
            });
        }
        keep
    }
}
