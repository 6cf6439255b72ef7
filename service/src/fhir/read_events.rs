//! Reading Conditions, medication records and Procedures into coded events
//! (and symptom findings), matched to the rule set's code lists.

use serde_json::Value;

use super::{Entry, Index, Reader, codings, describe_codes, first_code, str_at};
use crate::clinical::facts::{Code, CodedEvent, EventKind, OpenRecord, SymptomFinding};
use crate::clinical::time::When;
use crate::fhir::datetime;
use crate::fhir::profiles::Kind;
use crate::rules::model::CodeListKind;

const OBSERVATION_CATEGORY: &str = "http://terminology.hl7.org/CodeSystem/observation-category";

impl<'a> Reader<'a> {
    /// Code lists of `kind` that hold one of the concept's codings, with the matching code.
    fn lists_for(&self, kind: CodeListKind, concept: Option<&Value>) -> (Vec<String>, Option<Code>, bool) {
        let (ids, hit, any_status, _) = self.lists_for_with_ingredient(kind, concept);
        (ids, hit, any_status)
    }

    /// As `lists_for`, with the formulary ingredient the first matching code stands for.
    fn lists_for_with_ingredient(
        &self,
        kind: CodeListKind,
        concept: Option<&Value>,
    ) -> (Vec<String>, Option<Code>, bool, Option<String>) {
        let mut ids = Vec::new();
        let mut hit = None;
        let mut any_status = false;
        let mut ingredient = None;
        for (system, code) in codings(concept) {
            for list in self.rules.code_lists.iter().filter(|l| l.kind == kind) {
                if let Some(c) = list.codes.iter().find(|c| c.system == system && c.code == code) {
                    if !ids.contains(&list.id) {
                        ids.push(list.id.clone());
                    }
                    any_status |= list.any_status;
                    if hit.is_none() {
                        ingredient.clone_from(&c.ingredient);
                    }
                    hit.get_or_insert_with(|| Code {
                        system: c.system.clone(),
                        code: c.code.clone(),
                        display: c.display.clone(),
                    });
                }
            }
        }
        (ids, hit, any_status, ingredient)
    }

    /// The fallback when no code matched: the medication lists whose ingredient
    /// names occur, as whole words and ignoring case, in the concept's text or a
    /// coding's display. Returns the lists, the name matched, the text it was
    /// found in and the ingredient (a name naming one salt first).
    fn lists_by_name(&self, concept: Option<&Value>) -> Option<(Vec<String>, String, String, Option<String>)> {
        let texts: Vec<&str> = concept
            .into_iter()
            .flat_map(|c| {
                let text = str_at(c, "text");
                let displays = c
                    .get("coding")
                    .and_then(Value::as_array)
                    .into_iter()
                    .flatten()
                    .filter_map(|x| str_at(x, "display"));
                text.into_iter().chain(displays)
            })
            .collect();
        let mut ids: Vec<String> = Vec::new();
        let mut first: Option<(String, String, Option<String>)> = None;
        for list in self.rules.code_lists.iter().filter(|l| l.kind == CodeListKind::Medication) {
            for n in &list.names {
                if let Some(t) = texts.iter().find(|t| has_words(t, &n.name)) {
                    if !ids.contains(&list.id) {
                        ids.push(list.id.clone());
                    }
                    let better = first.as_ref().is_none_or(|f| f.2.is_none() && n.ingredient.is_some());
                    if better {
                        first = Some((n.name.clone(), (*t).to_owned(), n.ingredient.clone()));
                    }
                }
            }
        }
        let (name, text, ingredient) = first?;
        Some((ids, name, text, ingredient))
    }

    /// A dateTime element, checked; `Err(())` after setting the resource aside.
    fn time_of(&mut self, e: &Entry<'_>, path: &str, text: Option<&str>) -> Result<Option<(When, String)>, ()> {
        let Some(t) = text else { return Ok(None) };
        match datetime::parse_date_time(t) {
            Ok(d) => {
                let skew = (self.rules.windows.clock_skew_minutes * 60.0).round() as i64;
                if d.when.earliest > self.now + skew {
                    self.aside(e, path, format!("{t} is in the future"));
                    return Err(());
                }
                Ok(Some((d.when, t.to_owned())))
            }
            Err(err) => {
                self.aside(e, path, format!("time not usable: {err}"));
                Err(())
            }
        }
    }

