//! Our input profiles (JSON Schemas in fhir-profiles/schemas), compiled once.
//!
//! They give precise, element-level errors for the resources we read; the
//! official R4 schema is the outer check in the tests (see DEVELOPERS.md).

use jsonschema::Validator;
use serde_json::Value;

/// The profile sources, embedded at build time.
const SOURCES: &[(&str, &str)] = &[
    ("bundle", include_str!("../../../fhir-profiles/schemas/bundle.schema.json")),
    ("parameters", include_str!("../../../fhir-profiles/schemas/parameters.schema.json")),
    ("patient", include_str!("../../../fhir-profiles/schemas/patient.schema.json")),
    ("observation", include_str!("../../../fhir-profiles/schemas/observation.schema.json")),
    ("condition", include_str!("../../../fhir-profiles/schemas/condition.schema.json")),
    ("medicationrequest", include_str!("../../../fhir-profiles/schemas/medicationrequest.schema.json")),
    ("medicationstatement", include_str!("../../../fhir-profiles/schemas/medicationstatement.schema.json")),
    ("medicationadministration", include_str!("../../../fhir-profiles/schemas/medicationadministration.schema.json")),
    ("procedure", include_str!("../../../fhir-profiles/schemas/procedure.schema.json")),
    ("specimen", include_str!("../../../fhir-profiles/schemas/specimen.schema.json")),
];

/// One schema error, located.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ProfileError {
    /// FHIRPath-style path relative to the validated resource, e.g.
    /// `.valueQuantity.code` (empty for the resource itself).
    pub path: String,
    /// What is wrong (instance values masked: no patient data is echoed).
    pub message: String,
}

/// The compiled profiles.
pub struct Profiles {
    bundle: Validator,
    parameters: Validator,
    patient: Validator,
    observation: Validator,
    condition: Validator,
    medication_request: Validator,
    medication_statement: Validator,
    medication_administration: Validator,
    procedure: Validator,
    specimen: Validator,
}

impl std::fmt::Debug for Profiles {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(
            "Profiles(bundle, parameters, patient, observation, condition, medication records, procedure, specimen)",
        )
    }
}

/// The kinds of resource with a profile.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// Bundle envelope.
    Bundle,
    /// Parameters wrapper.
    Parameters,
    /// Patient.
    Patient,
    /// Observation.
    Observation,
    /// Condition.
    Condition,
    /// MedicationRequest.
    MedicationRequest,
    /// MedicationStatement.
    MedicationStatement,
    /// MedicationAdministration.
    MedicationAdministration,
    /// Procedure.
    Procedure,
    /// Specimen (read through the results that refer to it).
    Specimen,
}

impl Profiles {
    /// Compile every profile; an error here is a build defect.
    pub fn compile() -> Result<Self, String> {
        let mut compiled = Vec::new();
        for (name, text) in SOURCES {
            let schema: Value = serde_json::from_str(text).map_err(|e| format!("profile {name}: {e}"))?;
            compiled.push(jsonschema::validator_for(&schema).map_err(|e| format!("profile {name}: {e}"))?);
        }
        let mut it = compiled.into_iter();
        let mut next = || it.next().ok_or_else(|| "profile list shorter than expected".to_owned());
        Ok(Self {
            bundle: next()?,
            parameters: next()?,
            patient: next()?,
            observation: next()?,
            condition: next()?,
            medication_request: next()?,
            medication_statement: next()?,
            medication_administration: next()?,
            procedure: next()?,
            specimen: next()?,
        })
    }

    fn get(&self, kind: Kind) -> &Validator {
        match kind {
            Kind::Bundle => &self.bundle,
            Kind::Parameters => &self.parameters,
            Kind::Patient => &self.patient,
            Kind::Observation => &self.observation,
            Kind::Condition => &self.condition,
            Kind::MedicationRequest => &self.medication_request,
            Kind::MedicationStatement => &self.medication_statement,
            Kind::MedicationAdministration => &self.medication_administration,
            Kind::Procedure => &self.procedure,
            Kind::Specimen => &self.specimen,
        }
    }

    /// Check a resource; the errors, in document order.
    pub fn check(&self, kind: Kind, resource: &Value) -> Vec<ProfileError> {
        let v = self.get(kind);
        if v.is_valid(resource) {
            return Vec::new();
        }
        let mut errors: Vec<ProfileError> = v
            .iter_errors(resource)
            .map(|e| ProfileError { path: pointer_to_fhirpath(e.instance_path().as_str()), message: plain_message(&e) })
            .collect();
        errors.dedup();
        errors
    }
}

/// The validator's message in plain words where it has a dry one; instance
/// values stay masked (no patient data is echoed).
fn plain_message(e: &jsonschema::ValidationError<'_>) -> String {
    match e.kind() {
        jsonschema::error::ValidationErrorKind::MinItems { limit: 1 } => {
            "this list is empty; FHIR does not allow an empty list: leave the element out, or give at least one item"
                .to_owned()
        }
        _ => e.masked_with("the value").to_string(),
    }
}

/// `/entry/3/resource/valueQuantity` -> `.entry[3].resource.valueQuantity`.
pub fn pointer_to_fhirpath(pointer: &str) -> String {
    let mut out = String::new();
    for part in pointer.split('/').skip(1) {
        if !part.is_empty() && part.bytes().all(|b| b.is_ascii_digit()) {
            out.push('[');
            out.push_str(part);
            out.push(']');
        } else {
            out.push('.');
            out.push_str(&part.replace("~1", "/").replace("~0", "~"));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pointers_become_fhirpath() {
        assert_eq!(pointer_to_fhirpath(""), "");
        assert_eq!(pointer_to_fhirpath("/valueQuantity/code"), ".valueQuantity.code");
        assert_eq!(pointer_to_fhirpath("/entry/3/resource"), ".entry[3].resource");
    }

    #[test]
    fn an_empty_list_is_said_in_plain_words() {
        let p = Profiles::compile().unwrap();
        let errors = p.check(Kind::Parameters, &serde_json::json!({ "resourceType": "Parameters", "parameter": [] }));
        assert_eq!(errors.len(), 1, "{errors:?}");
        assert_eq!(errors[0].path, ".parameter");
        assert!(errors[0].message.starts_with("this list is empty"), "{errors:?}");
    }

    #[test]
    fn observation_errors_name_the_element() {
        let p = Profiles::compile().unwrap();
        let obs = serde_json::json!({
            "resourceType": "Observation", "status": "final",
            "code": {"text": "calcium"},
            "valueQuantity": "9.1 mg/dL"
        });
        let errors = p.check(Kind::Observation, &obs);
        assert!(errors.iter().any(|e| e.path == ".valueQuantity"), "{errors:?}");
        assert!(errors.iter().all(|e| !e.message.contains("9.1")), "value echoed: {errors:?}");
    }
}
