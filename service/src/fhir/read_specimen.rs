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

use super::{Entry, Index, Reader, SpecimenAction, SpecimenFinding, SpecimenReadFrom, codings, describe_codes, str_at};
use crate::clinical::facts::{Measurement, Source};
use crate::clinical::format::num;
use crate::fhir::profiles::Kind;
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

/// FHIR R4 SpecimenStatus.
const SPECIMEN_STATUS: &str = "http://hl7.org/fhir/specimen-status";

/// The longest quote taken from a note.
const QUOTE_CHARS: usize = 160;

fn quote(text: &str) -> String {
    let t: String = text.chars().take(QUOTE_CHARS).collect();
    if t.chars().count() < text.chars().count() { format!("'{t}...'") } else { format!("'{t}'") }
}

fn notes(v: &Value) -> impl Iterator<Item = (usize, &str)> {
    v.get("note")
        .and_then(Value::as_array)
        .into_iter()
        .flatten()
        .enumerate()
        .filter_map(|(i, n)| Some((i, str_at(n, "text")?)))
}

impl<'a> Reader<'a> {
    fn flag_for(&self, system: &str, code: &str) -> Option<&'a SpecimenFlag> {
        self.rules.specimen.flags.iter().find(|f| f.system == system && f.code == code)
    }

    /// Flags whose text stems occur in `text` (lower-cased).
    fn text_flags(&self, text: &str) -> Vec<&'a SpecimenFlag> {
        let lower = text.to_lowercase();
        self.rules.specimen.flags.iter().filter(|f| f.text_terms.iter().any(|t| lower.contains(t.as_str()))).collect()
    }

    /// Every specimen problem of one Observation.
    pub(super) fn specimen_flags(
        &mut self,
        e: &Entry<'_>,
        index: &Index<'_>,
        entries: &[Entry<'_>],
        patient: &Entry<'_>,
    ) -> Vec<RawFlag<'a>> {
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
            match self.resolve_specimen(e, reference, index, entries).and_then(|(specimen, source, spath)| {
                self.specimen_usable(specimen, &source, &spath, index, patient).map(|()| (specimen, source, spath))
            }) {
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
        &mut self,
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
            let contained =
                e.resource.get("contained").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
            return match contained.iter().enumerate().find(|(_, c)| str_at(c, "id") == Some(local)) {
                Some((k, c)) if str_at(c, "resourceType") == Some("Specimen") => {
                    let path = format!("{}.contained[{k}]", self.at(e.index));
                    Ok((
                        c,
                        Source { resource_type: "Specimen".into(), reference: None, expression: path.clone() },
                        path,
                    ))
                }
                Some(_) => Err(format!("Observation.specimen '{text}' is a contained resource that is not a Specimen")),
                None => Err(format!("Observation.specimen '{text}' does not resolve to a contained resource")),
            };
        }
        match index.resolve(text, e.full_url).and_then(|i| entries.iter().find(|x| x.index == i)) {
            Some(s) if s.resource_type == "Specimen" => {
                self.specimens_read.push(s.index);
                Ok((s.resource, self.source(s, ""), self.at(s.index)))
            }
            Some(_) => Err(format!("Observation.specimen '{text}' refers to a resource that is not a Specimen")),
            None => Err(format!(
                "the Specimen '{text}' is neither contained in the result nor in the request (nor returned by the EHR when the context was gathered there)"
            )),
        }
    }

    /// A resolved Specimen can be read for this patient: it matches the
    /// Specimen profile, is not entered in error, and its subject (when
    /// given) is the bundle's Patient.
    fn specimen_usable(
        &self,
        specimen: &Value,
        source: &Source,
        at: &str,
        index: &Index<'_>,
        patient: &Entry<'_>,
    ) -> Result<(), String> {
        let errors = self.profiles.check(Kind::Specimen, specimen);
        if let Some(first) = errors.first() {
            return Err(format!(
                "the Specimen {} does not match the Specimen profile ({at}{}: {})",
                source.label(),
                first.path,
                first.message
            ));
        }
        if str_at(specimen, "status") == Some("entered-in-error") {
            return Err(format!("the Specimen {} is marked entered-in-error", source.label()));
        }
        if let Some(subject) = specimen.get("subject").and_then(|s| str_at(s, "reference"))
            && index.resolve(subject, None) != Some(patient.index)
        {
            return Err(format!("the Specimen {}'s subject is not this patient", source.label()));
        }
        Ok(())
    }

    /// The problems recorded on a Specimen: coded conditions, condition text, notes.
    fn conditions(&self, specimen: &Value, source: &Source, at: &str) -> Vec<RawFlag<'a>> {
        let mut out = Vec::new();
        if let Some(status) = str_at(specimen, "status")
            && let Some(flag) = self.flag_for(SPECIMEN_STATUS, status)
        {
            out.push(RawFlag {
                flag: Some(flag),
                read_from: SpecimenReadFrom::Status,
                path: format!("{at}.status"),
                specimen: Some(source.clone()),
                found: format!("{SPECIMEN_STATUS}|{status} ({})", flag.display),
            });
        }
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
        let label = self.rules.analyte(m.analyte).map_or(m.code.display.as_str(), |a| a.label.as_str());
        let result_text = format!("{label} {} {} at {}", num(m.reported_value, 2), m.reported_unit, m.when_text);
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
                    let effect = if coded {
                        flag.effect.clone()
                    } else {
                        format!(
                            "Found in words, not coded: the result is used, with this caution (words never set a result aside). What a {} sample means when it is coded: {}",
                            flag.label, flag.effect
                        )
                    };
                    (
                        flag.key.clone(),
                        flag.label.clone(),
                        action,
                        effect,
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
                    format!(
                        "{}: the specimen is {label} ({}; {}): {effect}",
                        m.code.display,
                        raw.found,
                        raw.read_from.label()
                    ),
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
                masks_low: raw.flag.is_some_and(|f| f.not_reassuring_for.iter().any(|k| k == m.analyte.key())),
            });
        }
        keep
    }
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "tests")]

    use serde_json::{Value, json};

    use super::super::{Ingested, read_value};
    use crate::clinical::facts::{Analyte, SpecimenAction, SpecimenReadFrom};
    use crate::clinical::testing::{now, shared_rules};
    use crate::fhir::outcome::IssueSeverityLevel;
    use crate::fhir::profiles::Profiles;

    const V2: &str = "http://terminology.hl7.org/CodeSystem/v2-0493";

    fn ionized(extra: Value) -> Value {
        let mut o = json!({
            "resourceType": "Observation", "id": "ica", "status": "final",
            "code": { "coding": [{ "system": "http://loinc.org", "code": "1994-3" }] },
            "subject": { "reference": "Patient/p" },
            "effectiveDateTime": "2026-11-30T14:00:00Z",
            "valueQuantity": { "value": 0.80, "unit": "mmol/L", "system": "http://unitsofmeasure.org", "code": "mmol/L" },
        });
        for (k, v) in extra.as_object().unwrap() {
            o[k] = v.clone();
        }
        o
    }

    fn total(extra: Value) -> Value {
        let mut o = ionized(extra);
        o["id"] = json!("tca");
        o["code"] = json!({ "coding": [{ "system": "http://loinc.org", "code": "2000-8" }] });
        o["valueQuantity"]["value"] = json!(1.9);
        o
    }

    fn spec(id: &str, code: &str) -> Value {
        json!({ "resourceType": "Specimen", "id": id, "condition": [{ "coding": [{ "system": V2, "code": code }] }] })
    }

    fn read(resources: &[Value]) -> Ingested {
        let mut entries =
            vec![json!({ "resource": { "resourceType": "Patient", "id": "p", "birthDate": "2019-03-04" } })];
        entries.extend(resources.iter().map(|r| json!({ "resource": r })));
        let bundle = json!({ "resourceType": "Bundle", "type": "collection", "entry": entries });
        let profiles = Profiles::compile().unwrap();
        read_value(&bundle, shared_rules(), &profiles, now(), true).unwrap()
    }

    #[test]
    fn a_clotted_contained_specimen_sets_the_ionized_calcium_aside_with_a_located_warning() {
        let c = spec("s", "CLOT");
        let got = read(&[ionized(json!({ "contained": [c], "specimen": { "reference": "#s" } }))]);
        assert!(got.facts.of(Analyte::CalciumIonized).is_empty(), "set aside");
        let f = &got.facts.specimen;
        assert_eq!(f.len(), 1);
        assert_eq!(
            (f[0].key.as_str(), f[0].action, f[0].read_from),
            ("clotted", SpecimenAction::SetAside, SpecimenReadFrom::Condition)
        );
        assert_eq!(f[0].specimen.as_ref().unwrap().expression, "Bundle.entry[1].resource.contained[0]");
        let w = got.set_aside.iter().find(|s| s.severity == IssueSeverityLevel::Warning).unwrap();
        assert_eq!(w.expression, "Bundle.entry[1].resource.contained[0].condition[0]");
        assert!(w.reason.contains("clotted"), "{}", w.reason);
    }

    #[test]
    fn clotted_sets_aside_only_the_ionized_calcium_and_hemolyzed_sets_aside_nothing() {
        // One clotted Specimen shared by an ionized and a total calcium (a Bundle entry, by Type/id).
        let got = read(&[
            ionized(json!({ "specimen": { "reference": "Specimen/s1" } })),
            total(json!({ "specimen": { "reference": "Specimen/s1" } })),
            spec("s1", "CLOT"),
        ]);
        assert!(got.facts.of(Analyte::CalciumIonized).is_empty());
        assert_eq!(got.facts.of(Analyte::CalciumTotal).len(), 1, "a total calcium from it is used");
        let actions: Vec<(Analyte, SpecimenAction)> =
            got.facts.specimen.iter().map(|f| (f.analyte, f.action)).collect();
        assert_eq!(
            actions,
            [(Analyte::CalciumIonized, SpecimenAction::SetAside), (Analyte::CalciumTotal, SpecimenAction::Caution)]
        );
        assert_eq!(got.facts.specimen[0].specimen.as_ref().unwrap().reference.as_deref(), Some("Specimen/s1"));
        assert!(got.set_aside.iter().all(|s| s.resource != "Specimen/s1"), "read, so not listed: {:?}", got.set_aside);
        // A Specimen no result refers to is listed as not read.
        let got = read(&[ionized(json!({})), spec("lonely", "CLOT")]);
        let listed = got.set_aside.iter().find(|s| s.resource == "Specimen/lonely").unwrap();
        assert_eq!(listed.severity, IssueSeverityLevel::Information);
        assert!(got.facts.specimen.is_empty() && got.facts.of(Analyte::CalciumIonized).len() == 1);

        let got = read(&[ionized(json!({ "specimen": { "reference": "Specimen/s2" } })), spec("s2", "HEM")]);
        assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1, "hemolyzed: used");
        assert_eq!(got.facts.specimen[0].action, SpecimenAction::Caution);
        assert_eq!(got.facts.specimen[0].key, "hemolyzed");
        assert!(got.set_aside.iter().all(|s| s.severity != IssueSeverityLevel::Warning), "{:?}", got.set_aside);
    }

    #[test]
    fn a_specimen_that_cannot_be_read_is_a_finding_and_a_warning_but_the_result_is_used() {
        for reference in ["Specimen/absent", "#nothing", "https://elsewhere.example.com/Specimen/x"] {
            let got = read(&[ionized(json!({ "specimen": { "reference": reference } }))]);
            assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1, "{reference}");
            let f = &got.facts.specimen[0];
            assert_eq!((f.key.as_str(), f.action), ("unread", SpecimenAction::Unread), "{reference}");
            assert!(f.effect.contains("did not run"), "{}", f.effect);
            let w = got.set_aside.iter().find(|s| s.expression.ends_with(".specimen")).unwrap();
            assert_eq!(w.severity, IssueSeverityLevel::Warning);
        }
        // A specimen named by identifier only cannot be read either.
        let got = read(&[ionized(json!({ "specimen": { "identifier": { "system": "urn:x", "value": "1" } } }))]);
        assert_eq!(got.facts.specimen[0].action, SpecimenAction::Unread);
    }

    #[test]
    fn words_in_a_note_give_a_caution_only_and_a_coded_flag_wins_over_the_same_words() {
        let got = read(&[ionized(json!({ "note": [{ "text": "Specimen HAEMOLYSED, analysed as received" }] }))]);
        assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1);
        let f = &got.facts.specimen[0];
        assert_eq!(
            (f.key.as_str(), f.action, f.read_from),
            ("hemolyzed", SpecimenAction::Caution, SpecimenReadFrom::NoteText)
        );
        assert!(f.found.contains("HAEMOLYSED"), "the words are quoted: {}", f.found);
        // "clot" in a note never sets the ionized calcium aside.
        let got = read(&[ionized(json!({ "note": [{ "text": "no clots seen" }] }))]);
        assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1);
        assert_eq!(got.facts.specimen[0].action, SpecimenAction::Caution);
        // Coded and written: one finding, the coded one.
        let got = read(&[
            ionized(json!({ "specimen": { "reference": "Specimen/s" }, "note": [{ "text": "hemolyzed" }] })),
            spec("s", "HEM"),
        ]);
        assert_eq!(got.facts.specimen.len(), 1);
        assert_eq!(got.facts.specimen[0].read_from, SpecimenReadFrom::Condition);
    }

    #[test]
    fn quality_control_failure_sets_any_result_aside_and_handling_states_have_no_effect() {
        let qcf = json!({ "interpretation": [{ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/v3-ObservationInterpretation", "code": "QCF" }] }] });
        let got = read(&[total(qcf)]);
        assert!(got.facts.of(Analyte::CalciumTotal).is_empty());
        assert_eq!(got.facts.specimen[0].read_from, SpecimenReadFrom::Interpretation);
        let got = read(&[ionized(json!({ "specimen": { "reference": "Specimen/s" } })), spec("s", "ROOM")]);
        assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1);
        assert_eq!(got.facts.specimen[0].action, SpecimenAction::NoEffect);
        assert!(got.facts.specimen[0].severity.is_none());
    }

    #[test]
    fn specimen_status_subject_and_profile_decide_whether_the_specimen_can_be_read() {
        let with = |edit: &dyn Fn(&mut Value)| {
            let mut s = json!({ "resourceType": "Specimen", "id": "s", "subject": { "reference": "Patient/p" } });
            edit(&mut s);
            read(&[ionized(json!({ "specimen": { "reference": "Specimen/s" } })), s])
        };
        // Unsatisfactory (FHIR: cannot be used because of a quality issue): set aside.
        let got = with(&|s| s["status"] = json!("unsatisfactory"));
        assert!(got.facts.of(Analyte::CalciumIonized).is_empty());
        let f = &got.facts.specimen[0];
        assert_eq!((f.key.as_str(), f.read_from), ("unsatisfactory", SpecimenReadFrom::Status));
        // Available, with this patient as subject: read, nothing to say.
        let got = with(&|s| s["status"] = json!("available"));
        assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1);
        assert!(got.facts.specimen.is_empty());
        // Entered in error, another patient's, or not a valid Specimen: the check could not run.
        for (edit, why) in [
            (&(|s: &mut Value| s["status"] = json!("entered-in-error")) as &dyn Fn(&mut Value), "entered-in-error"),
            (&|s: &mut Value| s["subject"] = json!({ "reference": "Patient/someone-else" }), "not this patient"),
            (&|s: &mut Value| s["condition"] = json!("CLOT"), "does not match the Specimen profile"),
        ] {
            let got = with(edit);
            assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1, "{why}");
            let f = &got.facts.specimen[0];
            assert_eq!(f.action, SpecimenAction::Unread, "{why}");
            assert!(f.found.contains(why), "{why}: {}", f.found);
        }
        let got = with(&|s| s["condition"] = json!("CLOT"));
        assert!(
            got.facts.specimen[0].found.contains("Bundle.entry[2].resource.condition"),
            "{}",
            got.facts.specimen[0].found
        );
    }

    #[test]
    fn hemolysis_marks_a_magnesium_as_unable_to_exclude_a_low_one_but_not_the_calcium() {
        let mut mg = ionized(json!({ "specimen": { "reference": "Specimen/s" } }));
        mg["id"] = json!("mg");
        mg["code"] = json!({ "coding": [{ "system": "http://loinc.org", "code": "2601-3" }] });
        let got = read(&[ionized(json!({ "specimen": { "reference": "Specimen/s" } })), mg, spec("s", "HEM")]);
        let masks: Vec<(Analyte, bool)> = got.facts.specimen.iter().map(|f| (f.analyte, f.masks_low)).collect();
        assert_eq!(masks, [(Analyte::CalciumIonized, false), (Analyte::Magnesium, true)]);
        assert_eq!(got.facts.of(Analyte::Magnesium).len(), 1, "still read; the work-up decides");
    }

    #[test]
    fn a_condition_the_rules_do_not_know_is_shown_with_a_caution() {
        let mut s = spec("s", "XYZ");
        s["condition"][0]["coding"][0]["system"] = json!("urn:local:lab");
        let got = read(&[ionized(json!({ "specimen": { "reference": "Specimen/s" } })), s]);
        assert_eq!(got.facts.of(Analyte::CalciumIonized).len(), 1);
        let f = &got.facts.specimen[0];
        assert_eq!((f.key.as_str(), f.action), ("other-condition", SpecimenAction::Caution));
        assert!(f.effect.contains("urn:local:lab|XYZ"), "{}", f.effect);
    }
}
