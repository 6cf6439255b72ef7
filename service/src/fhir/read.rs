//! FHIR JSON -> typed facts.
//!
//! Whole-request problems (not JSON, not a Bundle or Parameters, no Patient,
//! two Patients, duplicate ids that make references ambiguous) end the request
//! with a `RequestError`. Problems of one resource never do: the resource is
//! set aside and listed, with the element and the reason (issue 2).

use std::collections::HashMap;

use serde_json::Value;

use super::datetime::{self, DateError};
use super::outcome::{Issue, IssueCode, IssueSeverityLevel, RequestError};
use super::profiles::{Kind, Profiles};
use crate::clinical::facts::{
    Analyte, Code, Facts, Gender, Measurement, PatientFacts, ResultStatus, Source, SpecimenAction, SpecimenFinding,
    SpecimenReadFrom, SymptomFinding,
};
use crate::clinical::format::num;
use crate::clinical::time::When;
use crate::clinical::units;
use crate::rules::model::{ObservationCode, RuleSet, SymptomCode};

#[path = "read_events.rs"]
mod events;
#[path = "read_specimen.rs"]
mod specimen;

/// The UCUM system URI.
pub const UCUM: &str = "http://unitsofmeasure.org";

/// Bundle types accepted as input.
pub const ACCEPTED_BUNDLE_TYPES: &[&str] = &["collection", "transaction", "batch", "searchset"];

/// An input that was not used, located and explained.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct SetAside {
    /// Location, e.g. `Bundle.entry[3].resource.valueQuantity.code`.
    pub expression: String,
    /// The resource, e.g. `Observation/tca-1` (or its location when it has no id).
    pub resource: String,
    /// Why.
    pub reason: String,
    /// warning: set aside because it cannot be trusted; information: not read.
    pub severity: IssueSeverityLevel,
    /// Issue type code.
    pub code: IssueCode,
}

/// What ingestion produced.
#[derive(Debug, Clone)]
pub struct Ingested {
    /// Facts for the core.
    pub facts: Facts,
    /// Inputs set aside or ignored.
    pub set_aside: Vec<SetAside>,
    /// Reference to the patient for output `subject` elements.
    pub patient_reference: Option<String>,
    /// Bundle.id of the request, if any.
    pub bundle_id: Option<String>,
    /// The raw evaluation time text, when it came from the request.
    pub now_from_request: Option<String>,
    /// Business identifiers of the entries that have a `fullUrl` but no id,
    /// by that `fullUrl`: an output refers to such an entry by identifier,
    /// since its `urn:uuid` would point nowhere once the result is stored.
    pub identifiers: HashMap<String, InputIdentifier>,
}

/// An input resource's business identifier (its first `identifier` with a value).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct InputIdentifier {
    /// Identifier.system, when given.
    pub system: Option<String>,
    /// Identifier.value.
    pub value: String,
}

/// The identifiers of the entries that have a `fullUrl` but no `id` (see
/// [`Ingested::identifiers`]): the first identifier with a value, preferring
/// one with a system.
fn input_identifiers(bundle: &Value) -> HashMap<String, InputIdentifier> {
    let mut out = HashMap::new();
    for entry in bundle.get("entry").and_then(Value::as_array).into_iter().flatten() {
        let (Some(url), Some(resource)) = (str_at(entry, "fullUrl"), entry.get("resource")) else {
            continue;
        };
        if resource.get("id").is_some() {
            continue;
        }
        let ids = resource.get("identifier").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
        let with_value = |need_system: bool| {
            ids.iter().find(|i| {
                str_at(i, "value").is_some_and(|v| !v.trim().is_empty())
                    && (!need_system || str_at(i, "system").is_some())
            })
        };
        if let Some(i) = with_value(true).or_else(|| with_value(false)) {
            out.insert(
                url.to_owned(),
                InputIdentifier {
                    system: str_at(i, "system").map(str::to_owned),
                    value: str_at(i, "value").unwrap_or_default().to_owned(),
                },
            );
        }
    }
    out
}

struct Entry<'a> {
    index: usize,
    full_url: Option<&'a str>,
    resource_type: &'a str,
    id: Option<&'a str>,
    resource: &'a Value,
}

impl Entry<'_> {
    fn reference(&self) -> Option<String> {
        match (self.id, self.full_url) {
            (Some(id), _) => Some(format!("{}/{id}", self.resource_type)),
            (None, Some(url)) => Some(url.to_owned()),
            _ => None,
        }
    }
}

struct Reader<'a> {
    access: crate::clinical::facts::VascularAccess,
    rules: &'a RuleSet,
    profiles: &'a Profiles,
    prefix: String,
    set_aside: Vec<SetAside>,
    now: i64,
    /// Finding Observations that could be a symptom but are in no list (read_events.rs).
    unclassified_observations: Vec<crate::clinical::facts::OpenRecord>,
    /// Entry indices of the Specimens a result referred to (read by the specimen check).
    specimens_read: Vec<usize>,
}