    fn period_start(r: &Value, key: &str) -> Option<String> {
        r.get(key).and_then(|p| str_at(p, "start").or_else(|| str_at(p, "end"))).map(str::to_owned)
    }

    pub(super) fn condition(
        &mut self,
        e: &Entry<'_>,
        index: &Index<'_>,
        patient: &Entry<'_>,
        symptoms: &mut Vec<SymptomFinding>,
        events: &mut Vec<CodedEvent>,
        unclassified: &mut Vec<OpenRecord>,
    ) {
        if !self.common_checks(e, Kind::Condition) {
            return;
        }
        let r = e.resource;
        let symptom = self.symptom_code(r.get("code"));
        let (lists, listed_code, any_status) = self.lists_for(CodeListKind::Condition, r.get("code"));
        if symptom.is_none() && lists.is_empty() {
            self.unclassified_condition(e, index, patient, unclassified);
            return;
        }
        let verification = first_code(r.get("verificationStatus"));
        if matches!(verification, Some("entered-in-error" | "refuted")) {
            self.aside(e, ".verificationStatus", format!("verification status '{}'", verification.unwrap_or("")));
            return;
        }
        let clinical = first_code(r.get("clinicalStatus"));
        let active = matches!(clinical, Some("active" | "recurrence" | "relapse"));
        if !active && (!any_status || lists.is_empty()) {
            self.ignore(e, format!("clinical status '{}': not active", clinical.unwrap_or("missing")));
            return;
        }
        if !self.subject_ok(e, index, patient) {
            return;
        }
        let onset = str_at(r, "onsetDateTime").or_else(|| str_at(r, "recordedDate"));
        let Ok(when) = self.time_of(e, ".onsetDateTime", onset) else { return };
        let (when, when_text) = when.map_or((None, None), |(w, t)| (Some(w), Some(t)));
        if let (Some(s), true) = (symptom, active) {
            symptoms.push(SymptomFinding {
                symptom: s.symptom,
                when,
                when_text: when_text.clone(),
                code: Code { system: s.system.clone(), code: s.code.clone(), display: s.display.clone() },
                source: self.source(e, ""),
            });
        }
        if let Some(code) = listed_code {
            events.push(CodedEvent {
                dose_mg: None,
                in_progress: false,
                kind: EventKind::Condition,
                lists,
                when,
                when_text,
                code,
                source: self.source(e, ""),
                by_name: None,
                ingredient: None,
            });
        }
    }

    /// A Condition whose code is in none of the rule set's lists. It could be a
    /// symptom the service does not know (a problem-list item or encounter
    /// diagnosis, or a Condition without a category) when it is current:
    /// clinicalStatus active/recurrence/relapse or not given, verification not
    /// refuted or entered-in-error. Kept with its time for the symptom state;
    /// other categories (e.g. health concerns) are only listed as not used.
    fn unclassified_condition(
        &mut self,
        e: &Entry<'_>,
        index: &Index<'_>,
        patient: &Entry<'_>,
        out: &mut Vec<OpenRecord>,
    ) {
        let r = e.resource;
        let description = describe_codes(r.get("code"));
        let not_used = format!("code {description} is not a symptom or a condition the rules read");
        let categories: Vec<&str> = r
            .get("category")
            .and_then(Value::as_array)
            .into_iter()
            .flatten()
            .flat_map(|c| codings(Some(c)).map(|(_, code)| code))
            .collect();
        let symptom_like = categories.is_empty()
            || categories.iter().any(|c| matches!(*c, "problem-list-item" | "encounter-diagnosis"));
        let verification = first_code(r.get("verificationStatus"));
        let clinical = first_code(r.get("clinicalStatus"));
        let current = clinical.is_none_or(|c| matches!(c, "active" | "recurrence" | "relapse"))
            && !matches!(verification, Some("entered-in-error" | "refuted"));
        if !symptom_like || !current || !self.subject_ok(e, index, patient) {
            self.ignore(e, not_used);
            return;
        }
        let onset = str_at(r, "onsetDateTime").or_else(|| str_at(r, "recordedDate"));
        let Ok(when) = self.time_of(e, ".onsetDateTime", onset) else { return };
        self.ignore(e, format!("{not_used}; it could be a symptom the service does not recognise, so the symptom state is unknown when it is near the calcium result"));
        out.push(OpenRecord {
            when: when.map(|(w, _)| w),
            in_progress: false,
            description,
            source: self.source(e, ""),
        });
    }