fn str_at<'v>(v: &'v Value, key: &str) -> Option<&'v str> {
    v.get(key).and_then(Value::as_str)
}

fn whole(status: u16, code: IssueCode, expression: impl Into<String>, diagnostics: impl Into<String>) -> RequestError {
    RequestError::single(status, code, expression, diagnostics)
}

/// Parse a request body as JSON (400 when it is empty or not JSON, or nested
/// deeper than serde_json's limit of 128 levels).
pub fn parse(body: &[u8]) -> Result<Value, RequestError> {
    if body.iter().all(u8::is_ascii_whitespace) {
        return Err(whole(
            400,
            IssueCode::Structure,
            "",
            "The request body is empty; a FHIR Bundle or Parameters resource is expected.",
        ));
    }
    let root: Value = serde_json::from_slice(body).map_err(|e| {
        let what = if e.to_string().contains("recursion limit") {
            "The JSON is nested too deeply to be FHIR (more than 128 levels)".to_owned()
        } else {
            format!("The body is not valid JSON ({e})")
        };
        whole(400, IssueCode::Structure, "", what)
    })?;
    Ok(root)
}

/// Read a parsed request document into facts.
///
/// `now` is the evaluation time (unix seconds); a `now` part in a Parameters
/// wrapper overrides it unless `now_fixed` is set (the CLI's `--now`).
pub fn read_value(
    root: &Value,
    rules: &RuleSet,
    profiles: &Profiles,
    mut now: i64,
    now_fixed: bool,
) -> Result<Ingested, RequestError> {
    let Some(obj) = root.as_object() else {
        return Err(whole(
            422,
            IssueCode::Structure,
            "",
            "The body is JSON but not a FHIR resource (expected an object with resourceType).",
        ));
    };
    let resource_type = obj.get("resourceType").and_then(Value::as_str).unwrap_or("");
    let mut now_from_request = None;
    let mut access = crate::clinical::facts::VascularAccess::Unknown;
    let mut parameters_aside = Vec::new();
    let (bundle, prefix) = match resource_type {
        "Bundle" => (root, "Bundle".to_owned()),
        "Parameters" => {
            let errors = profiles.check(Kind::Parameters, root);
            if !errors.is_empty() {
                return Err(RequestError::from_profile(422, "Parameters", &errors));
            }
            let params = obj.get("parameter").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
            parameters_aside = parameter_names(params)?;
            for (i, p) in params.iter().enumerate() {
                if str_at(p, "name") == Some("now") {
                    let text = str_at(p, "valueDateTime").or_else(|| str_at(p, "valueInstant")).unwrap_or("");
                    let parsed =
                        datetime::parse_date_time(text).ok().filter(|t| t.date_only.is_none()).ok_or_else(|| {
                            whole(
                                422,
                                IssueCode::Value,
                                format!("Parameters.parameter[{i}].valueDateTime"),
                                "The 'now' part must be a dateTime with a time and an offset.",
                            )
                        })?;
                    if !now_fixed {
                        now = parsed.when.latest;
                        now_from_request = Some(text.to_owned());
                    }
                }
            }
            for (i, p) in params.iter().enumerate() {
                if str_at(p, "name") == Some("vascularAccess") {
                    let code = str_at(p, "valueCode").unwrap_or("");
                    access = crate::clinical::facts::VascularAccess::from_code(code).ok_or_else(|| {
                        whole(
                            422,
                            IssueCode::Value,
                            format!("Parameters.parameter[{i}].valueCode"),
                            "The 'vascularAccess' part must be one of peripheral, central, arterial, umbilical-arterial, umbilical-venous, unknown.",
                        )
                    })?;
                }
            }
            let found = params.iter().enumerate().find(|(_, p)| str_at(p, "name") == Some("bundle"));
            let Some((i, part)) = found else {
                return Err(whole(
                    422,
                    IssueCode::Required,
                    "Parameters.parameter",
                    "No part named 'bundle': the Parameters wrapper must carry the patient's Bundle in a part named 'bundle'.",
                ));
            };
            let Some(res) = part.get("resource").filter(|r| str_at(r, "resourceType") == Some("Bundle")) else {
                return Err(whole(
                    422,
                    IssueCode::Structure,
                    format!("Parameters.parameter[{i}].resource"),
                    "The 'bundle' part must hold a Bundle resource.",
                ));
            };
            (res, format!("Parameters.parameter[{i}].resource"))
        }
        "" => {
            return Err(whole(
                422,
                IssueCode::Structure,
                "resourceType",
                "The body has no resourceType; a FHIR Bundle or Parameters resource is expected.",
            ));
        }
        other => {
            return Err(whole(
                422,
                IssueCode::NotSupported,
                "resourceType",
                format!(
                    "resourceType '{other}' is not accepted here; send a Bundle (or a Parameters resource with a 'bundle' part)."
                ),
            ));
        }
    };
    let mut reader = Reader {
        access,
        rules,
        profiles,
        prefix,
        set_aside: parameters_aside,
        now,
        unclassified_observations: Vec::new(),
        specimens_read: Vec::new(),
    };
    let (facts, patient_reference) = reader.bundle(bundle)?;
    Ok(Ingested {
        facts,
        set_aside: reader.set_aside,
        patient_reference,
        bundle_id: str_at(bundle, "id").map(str::to_owned),
        now_from_request,
        identifiers: input_identifiers(bundle),
    })
}