    /// An Observation whose code is in none of the rule set's lists. It could be
    /// a symptom the service does not know when it is an examination finding
    /// (category `exam`) that is not recorded as absent (valueBoolean false);
    /// kept with its time for the symptom state. Other Observations are only
    /// listed as not used.
    pub(super) fn unclassified_observation(&mut self, e: &Entry<'_>, index: &Index<'_>, patient: &Entry<'_>) {
        let r = e.resource;
        let description = describe_codes(r.get("code"));
        let not_used = format!("code {description} is not one the rules read");
        let exam = r
            .get("category")
            .and_then(Value::as_array)
            .into_iter()
            .flatten()
            .flat_map(|c| codings(Some(c)))
            .any(|(system, code)| system == OBSERVATION_CATEGORY && code == "exam");
        let absent = r.get("valueBoolean") == Some(&Value::Bool(false));
        if !exam || absent || !self.subject_ok(e, index, patient) {
            self.ignore(e, not_used);
            return;
        }
        let Some((when, _)) = self.effective(e) else { return };
        self.ignore(e, format!("{not_used}; an examination finding that could be a symptom the service does not recognise, so the symptom state is unknown when it is near the calcium result"));
        let rec = OpenRecord { when: Some(when), in_progress: false, description, source: self.source(e, "") };
        self.unclassified_observations.push(rec);
    }