/// The parts a Parameters wrapper may carry (the `in` parameters of the
/// OperationDefinition that travel in the body; `_explain` is a URL parameter).
pub const PARAMETER_PARTS: &[&str] = &["bundle", "now", "vascularAccess"];

/// Check the part names of a Parameters wrapper: a known part given twice is
/// refused (each has max 1 in the OperationDefinition, and which one to read
/// would be a guess); a part with any other name is set aside with a warning
/// naming the accepted names, so that a misspelt part is never ignored quietly.
fn parameter_names(params: &[Value]) -> Result<Vec<SetAside>, RequestError> {
    let accepted = PARAMETER_PARTS.join(", ");
    let mut aside = Vec::new();
    let mut seen: Vec<(&str, usize)> = Vec::new();
    for (i, p) in params.iter().enumerate() {
        let name = str_at(p, "name").unwrap_or("");
        if PARAMETER_PARTS.contains(&name) {
            if let Some((_, first)) = seen.iter().find(|(n, _)| *n == name) {
                return Err(RequestError {
                    status: 422,
                    issues: vec![
                        Issue::error(
                            IssueCode::Duplicate,
                            vec![format!("Parameters.parameter[{first}].name")],
                            format!("The part '{name}' is given more than once; it may be given once."),
                        ),
                        Issue::error(
                            IssueCode::Duplicate,
                            vec![format!("Parameters.parameter[{i}].name")],
                            format!("The part '{name}' is given again here; send one '{name}' part."),
                        ),
                    ],
                });
            }
            seen.push((name, i));
            continue;
        }
        let close = PARAMETER_PARTS.iter().find(|k| k.eq_ignore_ascii_case(name));
        let hint = match (close, name) {
            (Some(k), _) => format!(" (did you mean '{k}'? part names are case-sensitive)"),
            (None, "_explain") => " ('_explain' is read from the URL query, ?_explain=true, not from the body)".into(),
            _ => String::new(),
        };
        aside.push(SetAside {
            expression: format!("Parameters.parameter[{i}].name"),
            resource: format!("Parameters.parameter[{i}]"),
            reason: format!(
                "the part '{name}' is not one this operation reads, so it was not used{hint}; the accepted parts are {accepted}"
            ),
            severity: IssueSeverityLevel::Warning,
            code: IssueCode::NotSupported,
        });
    }
    Ok(aside)
}

impl<'a> Reader<'a> {
    fn at(&self, index: usize) -> String {
        format!("{}.entry[{index}].resource", self.prefix)
    }

    fn aside(&mut self, e: &Entry<'_>, path: &str, reason: impl Into<String>) {
        self.push(e, path, reason, IssueSeverityLevel::Warning, IssueCode::Invalid);
    }

    fn ignore(&mut self, e: &Entry<'_>, reason: impl Into<String>) {
        self.push(e, "", reason, IssueSeverityLevel::Information, IssueCode::Informational);
    }

    fn push(
        &mut self,
        e: &Entry<'_>,
        path: &str,
        reason: impl Into<String>,
        severity: IssueSeverityLevel,
        code: IssueCode,
    ) {
        let expression = format!("{}{path}", self.at(e.index));
        let resource = e.reference().unwrap_or_else(|| self.at(e.index));
        self.set_aside.push(SetAside { expression, resource, reason: reason.into(), severity, code });
    }

    fn source(&self, e: &Entry<'_>, path: &str) -> Source {
        Source {
            resource_type: e.resource_type.to_owned(),
            reference: e.reference(),
            expression: format!("{}{path}", self.at(e.index)),
        }
    }

    fn bundle(&mut self, bundle: &'a Value) -> Result<(Facts, Option<String>), RequestError> {
        let p = self.prefix.clone();
        if bundle.get("entry").and_then(Value::as_array).is_some_and(Vec::is_empty) {
            return Err(whole(
                422,
                IssueCode::Required,
                format!("{p}.entry"),
                "The Bundle's entry list is empty: nothing was sent to assess. Put the patient's Patient resource \
                 (for the birth date) and their laboratory results in the Bundle, one resource per entry.",
            ));
        }
        let errors = self.profiles.check(Kind::Bundle, bundle);
        // Errors inside one entry set that entry aside; the rest end the request.
        let (entry_errors, envelope): (Vec<_>, Vec<_>) =
            errors.into_iter().partition(|e| entry_index(&e.path).is_some());
        if !envelope.is_empty() {
            return Err(RequestError::from_profile(422, &p, &envelope));
        }
        let kind = str_at(bundle, "type").unwrap_or("");
        if !ACCEPTED_BUNDLE_TYPES.contains(&kind) {
            return Err(whole(
                422,
                IssueCode::NotSupported,
                format!("{p}.type"),
                format!("Bundle.type '{kind}' is not accepted; use one of {}.", ACCEPTED_BUNDLE_TYPES.join(", ")),
            ));
        }
        let raw = bundle.get("entry").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
        let mut entries = Vec::new();
        let mut broken = std::collections::BTreeSet::new();
        for err in &entry_errors {
            if let Some(i) = entry_index(&err.path) {
                broken.insert(i);
            }
        }
        for (index, entry) in raw.iter().enumerate() {
            let Some(resource) = entry.get("resource").filter(|r| r.is_object()) else {
                self.set_aside.push(SetAside {
                    expression: format!("{p}.entry[{index}]"),
                    resource: format!("{p}.entry[{index}]"),
                    reason: "entry has no resource".into(),
                    severity: IssueSeverityLevel::Information,
                    code: IssueCode::Informational,
                });
                continue;
            };
            let e = Entry {
                index,
                full_url: str_at(entry, "fullUrl"),
                resource_type: str_at(resource, "resourceType").unwrap_or(""),
                id: str_at(resource, "id"),
                resource,
            };
            if broken.contains(&index) {
                let msgs: Vec<String> = entry_errors
                    .iter()
                    .filter(|er| entry_index(&er.path) == Some(index))
                    .map(|er| format!("{}{}: {}", p, er.path, er.message))
                    .collect();
                self.push(
                    &e,
                    "",
                    format!("entry breaks the Bundle rules: {}", msgs.join("; ")),
                    IssueSeverityLevel::Warning,
                    IssueCode::Structure,
                );
                continue;
            }
            if str_at(entry.get("search").unwrap_or(&Value::Null), "mode") == Some("outcome") {
                self.ignore(&e, "search outcome message, not patient data");
                continue;
            }
            entries.push(e);
        }
        self.duplicates(&mut entries)?;
        let index = Index::new(&entries);

        // The one patient.
        let patients: Vec<&Entry<'_>> = entries.iter().filter(|e| e.resource_type == "Patient").collect();
        let patient = match patients.as_slice() {
            [] => {
                return Err(whole(
                    422,
                    IssueCode::Required,
                    format!("{p}.entry"),
                    "The Bundle holds no Patient; the assessment needs the patient's Patient resource (for the birth date).",
                ));
            }
            [one] => *one,
            [first, second, ..] => {
                return Err(RequestError {
                    status: 422,
                    issues: vec![Issue::error(
                        IssueCode::BusinessRule,
                        vec![self.at(first.index), self.at(second.index)],
                        "The Bundle holds more than one Patient; an assessment is for one patient only.",
                    )],
                });
            }
        };
        let patient_index = patient.index;
        let patient_facts = self.patient(patient)?;
        let patient_reference = patient.reference();

        let mut measurements = Vec::new();
        let mut symptoms = Vec::new();
        let mut unidentified = Vec::new();
        let mut unclassified = Vec::new();
        let mut events = Vec::new();
        let mut gestation = None;
        let mut specimen = Vec::new();
        let mut birth_weight = None;
        for e in &entries {
            if e.index == patient_index {
                continue;
            }
            match e.resource_type {
                "Observation" => {
                    self.observation(e, &index, patient, &entries, &mut measurements, &mut symptoms, &mut specimen)
                }
                "Condition" => self.condition(e, &index, patient, &mut symptoms, &mut events, &mut unclassified),
                "MedicationRequest" | "MedicationStatement" | "MedicationAdministration" => {
                    self.medication(e, &index, patient, &entries, &mut events, &mut unidentified)
                }
                "Procedure" => self.procedure(e, &index, patient, &mut events),
                "Medication" => self
                    .ignore(e, "Medication resources are read only through the medication records that refer to them"),
                // Read through the results that refer to them; the others are listed below.
                "Specimen" => {}
                other => self.ignore(e, format!("resource type {other} is not read by this version of the rules")),
            }
        }
        let read = std::mem::take(&mut self.specimens_read);
        for e in entries.iter().filter(|e| e.resource_type == "Specimen" && !read.contains(&e.index)) {
            self.ignore(e, "no result read here refers to this Specimen");
        }
        // Gestational age is a fact about the patient, not a result to judge.
        measurements.retain(|m: &Measurement| {
            if m.analyte == Analyte::GestationalAgeAtBirth {
                gestation = Some(m.value);
                false
            } else if m.analyte == Analyte::BirthWeight {
                birth_weight = Some(m.value);
                false
            } else {
                true
            }
        });
        Ok((
            Facts {
                patient: patient_facts,
                measurements,
                symptoms,
                events,
                unidentified_medications: unidentified,
                unclassified_findings: unclassified
                    .into_iter()
                    .chain(self.unclassified_observations.drain(..))
                    .collect(),
                vascular_access: self.access,
                gestational_age_weeks: gestation,
                birth_weight_kg: birth_weight,
                now: self.now,
                specimen,
            },
            patient_reference,
        ))
    }