    pub(super) fn medication(
        &mut self,
        e: &Entry<'_>,
        index: &Index<'_>,
        patient: &Entry<'_>,
        entries: &[Entry<'_>],
        events: &mut Vec<CodedEvent>,
        out_unidentified: &mut Vec<OpenRecord>,
    ) {
        let kind = match e.resource_type {
            "MedicationRequest" => Kind::MedicationRequest,
            "MedicationStatement" => Kind::MedicationStatement,
            _ => Kind::MedicationAdministration,
        };
        if !self.common_checks(e, kind) {
            return;
        }
        let r = e.resource;
        let status = str_at(r, "status").unwrap_or("");
        let usable = match e.resource_type {
            "MedicationRequest" => matches!(status, "active" | "on-hold" | "completed"),
            "MedicationStatement" => matches!(status, "active" | "completed" | "intended"),
            _ => matches!(status, "completed" | "in-progress"),
        };
        // The medication's code: inline, or through a reference to a Medication.
        let concept = r.get("medicationCodeableConcept").cloned().or_else(|| {
            let reference = r.get("medicationReference").and_then(|m| str_at(m, "reference"))?;
            let med = if let Some(local) = reference.strip_prefix('#') {
                r.get("contained")
                    .and_then(Value::as_array)
                    .and_then(|c| c.iter().find(|x| str_at(x, "id") == Some(local)))
            } else {
                index
                    .resolve(reference, e.full_url)
                    .and_then(|i| entries.iter().find(|x| x.index == i))
                    .map(|x| x.resource)
            }?;
            med.get("code").cloned()
        });
        let (mut lists, code, _, mut ingredient) =
            self.lists_for_with_ingredient(CodeListKind::Medication, concept.as_ref());
        let mut by_name = None;
        let code = match code {
            Some(c) => c,
            None => match self.lists_by_name(concept.as_ref()) {
                Some((ids, name, text, ing)) => {
                    lists = ids;
                    ingredient = ing;
                    by_name = Some(text.clone());
                    Code {
                        system: String::new(),
                        code: String::new(),
                        display: format!("{name} (identified by name '{text}')"),
                    }
                }
                None => {
                    let named = concept.as_ref().is_some_and(|c| {
                        str_at(c, "text").is_some_and(|t| !t.trim().is_empty())
                            || c.get("coding")
                                .and_then(Value::as_array)
                                .is_some_and(|a| a.iter().any(|x| str_at(x, "display").is_some()))
                    });
                    if !named && usable {
                        self.unidentified(e, index, patient, concept.as_ref(), status, out_unidentified);
                        return;
                    }
                    self.ignore(
                        e,
                        format!(
                            "medication {} is not in the rule set's medication lists",
                            describe_codes(concept.as_ref())
                        ),
                    );
                    return;
                }
            },
        };
        if !usable {
            self.ignore(e, format!("status '{status}': not a current or recent medication"));
            return;
        }
        if !self.subject_ok(e, index, patient) {
            return;
        }
        let (path, text) = match e.resource_type {
            "MedicationRequest" => (".authoredOn", str_at(r, "authoredOn").map(str::to_owned)),
            _ => match str_at(r, "effectiveDateTime") {
                Some(t) => (".effectiveDateTime", Some(t.to_owned())),
                None => (".effectivePeriod", Self::period_start(r, "effectivePeriod")),
            },
        };
        let Ok(when) = self.time_of(e, path, text.as_deref()) else { return };
        let (when, when_text) = when.map_or((None, None), |(w, t)| (Some(w), Some(t)));
        // A dose is counted only when stated in mg (UCUM): mL would need the product's strength.
        let dose_mg = r.get("dosage").and_then(|d| d.get("dose")).and_then(|q| {
            (str_at(q, "system") == Some(super::UCUM) && str_at(q, "code") == Some("mg"))
                .then(|| q.get("value").and_then(Value::as_f64))
                .flatten()
        });
        let in_progress = matches!(
            (e.resource_type, status),
            ("MedicationAdministration", "in-progress")
                | ("MedicationRequest", "active")
                | ("MedicationStatement", "active")
        );
        events.push(CodedEvent {
            dose_mg,
            in_progress,
            kind: EventKind::Medication,
            lists,
            when,
            when_text,
            code,
            source: self.source(e, ""),
            by_name,
            ingredient,
        });
    }

    /// A medication record with no listed code and no readable name: kept, with
    /// its time and status, so the safety checks can say they may be incomplete.
    fn unidentified(
        &mut self,
        e: &Entry<'_>,
        index: &Index<'_>,
        patient: &Entry<'_>,
        concept: Option<&Value>,
        status: &str,
        out: &mut Vec<OpenRecord>,
    ) {
        if !self.subject_ok(e, index, patient) {
            return;
        }
        let r = e.resource;
        let (path, text) = match e.resource_type {
            "MedicationRequest" => (".authoredOn", str_at(r, "authoredOn").map(str::to_owned)),
            _ => match str_at(r, "effectiveDateTime") {
                Some(t) => (".effectiveDateTime", Some(t.to_owned())),
                None => (".effectivePeriod", Self::period_start(r, "effectivePeriod")),
            },
        };
        let Ok(when) = self.time_of(e, path, text.as_deref()) else { return };
        let in_progress = matches!(
            (e.resource_type, status),
            ("MedicationAdministration", "in-progress")
                | ("MedicationRequest", "active" | "on-hold")
                | ("MedicationStatement", "active" | "intended")
        );
        let description = describe_codes(concept);
        self.ignore(
            e,
            format!("medication {description} could not be identified (no listed code, no name); raised with the safety checks when near the proposal"),
        );
        out.push(OpenRecord { when: when.map(|(w, _)| w), in_progress, description, source: self.source(e, "") });
    }

    pub(super) fn procedure(
        &mut self,
        e: &Entry<'_>,
        index: &Index<'_>,
        patient: &Entry<'_>,
        events: &mut Vec<CodedEvent>,
    ) {
        if !self.common_checks(e, Kind::Procedure) {
            return;
        }
        let r = e.resource;
        let (lists, code, _) = self.lists_for(CodeListKind::Procedure, r.get("code"));
        let Some(code) = code else {
            self.ignore(
                e,
                format!("procedure {} is not in the rule set's procedure lists", describe_codes(r.get("code"))),
            );
            return;
        };
        let status = str_at(r, "status").unwrap_or("");
        if !matches!(status, "completed" | "in-progress") {
            self.ignore(e, format!("status '{status}': not performed"));
            return;
        }
        if !self.subject_ok(e, index, patient) {
            return;
        }
        let (path, text) = match str_at(r, "performedDateTime") {
            Some(t) => (".performedDateTime", Some(t.to_owned())),
            None => (".performedPeriod", Self::period_start(r, "performedPeriod")),
        };
        let Ok(when) = self.time_of(e, path, text.as_deref()) else { return };
        let (when, when_text) = when.map_or((None, None), |(w, t)| (Some(w), Some(t)));
        events.push(CodedEvent {
            dose_mg: None,
            in_progress: status == "in-progress",
            kind: EventKind::Procedure,
            lists,
            when,
            when_text,
            code,
            source: self.source(e, ""),
            by_name: None,
            ingredient: None,
        });
    }
}

/// `needle` occurs in `hay` as whole words, ignoring case ("Calcium Gluconate
/// 10% inj" holds "calcium gluconate"; "calciumgluconate" does not).
fn has_words(hay: &str, needle: &str) -> bool {
    let words = |t: &str| -> Vec<String> {
        t.split(|c: char| !c.is_alphanumeric()).filter(|w| !w.is_empty()).map(str::to_lowercase).collect()
    };
    let (h, n) = (words(hay), words(needle));
    !n.is_empty() && h.windows(n.len()).any(|w| w == n.as_slice())
}

#[cfg(test)]
mod tests {
    use super::has_words;
    use crate::clinical::facts::{Facts, Symptom};
    use crate::clinical::testing::{now, shared_rules};
    use crate::fhir::profiles::Profiles;
    use serde_json::{Value, json};