    fn duplicates(&mut self, entries: &mut Vec<Entry<'a>>) -> Result<(), RequestError> {
        let p = self.prefix.clone();
        let mut by_url: HashMap<&str, usize> = HashMap::new();
        let mut by_id: HashMap<(&str, &str), usize> = HashMap::new();
        let mut drop = Vec::new();
        for (k, e) in entries.iter().enumerate() {
            if let Some(url) = e.full_url {
                if let Some(&first) = by_url.get(url) {
                    return Err(RequestError {
                        status: 422,
                        issues: vec![Issue::error(
                            IssueCode::Duplicate,
                            vec![
                                format!("{p}.entry[{}].fullUrl", entries[first].index),
                                format!("{p}.entry[{}].fullUrl", e.index),
                            ],
                            "Two entries share one fullUrl (FHIR rule bdl-7); references to it are ambiguous.",
                        )],
                    });
                }
                by_url.insert(url, k);
            }
            if let Some(id) = e.id {
                if let Some(&first) = by_id.get(&(e.resource_type, id)) {
                    if entries[first].resource == e.resource {
                        drop.push(k);
                        continue;
                    }
                    return Err(RequestError {
                        status: 422,
                        issues: vec![Issue::error(
                            IssueCode::Duplicate,
                            vec![
                                format!("{p}.entry[{}].resource.id", entries[first].index),
                                format!("{p}.entry[{}].resource.id", e.index),
                            ],
                            format!(
                                "Two different {} resources share the id '{id}'; references to it are ambiguous.",
                                e.resource_type
                            ),
                        )],
                    });
                }
                by_id.insert((e.resource_type, id), k);
            }
        }
        for k in drop.into_iter().rev() {
            let e = entries.remove(k);
            self.ignore(&e, "exact duplicate of an earlier entry; the earlier one was read");
        }
        Ok(())
    }

    fn patient(&mut self, e: &Entry<'_>) -> Result<PatientFacts, RequestError> {
        let errors = self.profiles.check(Kind::Patient, e.resource);
        if !errors.is_empty() {
            return Err(RequestError::from_profile(422, &self.at(e.index), &errors));
        }
        if e.resource.get("modifierExtension").is_some() {
            return Err(whole(
                422,
                IssueCode::NotSupported,
                format!("{}.modifierExtension", self.at(e.index)),
                "The Patient carries a modifierExtension this service does not understand; FHIR forbids processing it as if the extension were absent.",
            ));
        }
        let gender = match str_at(e.resource, "gender") {
            Some("male") => Gender::Male,
            Some("female") => Gender::Female,
            Some("other") => Gender::Other,
            _ => Gender::Unknown,
        };
        let birth_date = match str_at(e.resource, "birthDate").map(datetime::parse_date) {
            None => None,
            Some(Ok(d)) => Some(d),
            Some(Err(err)) => {
                self.aside(e, ".birthDate", format!("birth date not used: {err}"));
                None
            }
        };
        // The birth time, from the standard patient-birthTime extension on birthDate.
        let birth_time = e
            .resource
            .get("_birthDate")
            .and_then(|b| b.get("extension"))
            .and_then(Value::as_array)
            .and_then(|x| {
                x.iter().find(|x| str_at(x, "url") == Some("http://hl7.org/fhir/StructureDefinition/patient-birthTime"))
            })
            .and_then(|x| str_at(x, "valueDateTime"));
        let birth_instant = match birth_time.map(datetime::parse_date_time) {
            None => None,
            Some(Ok(t))
                if t.date_only.is_none() && birth_date.is_some_and(|d| d.earliest() == t.when.local_date_earliest) =>
            {
                Some(t.when.earliest)
            }
            Some(_) => {
                self.aside(
                    e,
                    "._birthDate.extension",
                    "birth time not used: not a dateTime with a time on the birth date",
                );
                None
            }
        };
        Ok(PatientFacts { birth_date, birth_instant, gender, source: self.source(e, "") })
    }

    /// True when `subject` is the bundle's patient; otherwise sets the resource aside.
    fn subject_ok(&mut self, e: &Entry<'_>, index: &Index<'_>, patient: &Entry<'_>) -> bool {
        let Some(subject) = e.resource.get("subject") else {
            self.aside(e, ".subject", "no subject: the result cannot be tied to this patient");
            return false;
        };
        if let Some(reference) = str_at(subject, "reference") {
            if let Some(local) = reference.strip_prefix('#') {
                let contained = e
                    .resource
                    .get("contained")
                    .and_then(Value::as_array)
                    .and_then(|c| c.iter().find(|r| str_at(r, "id") == Some(local)));
                return match contained {
                    Some(c) if str_at(c, "resourceType") == Some("Patient") && same_identifier(c, patient.resource) => {
                        true
                    }
                    Some(_) => {
                        self.aside(e, ".subject", "subject is a contained Patient that does not share an identifier with the bundle's Patient");
                        false
                    }
                    None => {
                        self.aside(
                            e,
                            ".subject.reference",
                            format!("contained reference '{reference}' does not resolve"),
                        );
                        false
                    }
                };
            }
            return match index.resolve(reference, e.full_url) {
                Some(i) if i == patient.index => true,
                Some(_) => {
                    self.aside(e, ".subject.reference", "subject is not the bundle's Patient");
                    false
                }
                None => {
                    self.aside(e, ".subject.reference", "subject refers to a patient that is not in the bundle (another patient, or an unresolvable reference)");
                    false
                }
            };
        }
        if let Some(identifier) = subject.get("identifier") {
            let wrapped = serde_json::json!({ "identifier": [identifier] });
            if same_identifier(&wrapped, patient.resource) {
                return true;
            }
            self.aside(e, ".subject.identifier", "subject identifier is not an identifier of the bundle's Patient");
            return false;
        }
        self.aside(e, ".subject", "subject has neither a reference nor an identifier");
        false
    }

    fn common_checks(&mut self, e: &Entry<'_>, kind: Kind) -> bool {
        let errors = self.profiles.check(kind, e.resource);
        if !errors.is_empty() {
            let path = errors.first().map(|er| er.path.clone()).unwrap_or_default();
            let msgs: Vec<String> =
                errors.iter().map(|er| format!("{}{}: {}", self.at(e.index), er.path, er.message)).collect();
            self.aside(e, &path, format!("does not match the {} profile: {}", e.resource_type, msgs.join("; ")));
            return false;
        }
        if e.resource.get("modifierExtension").is_some() {
            self.aside(e, ".modifierExtension", "carries a modifierExtension this service does not understand; FHIR forbids processing it as if the extension were absent");
            return false;
        }
        true
    }

    #[allow(clippy::too_many_arguments, reason = "the bundle walk's accumulators, one per kind of fact")]
    fn observation(
        &mut self,
        e: &Entry<'_>,
        index: &Index<'_>,
        patient: &Entry<'_>,
        entries: &[Entry<'_>],
        measurements: &mut Vec<Measurement>,
        symptoms: &mut Vec<SymptomFinding>,
        specimen: &mut Vec<SpecimenFinding>,
    ) {
        if !self.common_checks(e, Kind::Observation) {
            return;
        }
        let r = e.resource;
        let status = match str_at(r, "status") {
            Some("final" | "amended" | "corrected") => ResultStatus::Final,
            Some("preliminary") => ResultStatus::Preliminary,
            Some(other) => {
                self.aside(e, ".status", format!("status '{other}': not a usable result"));
                return;
            }
            None => {
                self.aside(e, ".status", "no status");
                return;
            }
        };
        // Codes first: what is not ours is ignored, not judged.
        let lab = self.lab_code(r.get("code"));
        let symptom = self.symptom_code(r.get("code")).or_else(|| self.symptom_code(r.get("valueCodeableConcept")));
        let components = r.get("component").and_then(Value::as_array).map(Vec::as_slice).unwrap_or_default();
        let component_codes: Vec<(usize, &ObservationCode)> = components
            .iter()
            .enumerate()
            .filter_map(|(k, c)| self.lab_code(c.get("code")).map(|code| (k, code)))
            .collect();
        if lab.is_none() && symptom.is_none() && component_codes.is_empty() {
            self.unclassified_observation(e, index, patient);
            return;
        }
        if !self.subject_ok(e, index, patient) {
            return;
        }
        let Some((when, when_text)) = self.effective(e) else { return };
        if let Some(s) = symptom {
            if r.get("valueBoolean") == Some(&Value::Bool(false)) {
                self.ignore(e, format!("{} recorded as absent", s.symptom.label()));
            } else {
                symptoms.push(SymptomFinding {
                    symptom: s.symptom,
                    when: Some(when),
                    when_text: Some(when_text.clone()),
                    code: Code { system: s.system.clone(), code: s.code.clone(), display: s.display.clone() },
                    source: self.source(e, ""),
                });
            }
            return;
        }
        let mut found = Vec::new();
        if let Some(code) = lab
            && let Some(m) = self.quantity(e, "", r, code, status, when, &when_text)
        {
            found.push(m);
        }
        for (k, code) in component_codes {
            let Some(comp) = components.get(k) else { continue };
            if let Some(m) = self.quantity(e, &format!(".component[{k}]"), comp, code, status, when, &when_text) {
                found.push(m);
            }
        }
        if found.is_empty() {
            return;
        }
        // The specimen check: Specimen.condition, the result's own flags, notes.
        let flags = self.specimen_flags(e, index, entries, patient);
        for m in found {
            if self.specimen_check(e, &m, &flags, specimen) {
                measurements.push(m);
            }
        }
    }

    #[allow(clippy::too_many_arguments, reason = "one call site per value holder; a struct would only rename them")]
    fn quantity(
        &mut self,
        e: &Entry<'_>,
        at: &str,
        holder: &Value,
        code: &ObservationCode,
        status: ResultStatus,
        when: When,
        when_text: &str,
    ) -> Option<Measurement> {
        let label = code.display.clone();
        if let Some(dar) = holder.get("dataAbsentReason") {
            self.aside(
                e,
                &format!("{at}.dataAbsentReason"),
                format!("{label}: no value (dataAbsentReason {})", describe_codes(Some(dar))),
            );
            return None;
        }
        let Some(q) = holder.get("valueQuantity") else {
            let other = holder.as_object().and_then(|o| o.keys().find(|k| k.starts_with("value")).cloned());
            match other {
                Some(k) => self.aside(e, &format!("{at}.{k}"), format!("{label}: value is {k}, not a Quantity")),
                None => self.aside(e, &format!("{at}.value[x]"), format!("{label}: no value")),
            }
            return None;
        };
        let qpath = format!("{at}.valueQuantity");
        if let Some(c) = str_at(q, "comparator") {
            self.aside(
                e,
                &format!("{qpath}.comparator"),
                format!("{label}: value has comparator '{c}'; a censored value is not used as a number"),
            );
            return None;
        }
        let Some(value) = q.get("value").and_then(Value::as_f64) else {
            self.aside(e, &format!("{qpath}.value"), format!("{label}: quantity has no value"));
            return None;
        };
        match (str_at(q, "system"), str_at(q, "code")) {
            (Some(UCUM), Some(_)) => {}
            (Some(other), _) if other != UCUM => {
                self.aside(
                    e,
                    &format!("{qpath}.system"),
                    format!("{label}: unit system '{other}' is not UCUM ({UCUM})"),
                );
                return None;
            }
            (_, None) => {
                let shown =
                    str_at(q, "unit").map(|u| format!(" (unit text '{u}' alone is not trusted)")).unwrap_or_default();
                self.aside(e, &format!("{qpath}.code"), format!("{label}: no UCUM unit code{shown}"));
                return None;
            }
            (None, Some(_)) => {
                self.aside(
                    e,
                    &format!("{qpath}.system"),
                    format!("{label}: unit has a code but no system; UCUM ({UCUM}) is required"),
                );
                return None;
            }
            _ => {}
        }
        let unit = str_at(q, "code").unwrap_or_default();
        let Some(rule) = self.rules.analyte(code.analyte) else {
            self.aside(e, at, format!("{label}: the rule set has no analyte entry for {}", code.analyte.key()));
            return None;
        };
        if value < 0.0 {
            self.aside(e, &format!("{qpath}.value"), format!("{label}: negative value"));
            return None;
        }
        let canonical = match units::to_canonical(value, unit, rule) {
            Ok(v) => v,
            Err(err) => {
                self.aside(e, &format!("{qpath}.code"), format!("{label}: {err}"));
                return None;
            }
        };
        if canonical < rule.plausible.min || canonical > rule.plausible.max {
            self.aside(
                e,
                &format!("{qpath}.value"),
                format!(
                    "{label}: {} {unit} (= {} {}) is outside physiological possibility ({}-{} {}; {})",
                    value,
                    num(canonical, 3),
                    rule.canonical_unit,
                    rule.plausible.min,
                    rule.plausible.max,
                    rule.canonical_unit,
                    rule.plausible_source
                ),
            );
            return None;
        }
        // The table's spelling (e.g. `mg/dl` is recorded as `mg/dL`, the same UCUM unit).
        let unit = units::lookup(unit).map_or(unit, |u| u.code);
        Some(Measurement {
            analyte: code.analyte,
            value: canonical,
            unit: rule.canonical_unit.clone(),
            reported_value: value,
            reported_unit: unit.to_owned(),
            when,
            when_text: when_text.to_owned(),
            status,
            code: Code { system: code.system.clone(), code: code.code.clone(), display: code.display.clone() },
            ph_adjusted: code.ph_adjusted,
            source: self.source(e, at),
        })
    }

    fn effective(&mut self, e: &Entry<'_>) -> Option<(When, String)> {
        let r = e.resource;
        let (text, path, span) = if let Some(t) = str_at(r, "effectiveDateTime") {
            (t.to_owned(), ".effectiveDateTime", datetime::parse_date_time(t).map(|d| (d.when, d.date_only)))
        } else if let Some(t) = str_at(r, "effectiveInstant") {
            (t.to_owned(), ".effectiveInstant", datetime::parse_date_time(t).map(|d| (d.when, d.date_only)))
        } else if let Some(period) = r.get("effectivePeriod") {
            let start = str_at(period, "start").map(datetime::parse_date_time);
            let end = str_at(period, "end").map(datetime::parse_date_time);
            let text = format!("{}/{}", str_at(period, "start").unwrap_or(""), str_at(period, "end").unwrap_or(""));
            let span = match (start, end) {
                (Some(Ok(s)), Some(Ok(en))) => Ok((
                    When {
                        earliest: s.when.earliest,
                        latest: en.when.latest,
                        local_date_earliest: s.when.local_date_earliest,
                        local_date_latest: en.when.local_date_latest,
                    },
                    s.date_only.or(en.date_only),
                )),
                (Some(Ok(s)), None) => Ok((s.when, s.date_only)),
                (None, Some(Ok(en))) => Ok((en.when, en.date_only)),
                (Some(Err(err)), _) | (_, Some(Err(err))) => Err(err),
                (None, None) => Err(DateError::Form(String::new())),
            };
            (text, ".effectivePeriod", span)
        } else {
            self.aside(e, ".effective[x]", "no effective time: the result cannot be placed in time");
            return None;
        };
        let (when, date_only) = match span {
            Ok(s) => s,
            Err(err) => {
                self.aside(e, path, format!("effective time not usable: {err}"));
                return None;
            }
        };
        if let Some(d) = date_only
            && !d.is_full()
        {
            self.aside(e, path, format!("effective time '{text}' is too imprecise ({})", d.precision_label()));
            return None;
        }
        let skew = (self.rules.windows.clock_skew_minutes * 60.0).round() as i64;
        if when.earliest > self.now + skew {
            self.aside(
                e,
                path,
                format!(
                    "effective time {text} is in the future (evaluation time {})",
                    datetime::format_instant(self.now)
                ),
            );
            return None;
        }
        Some((when, text))
    }

    fn lab_code(&self, concept: Option<&Value>) -> Option<&'a ObservationCode> {
        codings(concept).find_map(|(system, code)| {
            self.rules.observation_codes.iter().find(|c| c.system == system && c.code == code)
        })
    }