    /// Read a Bundle of a patient and `resources` at the case clock (2026-11-30T15:00Z).
    fn read(resources: Vec<Value>) -> Facts {
        let mut entries = vec![json!({ "fullUrl": "urn:uuid:00000000-0000-4000-8000-000000000001",
            "resource": { "resourceType": "Patient", "birthDate": "2019-06-02", "gender": "female" } })];
        for (i, r) in resources.into_iter().enumerate() {
            entries.push(
                json!({ "fullUrl": format!("urn:uuid:00000000-0000-4000-8000-0000000001{i:02}"), "resource": r }),
            );
        }
        let bundle = json!({ "resourceType": "Bundle", "type": "collection", "entry": entries });
        let profiles = Profiles::compile().expect("profiles compile");
        crate::fhir::read::read_value(&bundle, shared_rules(), &profiles, now(), true).expect("readable").facts
    }

    fn med(concept: Value) -> Value {
        json!({ "resourceType": "MedicationRequest", "status": "active", "intent": "order",
            "medicationCodeableConcept": concept,
            "subject": { "reference": "urn:uuid:00000000-0000-4000-8000-000000000001" },
            "authoredOn": "2026-11-30T06:00:00-05:00" })
    }

    fn condition(system: &str, code: &str, category: Option<&str>) -> Value {
        let mut c = json!({ "resourceType": "Condition",
            "clinicalStatus": { "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/condition-clinical", "code": "active" }] },
            "code": { "coding": [{ "system": system, "code": code }] },
            "subject": { "reference": "urn:uuid:00000000-0000-4000-8000-000000000001" },
            "onsetDateTime": "2026-11-30T06:50:00-05:00" });
        if let Some(cat) = category {
            c["category"] = json!([{ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/condition-category", "code": cat }] }]);
        }
        c
    }

    #[test]
    fn an_rxnorm_code_is_matched_with_its_salt() {
        // 1668250: calcium gluconate 10% injection (cause-codes.toml, ingredient calcium_gluconate).
        let f = read(vec![med(
            json!({ "coding": [{ "system": "http://www.nlm.nih.gov/research/umls/rxnorm", "code": "1668250" }] }),
        )]);
        assert_eq!(f.events.len(), 1);
        let e = &f.events[0];
        assert_eq!(e.lists, vec!["calcium_preparations".to_owned()]);
        assert_eq!(e.ingredient.as_deref(), Some("calcium_gluconate"));
        assert!(e.by_name.is_none());
        assert!(f.unidentified_medications.is_empty());
    }

    #[test]
    fn without_a_listed_code_the_name_in_text_or_display_identifies_it() {
        // A display only (an RxNorm code not in the lists): matched by the ingredient name.
        let f = read(vec![
            med(json!({ "coding": [{ "system": "http://www.nlm.nih.gov/research/umls/rxnorm", "code": "0000001",
                "display": "cefTRIAXone 1 GM Injection" }] })),
            med(json!({ "text": "Calcium Chloride 10% 500 mg IV" })),
        ]);
        assert_eq!(f.events.len(), 2);
        assert_eq!(f.events[0].lists, vec!["ceftriaxone".to_owned()]);
        assert_eq!(f.events[0].by_name.as_deref(), Some("cefTRIAXone 1 GM Injection"));
        assert!(f.events[0].code.display.contains("identified by name"), "{}", f.events[0].code.display);
        assert_eq!(f.events[1].lists, vec!["calcium_preparations".to_owned()]);
        assert_eq!(f.events[1].ingredient.as_deref(), Some("calcium_chloride"));
    }

    #[test]
    fn a_medication_with_neither_listed_code_nor_name_is_kept_as_unidentified() {
        let f = read(vec![
            med(json!({ "coding": [{ "system": "https://example.org/pharmacy-item", "code": "X-1" }] })),
            // A named drug not in the lists is identified as something else: not raised.
            med(
                json!({ "coding": [{ "system": "https://example.org/pharmacy-item", "code": "X-2", "display": "paracetamol 120 mg/5 mL" }] }),
            ),
        ]);
        assert!(f.events.is_empty());
        assert_eq!(f.unidentified_medications.len(), 1);
        assert!(f.unidentified_medications[0].in_progress, "an active order");
        assert!(f.unidentified_medications[0].description.contains("X-1"));
    }

    #[test]
    fn symptoms_charted_in_icd10cm_and_snomed_are_read() {
        let f = read(vec![
            condition("http://hl7.org/fhir/sid/icd-10-cm", "R29.0", Some("encounter-diagnosis")),
            condition("http://snomed.info/sct", "1023001", Some("problem-list-item")),
            condition("http://hl7.org/fhir/sid/icd-10-cm", "P90", None),
        ]);
        let got: Vec<Symptom> = f.symptoms.iter().map(|s| s.symptom).collect();
        assert_eq!(got, vec![Symptom::Tetany, Symptom::Apnea, Symptom::Seizure]);
        assert!(f.unclassified_findings.is_empty());
    }

    #[test]
    fn an_unlisted_examination_finding_is_unclassified_unless_recorded_absent() {
        let obs = |value: bool, category: &str| {
            json!({ "resourceType": "Observation", "status": "final",
                "category": [{ "coding": [{ "system": "http://terminology.hl7.org/CodeSystem/observation-category", "code": category }] }],
                "code": { "coding": [{ "system": "https://example.org/exam", "code": "twitching" }] },
                "subject": { "reference": "urn:uuid:00000000-0000-4000-8000-000000000001" },
                "effectiveDateTime": "2026-11-30T06:50:00-05:00", "valueBoolean": value })
        };
        let f = read(vec![obs(true, "exam"), obs(false, "exam"), obs(true, "laboratory")]);
        assert_eq!(f.unclassified_findings.len(), 1);
        assert!(f.unclassified_findings[0].description.contains("twitching"));
    }

    #[test]
    fn an_unlisted_diagnosis_is_unclassified_but_a_listed_one_or_a_concern_is_not() {
        let f = read(vec![
            // Unlisted encounter diagnosis: could be a symptom.
            condition("http://hl7.org/fhir/sid/icd-10-cm", "R25.8", Some("encounter-diagnosis")),
            // Hypocalcemia itself is recognised (hypocalcemia_recorded), not a possible symptom.
            condition("http://hl7.org/fhir/sid/icd-10-cm", "E83.51", Some("problem-list-item")),
            // A health concern is not a charted finding.
            condition("http://hl7.org/fhir/sid/icd-10-cm", "R25.8", Some("health-concern")),
        ]);
        assert_eq!(f.unclassified_findings.len(), 1);
        assert!(f.unclassified_findings[0].description.contains("R25.8"));
        assert!(f.symptoms.is_empty());
    }

    #[test]
    fn names_match_as_whole_words_ignoring_case() {
        assert!(has_words("Calcium Gluconate 10% 1 g IV", "calcium gluconate"));
        assert!(has_words("cefTRIAXone 1 GM Injection", "ceftriaxone"));
        assert!(has_words("Sodium bicarbonate 4.2% infusion", "sodium bicarbonate"));
        // Not part of a longer word, not the words apart.
        assert!(!has_words("calciumgluconate", "calcium gluconate"));
        assert!(!has_words("calcium and gluconate", "calcium gluconate"));
        assert!(!has_words("digoxinum", "digoxin"));
        assert!(!has_words("", "digoxin"));
    }
}