    fn symptom_code(&self, concept: Option<&Value>) -> Option<&'a SymptomCode> {
        codings(concept)
            .find_map(|(system, code)| self.rules.symptom_codes.iter().find(|c| c.system == system && c.code == code))
    }
}

fn codings(concept: Option<&Value>) -> impl Iterator<Item = (&str, &str)> {
    concept
        .and_then(|c| c.get("coding"))
        .and_then(Value::as_array)
        .into_iter()
        .flatten()
        .filter_map(|c| Some((str_at(c, "system")?, str_at(c, "code")?)))
}

fn first_code(concept: Option<&Value>) -> Option<&str> {
    codings(concept).map(|(_, code)| code).next()
}

fn describe_codes(concept: Option<&Value>) -> String {
    let list: Vec<String> = codings(concept).map(|(s, c)| format!("{s}|{c}")).collect();
    if list.is_empty() {
        concept.and_then(|c| str_at(c, "text")).map_or("(no coding)".to_owned(), |t| format!("(text only: '{t}')"))
    } else {
        list.join(", ")
    }
}

fn same_identifier(a: &Value, b: &Value) -> bool {
    let ids = |v: &Value| -> Vec<(String, String)> {
        v.get("identifier")
            .and_then(Value::as_array)
            .into_iter()
            .flatten()
            .filter_map(|i| Some((str_at(i, "system")?.to_owned(), str_at(i, "value")?.to_owned())))
            .collect()
    };
    let theirs = ids(b);
    ids(a).iter().any(|i| theirs.contains(i))
}

/// `.entry[3]...` -> 3.
fn entry_index(path: &str) -> Option<usize> {
    let rest = path.strip_prefix(".entry[")?;
    rest.split(']').next()?.parse().ok()
}

/// Reference resolution within the bundle.
struct Index<'e> {
    by_url: HashMap<&'e str, usize>,
    by_type_id: HashMap<(&'e str, &'e str), usize>,
}

impl<'e> Index<'e> {
    fn new(entries: &'e [Entry<'e>]) -> Self {
        let mut by_url = HashMap::new();
        let mut by_type_id = HashMap::new();
        for e in entries {
            if let Some(u) = e.full_url {
                by_url.insert(u, e.index);
            }
            if let Some(id) = e.id {
                by_type_id.insert((e.resource_type, id), e.index);
            }
        }
        Self { by_url, by_type_id }
    }

    /// Resolve a literal reference: exact fullUrl, else `Type/id` (also the
    /// trailing `Type/id` of an absolute URL when it shares the referencing
    /// entry's base, as FHIR's bundle resolution rules say).
    fn resolve(&self, reference: &str, from_full_url: Option<&str>) -> Option<usize> {
        if let Some(&i) = self.by_url.get(reference) {
            return Some(i);
        }
        if reference.contains("://") || reference.starts_with("urn:") {
            return None;
        }
        let mut parts = reference.split('/');
        let (Some(t), Some(id)) = (parts.next(), parts.next()) else { return None };
        // A relative reference resolves against the referencing entry's base.
        let base = from_full_url
            .and_then(|u| u.rfind('/').and_then(|k| u.get(..k)))
            .and_then(|b| b.rfind('/').and_then(|k| b.get(..k)));
        if let Some(base) = base
            && base.contains("://")
            && let Some(&i) = self.by_url.get(format!("{base}/{t}/{id}").as_str())
        {
            return Some(i);
        }
        self.by_type_id.get(&(t, id)).copied()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn entry_index_is_read_from_paths() {
        assert_eq!(entry_index(".entry[12].resource"), Some(12));
        assert_eq!(entry_index(".type"), None);
    }
}
