#!/usr/bin/env python3
"""Generate the calcium-cds input profiles (JSON Schema draft 2020-12).

The files in ../schemas/ are produced by this script; edit the script, not the
JSON, then run:

    python3 fhir-profiles/tools/build_schemas.py          # rewrite the schemas
    python3 fhir-profiles/tools/build_schemas.py --check  # fail if they are stale

Every schema is self-contained (its own $defs) so that a validator needs no
cross-file reference resolution. The profiles constrain only the elements the
calcium assessment reads; everything else is left open (additionalProperties
true) because FHIR resources carry many elements we do not read. Closed-world
checking of element names is the job of the official R4 schema in ../r4/.

Standard library only.
"""

import copy
import json
import sys
from pathlib import Path

BASE = "https://calcium-cds.example.org/fhir-profiles/schemas/"
DIALECT = "https://json-schema.org/draft/2020-12/schema"
OUT_DIR = Path(__file__).resolve().parent.parent / "schemas"

# ---------------------------------------------------------------------------
# FHIR R4 primitive types (regexes as published for R4 4.0.1)
# ---------------------------------------------------------------------------

YEAR = r"([0-9]([0-9]([0-9][1-9]|[1-9]0)|[1-9]00)|[1-9]000)"
MONTH = r"(0[1-9]|1[0-2])"
DAY = r"(0[1-9]|[1-2][0-9]|3[0-1])"
TIME = r"([01][0-9]|2[0-3]):[0-5][0-9]:([0-5][0-9]|60)(\.[0-9]+)?"
TZ = r"(Z|(\+|-)((0[0-9]|1[0-3]):[0-5][0-9]|14:00))"

PRIMITIVES = {
    "id": {
        "type": "string",
        "pattern": r"^[A-Za-z0-9\-\.]{1,64}$",
        "description": "FHIR id: 1 to 64 characters drawn from letters, digits, '-' and '.'.",
    },
    "string": {
        "type": "string",
        "minLength": 1,
        "pattern": r"^[ \r\n\t\S]+$",
        "description": "FHIR string: a non-empty sequence of Unicode characters.",
    },
    "code": {
        "type": "string",
        "pattern": r"^[^\s]+(\s[^\s]+)*$",
        "description": "FHIR code: no leading or trailing whitespace, single inner spaces only.",
    },
    "uri": {
        "type": "string",
        "minLength": 1,
        "pattern": r"^\S*$",
        "description": "FHIR uri: a non-empty string without whitespace (absolute URL, URN or relative reference).",
    },
    "canonical": {
        "type": "string",
        "minLength": 1,
        "pattern": r"^\S*$",
        "description": "FHIR canonical: the canonical URL of a conformance resource, optionally with |version.",
    },
    "boolean": {
        "type": "boolean",
        "description": "FHIR boolean: JSON true or false.",
    },
    "decimal": {
        "type": "number",
        "description": "FHIR decimal: a JSON number.",
    },
    "integer": {
        "type": "integer",
        "minimum": -2147483648,
        "maximum": 2147483647,
        "description": "FHIR integer: a whole number from -2^31 to 2^31-1.",
    },
    "unsignedInt": {
        "type": "integer",
        "minimum": 0,
        "maximum": 2147483647,
        "description": "FHIR unsignedInt: a whole number from 0 to 2^31-1.",
    },
    "date": {
        "type": "string",
        "pattern": "^" + YEAR + "(-" + MONTH + "(-" + DAY + ")?)?$",
        "description": "FHIR date: YYYY, YYYY-MM or YYYY-MM-DD, with no time and no time zone.",
    },
    "dateTime": {
        "type": "string",
        "pattern": "^" + YEAR + "(-" + MONTH + "(-" + DAY + "(T" + TIME + TZ + ")?)?)?$",
        "description": "FHIR dateTime: a year, year-month, date, or date and time to the second with a mandatory time-zone offset.",
    },
    "instant": {
        "type": "string",
        "pattern": "^" + YEAR + "-" + MONTH + "-" + DAY + "T" + TIME + TZ + "$",
        "description": "FHIR instant: a full date and time to at least the second, with a time-zone offset.",
    },
    "Element": {
        "type": "object",
        "description": "Primitive-extension companion (the _element form): an optional id and extensions for a primitive value.",
        "properties": {
            "id": {"type": "string", "description": "Element id, unique within the resource."},
            "extension": {
                "type": "array",
                "minItems": 1,
                "items": {"$ref": "#/$defs/Extension"},
                "description": "Extensions on the primitive value.",
            },
        },
        "additionalProperties": True,
    },
}


def ref(name, description):
    return {"$ref": "#/$defs/" + name, "description": description}


def array_of(name, description):
    return {
        "type": "array",
        "minItems": 1,
        "items": {"$ref": "#/$defs/" + name},
        "description": description,
    }


def at_most_one(keys, what):
    """Schema that rejects an object carrying two or more of the given keys
    (a choice element [x] may appear at most once)."""
    return {
        "description": "At most one form of %s may be present." % what,
        "not": {
            "anyOf": [
                {"required": [a, b]}
                for i, a in enumerate(keys)
                for b in keys[i + 1:]
            ]
        },
    }


# ---------------------------------------------------------------------------
# FHIR R4 complex datatypes we read
# ---------------------------------------------------------------------------

DATATYPES = {
    "Extension": {
        "type": "object",
        "title": "Extension",
        "description": "An extension or modifier extension; only its mandatory url is checked.",
        "properties": {
            "url": ref("uri", "Identifies the meaning of the extension."),
        },
        "required": ["url"],
        "additionalProperties": True,
    },
    "Coding": {
        "type": "object",
        "title": "Coding",
        "description": "A code drawn from a code system.",
        "properties": {
            "system": ref("uri", "The code system URI, for example http://loinc.org or http://snomed.info/sct."),
            "version": ref("string", "Version of the code system, when relevant."),
            "code": ref("code", "The symbol defined by the code system."),
            "display": ref("string", "Human-readable text for the code."),
            "userSelected": ref("boolean", "True if a user chose this coding directly."),
        },
        "additionalProperties": True,
    },
    "CodeableConcept": {
        "type": "object",
        "title": "CodeableConcept",
        "description": "A concept given by zero or more codings and/or free text.",
        "properties": {
            "coding": array_of("Coding", "Codings that represent the concept."),
            "text": ref("string", "Plain-text representation of the concept."),
        },
        "additionalProperties": True,
    },
    "Period": {
        "type": "object",
        "title": "Period",
        "description": "A time range bounded by a start and/or an end.",
        "properties": {
            "start": ref("dateTime", "Start of the period, inclusive."),
            "end": ref("dateTime", "End of the period, inclusive; absent means ongoing."),
        },
        "additionalProperties": True,
    },
    "Identifier": {
        "type": "object",
        "title": "Identifier",
        "description": "A business identifier, such as a medical record number.",
        "properties": {
            "use": {
                "enum": ["usual", "official", "temp", "secondary", "old"],
                "description": "Purpose of this identifier (IdentifierUse, required binding).",
            },
            "type": ref("CodeableConcept", "Kind of identifier."),
            "system": ref("uri", "Namespace in which the value is unique."),
            "value": ref("string", "The identifier value."),
            "period": ref("Period", "Time period during which the identifier is or was valid."),
            "assigner": {
                "type": "object",
                "description": "Organization that issued the identifier (a Reference).",
            },
        },
        "additionalProperties": True,
    },
    "Reference": {
        "type": "object",
        "title": "Reference",
        "description": "A reference to another resource: literal (reference), logical (identifier) or both.",
        "properties": {
            "reference": ref("string", "Literal reference: relative (Patient/123), absolute URL, urn:uuid: or #contained."),
            "type": ref("uri", "Type of the target resource, e.g. Patient."),
            "identifier": ref("Identifier", "Logical reference by business identifier."),
            "display": ref("string", "Text alternative for the referenced resource."),
        },
        "additionalProperties": True,
    },
    "Quantity": {
        "type": "object",
        "title": "Quantity",
        "description": "A measured amount. FHIR invariant qty-3: if code is present, system SHALL be present.",
        "properties": {
            "value": ref("decimal", "Numerical value, with implicit precision."),
            "comparator": {
                "enum": ["<", "<=", ">=", ">"],
                "description": "How to understand the value (QuantityComparator, required binding).",
            },
            "unit": ref("string", "Unit as displayed to people."),
            "system": ref("uri", "System that defines the coded unit, e.g. http://unitsofmeasure.org for UCUM."),
            "code": ref("code", "Computable unit code, e.g. the UCUM code mg/dL."),
        },
        "dependentRequired": {"code": ["system"]},
        "additionalProperties": True,
    },
    "HumanName": {
        "type": "object",
        "title": "HumanName",
        "description": "A person's name.",
        "properties": {
            "use": {
                "enum": ["usual", "official", "temp", "nickname", "anonymous", "old", "maiden"],
                "description": "Purpose of this name (NameUse, required binding).",
            },
            "text": ref("string", "The full name as text."),
            "family": ref("string", "Family name (surname)."),
            "given": {
                "type": "array",
                "minItems": 1,
                "items": {"anyOf": [{"$ref": "#/$defs/string"}, {"type": "null"}]},
                "description": "Given names in order; null entries are allowed where _given carries extensions.",
            },
            "period": ref("Period", "Time period when the name was or is in use."),
        },
        "additionalProperties": True,
    },
    "Meta": {
        "type": "object",
        "title": "Meta",
        "description": "Resource metadata maintained by the sending system.",
        "properties": {
            "versionId": ref("id", "Version-specific identifier."),
            "lastUpdated": ref("instant", "When the resource version last changed."),
            "source": ref("uri", "Identifies where the resource comes from."),
            "profile": {
                "type": "array",
                "minItems": 1,
                "items": {"anyOf": [{"$ref": "#/$defs/canonical"}, {"type": "null"}]},
                "description": "Profiles the resource claims to conform to.",
            },
            "security": array_of("Coding", "Security labels applied to the resource."),
            "tag": array_of("Coding", "Tags applied to the resource."),
        },
        "additionalProperties": True,
    },
    "SimpleQuantity": {
        "$ref": "#/$defs/Quantity",
        "title": "SimpleQuantity",
        "description": "A Quantity without a comparator (sqty-1), as used for doses and range limits.",
        "not": {"required": ["comparator"]},
    },
    "Age": {
        "type": "object",
        "title": "Age",
        "description": "A Quantity giving a duration of life. age-1: a value needs a code; a system, if present, is UCUM; "
                       "the value is not negative (the R4 FHIRPath says > 0, the R4 XPath says >= 0; the looser form is used).",
        "properties": {
            "value": {"$ref": "#/$defs/decimal", "minimum": 0, "description": "Numerical value, with implicit precision; not negative."},
            "comparator": {
                "enum": ["<", "<=", ">=", ">"],
                "description": "How to understand the value (QuantityComparator, required binding).",
            },
            "unit": ref("string", "Unit as displayed to people."),
            "system": {"$ref": "#/$defs/uri", "const": "http://unitsofmeasure.org", "description": "If present, UCUM."},
            "code": ref("code", "UCUM time unit, e.g. a, mo, wk, d."),
        },
        "dependentRequired": {"code": ["system"], "value": ["code"]},
        "additionalProperties": True,
    },
    "Range": {
        "type": "object",
        "title": "Range",
        "description": "A range of quantities. rng-2 (low <= high) cannot be expressed in JSON Schema and is not checked.",
        "properties": {
            "low": ref("SimpleQuantity", "Low limit, inclusive."),
            "high": ref("SimpleQuantity", "High limit, inclusive."),
        },
        "additionalProperties": True,
    },
    "Ratio": {
        "type": "object",
        "title": "Ratio",
        "description": "A ratio of two quantities. rat-1: numerator and denominator are both present or both absent.",
        "properties": {
            "numerator": ref("Quantity", "Numerator value."),
            "denominator": ref("Quantity", "Denominator value."),
        },
        "dependentRequired": {"numerator": ["denominator"], "denominator": ["numerator"]},
        "additionalProperties": True,
    },
    "Timing": {
        "type": "object",
        "title": "Timing",
        "description": "When an event is to occur; read loosely (only event times are typed).",
        "properties": {
            "event": {
                "type": "array",
                "minItems": 1,
                "items": {"anyOf": [{"$ref": "#/$defs/dateTime"}, {"type": "null"}]},
                "description": "Times the event occurs; null entries are allowed where _event carries extensions.",
            },
            "repeat": {"type": "object", "description": "Repetition rules (not read)."},
            "code": ref("CodeableConcept", "Code for a common timing, e.g. BID."),
        },
        "additionalProperties": True,
    },
    "Dosage": {
        "type": "object",
        "title": "Dosage",
        "description": "How a medication is or was to be taken; read loosely (text, route, timing, dose and rate).",
        "properties": {
            "modifierExtension": array_of("Extension", "Extensions that change the meaning of the dosage."),
            "sequence": ref("integer", "Order of this instruction among several."),
            "text": ref("string", "Free-text dosage instructions."),
            "timing": ref("Timing", "When the medication should be given."),
            "asNeededBoolean": ref("boolean", "Take as needed."),
            "asNeededCodeableConcept": ref("CodeableConcept", "Take as needed, for the given reason."),
            "route": ref("CodeableConcept", "How the drug enters the body."),
            "doseAndRate": {
                "type": "array",
                "minItems": 1,
                "items": {"$ref": "#/$defs/DosageDoseAndRate"},
                "description": "Amount of medication per dose and/or per unit of time.",
            },
            "maxDosePerPeriod": ref("Ratio", "Upper limit on medication per unit of time."),
            "maxDosePerAdministration": ref("SimpleQuantity", "Upper limit on medication per administration."),
            "maxDosePerLifetime": ref("SimpleQuantity", "Upper limit on medication per lifetime of the patient."),
        },
        "allOf": [at_most_one(["asNeededBoolean", "asNeededCodeableConcept"], "asNeeded[x]")],
        "additionalProperties": True,
    },
    "DosageDoseAndRate": {
        "type": "object",
        "title": "Dosage.doseAndRate",
        "description": "One dose and/or rate.",
        "properties": {
            "type": ref("CodeableConcept", "Kind of dose or rate, e.g. calculated or ordered."),
            "doseRange": ref("Range", "Amount per dose, as a range."),
            "doseQuantity": ref("SimpleQuantity", "Amount per dose."),
            "rateRatio": ref("Ratio", "Amount per unit of time, as a ratio."),
            "rateRange": ref("Range", "Amount per unit of time, as a range."),
            "rateQuantity": ref("SimpleQuantity", "Amount per unit of time."),
        },
        "allOf": [
            at_most_one(["doseRange", "doseQuantity"], "dose[x]"),
            at_most_one(["rateRatio", "rateRange", "rateQuantity"], "rate[x]"),
        ],
        "additionalProperties": True,
    },
}

# Datatypes each schema needs (dependencies are closed over automatically).
DEPENDS = {
    "Element": ["Extension"],
    "Extension": ["uri"],
    "Coding": ["uri", "string", "code", "boolean"],
    "CodeableConcept": ["Coding", "string"],
    "Period": ["dateTime"],
    "Identifier": ["CodeableConcept", "uri", "string", "Period"],
    "Reference": ["string", "uri", "Identifier"],
    "Quantity": ["decimal", "string", "uri", "code"],
    "HumanName": ["string", "Period"],
    "Meta": ["id", "instant", "uri", "canonical", "Coding"],
    "SimpleQuantity": ["Quantity"],
    "Age": ["decimal", "string", "uri", "code"],
    "Range": ["SimpleQuantity"],
    "Ratio": ["Quantity"],
    "Timing": ["dateTime", "CodeableConcept"],
    "Dosage": ["Extension", "integer", "string", "Timing", "boolean", "CodeableConcept",
               "DosageDoseAndRate", "Ratio", "SimpleQuantity"],
    "DosageDoseAndRate": ["CodeableConcept", "Range", "SimpleQuantity", "Ratio"],
}


def defs_for(names):
    wanted, todo = set(), list(names)
    while todo:
        n = todo.pop()
        if n in wanted:
            continue
        wanted.add(n)
        todo.extend(DEPENDS.get(n, []))
    out = {}
    for n in sorted(wanted, key=lambda x: (x not in PRIMITIVES, x)):
        out[n] = copy.deepcopy(PRIMITIVES.get(n) or DATATYPES[n])
    return out


def choice_keys(prefix, types):
    return [prefix + t for t in types]


def present_any(keys):
    return {"anyOf": [{"required": [k]} for k in keys]}


def required_primitive(name):
    """A 1..1 primitive may be sent as its value, or (without a value) as the
    _name companion carrying extensions only; either satisfies FHIR."""
    return {
        "description": "%s is mandatory (1..1): either %s or _%s must be present." % (name, name, name),
        "anyOf": [{"required": [name]}, {"required": ["_" + name]}],
    }


def resource_common(rtype):
    return {
        "resourceType": {"const": rtype, "description": "Always '%s'." % rtype},
        "id": ref("id", "Logical id of the resource."),
        "meta": ref("Meta", "Resource metadata."),
        "implicitRules": ref("uri", "Rules the content was built under; a receiver that does not understand them should not process the resource."),
        "language": ref("code", "Base language of the resource."),
        "modifierExtension": array_of("Extension", "Extensions that change the meaning of the resource; each needs a url."),
    }


def document(name, title, description, props, required, all_of=None, extra_defs=(), own_defs=None):
    schema = {
        "$schema": DIALECT,
        "$id": BASE + name + ".schema.json",
        "title": title,
        "description": description,
        "type": "object",
        "properties": props,
        "required": required,
        "additionalProperties": True,
    }
    if all_of:
        schema["allOf"] = all_of
    used = set()

    def walk(node):
        if isinstance(node, dict):
            r = node.get("$ref")
            if isinstance(r, str) and r.startswith("#/$defs/"):
                used.add(r[len("#/$defs/"):])
            for v in node.values():
                walk(v)
        elif isinstance(node, list):
            for v in node:
                walk(v)

    walk(schema)
    if own_defs:
        walk(own_defs)
    used |= set(extra_defs)
    used -= set(own_defs or {})
    defs = defs_for(used)
    if own_defs:
        defs.update(own_defs)
    schema["$defs"] = defs
    return schema


# ---------------------------------------------------------------------------
# Observation
# ---------------------------------------------------------------------------

OBS_VALUE_TYPES = ["Quantity", "CodeableConcept", "String", "Boolean", "Integer",
                   "Range", "Ratio", "SampledData", "Time", "DateTime", "Period"]
OBS_PRIMITIVE_VALUES = ["String", "Boolean", "Integer", "Time", "DateTime"]
OBS_VALUE_KEYS = choice_keys("value", OBS_VALUE_TYPES)
OBS_VALUE_ANY = OBS_VALUE_KEYS + ["_value" + t for t in OBS_PRIMITIVE_VALUES]


def value_props():
    return {
        "valueQuantity": ref("Quantity", "Result as a quantity (the usual form for a laboratory value)."),
        "valueCodeableConcept": ref("CodeableConcept", "Result as a coded concept."),
        "valueString": ref("string", "Result as text."),
    }


def observation():
    props = resource_common("Observation")
    props.update({
        "status": {
            "enum": ["registered", "preliminary", "final", "amended", "corrected",
                     "cancelled", "entered-in-error", "unknown"],
            "description": "Result status (ObservationStatus, required binding). The assessment uses final, amended and corrected results.",
        },
        "_status": ref("Element", "Extensions on status."),
        "category": array_of("CodeableConcept", "Classification of the observation, e.g. laboratory or vital-signs."),
        "code": ref("CodeableConcept", "What was measured, typically a LOINC code."),
        "subject": ref("Reference", "The patient the result is about."),
        "effectiveDateTime": ref("dateTime", "Clinically relevant time of the result (usually specimen collection)."),
        "effectivePeriod": ref("Period", "Clinically relevant period of the result."),
        "effectiveInstant": ref("instant", "Clinically relevant instant of the result."),
        "issued": ref("instant", "When this version of the result was made available."),
        "dataAbsentReason": ref("CodeableConcept", "Why the value is missing; SHALL only be present when value[x] is absent (obs-6)."),
        "interpretation": array_of("CodeableConcept", "High, low, normal and similar flags from the sender."),
        "specimen": ref("Reference", "Specimen used for the result."),
        "derivedFrom": array_of("Reference", "Results this observation was derived from."),
        "component": {
            "type": "array",
            "minItems": 1,
            "items": {"$ref": "#/$defs/ObservationComponent"},
            "description": "Component results, each with its own code and value.",
        },
    })
    props.update(value_props())
    own = {
        "ObservationComponent": {
            "type": "object",
            "title": "Observation.component",
            "description": "A component result sharing the parent's subject, time and status.",
            "properties": {
                "modifierExtension": array_of("Extension", "Extensions that change the meaning of the component."),
                "code": ref("CodeableConcept", "What the component measures."),
                "dataAbsentReason": ref("CodeableConcept", "Why the component value is missing."),
                "interpretation": array_of("CodeableConcept", "Flags for the component value."),
                **value_props(),
            },
            "required": ["code"],
            "allOf": [at_most_one(OBS_VALUE_KEYS, "component.value[x]")],
            "additionalProperties": True,
        }
    }
    all_of = [
        required_primitive("status"),
        at_most_one(OBS_VALUE_KEYS, "value[x]"),
        at_most_one(choice_keys("effective", ["DateTime", "Period", "Timing", "Instant"]), "effective[x]"),
        {
            "description": "obs-6: dataAbsentReason SHALL only be present if value[x] is not present.",
            "if": {"required": ["dataAbsentReason"]},
            "then": {"not": present_any(OBS_VALUE_ANY)},
        },
    ]
    return document(
        "observation", "calcium-cds Observation input profile",
        "FHIR R4 Observation as read by the calcium assessment (laboratory results such as calcium, albumin, "
        "magnesium, phosphate and PTH, plus weight, height and QTc). Only the elements the assessment reads are "
        "constrained; all other R4 elements are allowed.",
        props, ["resourceType", "code"], all_of, own_defs=own)


# ---------------------------------------------------------------------------
# Patient
# ---------------------------------------------------------------------------

def patient():
    props = resource_common("Patient")
    props.update({
        "identifier": array_of("Identifier", "Business identifiers such as the medical record number."),
        "active": ref("boolean", "Whether the patient record is in active use."),
        "name": array_of("HumanName", "Names of the patient."),
        "gender": {
            "enum": ["male", "female", "other", "unknown"],
            "description": "Administrative gender (AdministrativeGender, required binding).",
        },
        "birthDate": ref("date", "Date of birth: YYYY, YYYY-MM or YYYY-MM-DD. Age-specific reference ranges need the full date."),
        "_birthDate": ref("Element", "Extensions on birthDate, e.g. a birth time."),
        "deceasedBoolean": ref("boolean", "Whether the patient is deceased."),
        "deceasedDateTime": ref("dateTime", "When the patient died."),
    })
    all_of = [at_most_one(["deceasedBoolean", "deceasedDateTime"], "deceased[x]")]
    return document(
        "patient", "calcium-cds Patient input profile",
        "FHIR R4 Patient as read by the calcium assessment: identity, sex and date of birth (for age-specific "
        "ranges). All other R4 elements are allowed.",
        props, ["resourceType"], all_of)


# ---------------------------------------------------------------------------
# Condition
# ---------------------------------------------------------------------------

CLINICAL = "http://terminology.hl7.org/CodeSystem/condition-clinical"
VERIFICATION = "http://terminology.hl7.org/CodeSystem/condition-ver-status"
ONSET_TYPES = ["DateTime", "Age", "Period", "Range", "String"]


def coding_in(system, codes):
    return {
        "required": ["coding"],
        "properties": {
            "coding": {
                "contains": {
                    "required": ["system", "code"],
                    "properties": {"system": {"const": system}, "code": {"enum": codes}},
                }
            }
        },
    }


def condition():
    props = resource_common("Condition")
    props.update({
        "clinicalStatus": ref("CodeableConcept", "active | recurrence | relapse | inactive | remission | resolved (condition-clinical)."),
        "verificationStatus": ref("CodeableConcept", "unconfirmed | provisional | differential | confirmed | refuted | entered-in-error (condition-ver-status)."),
        "category": array_of("CodeableConcept", "problem-list-item or encounter-diagnosis."),
        "code": ref("CodeableConcept", "The condition, e.g. SNOMED CT 91175000 Seizure."),
        "subject": ref("Reference", "The patient who has the condition."),
        "onsetDateTime": ref("dateTime", "When the condition began."),
        "abatementDateTime": ref("dateTime", "When the condition resolved."),
        "recordedDate": ref("dateTime", "When the condition was first recorded."),
    })
    abatement_keys = choice_keys("abatement", ONSET_TYPES)
    all_of = [
        at_most_one(choice_keys("onset", ONSET_TYPES), "onset[x]"),
        at_most_one(abatement_keys, "abatement[x]"),
        {
            "description": "con-4: if the condition has abated, clinicalStatus must be inactive, resolved or remission.",
            "if": present_any(abatement_keys + ["_abatementDateTime", "_abatementString"]),
            "then": {
                "required": ["clinicalStatus"],
                "properties": {"clinicalStatus": coding_in(CLINICAL, ["inactive", "resolved", "remission"])},
            },
        },
        {
            "description": "con-5: clinicalStatus SHALL NOT be present if verificationStatus is entered-in-error.",
            "if": {
                "required": ["verificationStatus"],
                "properties": {"verificationStatus": coding_in(VERIFICATION, ["entered-in-error"])},
            },
            "then": {"not": {"required": ["clinicalStatus"]}},
        },
    ]
    return document(
        "condition", "calcium-cds Condition input profile",
        "FHIR R4 Condition as read by the calcium assessment (symptoms such as seizure or cardiac arrhythmia). "
        "All other R4 elements are allowed.",
        props, ["resourceType", "subject"], all_of)


# ---------------------------------------------------------------------------
# Medications: MedicationRequest, MedicationStatement, MedicationAdministration,
# Medication
# ---------------------------------------------------------------------------

MEDICATION_KEYS = choice_keys("medication", ["CodeableConcept", "Reference"])


def medication_props():
    return {
        "medicationCodeableConcept": ref("CodeableConcept", "The medication as a code, e.g. WHO ATC or RxNorm, and/or text."),
        "medicationReference": ref("Reference", "The medication as a reference to a Medication resource (often #contained)."),
    }


def exactly_one(keys, what):
    """A 1..1 choice element of complex types: one form present, and only one."""
    return {
        "description": "%s is mandatory (1..1): exactly one form must be present." % what,
        "allOf": [present_any(keys), at_most_one(keys, what)],
    }


def medication_request():
    props = resource_common("MedicationRequest")
    props.update({
        "status": {
            "enum": ["active", "on-hold", "cancelled", "completed", "entered-in-error", "stopped", "draft", "unknown"],
            "description": "State of the order (medicationrequest-status, required binding).",
        },
        "_status": ref("Element", "Extensions on status."),
        "statusReason": ref("CodeableConcept", "Reason for the current status."),
        "intent": {
            "enum": ["proposal", "plan", "order", "original-order", "reflex-order", "filler-order",
                     "instance-order", "option"],
            "description": "Whether this is a proposal, plan or order (medicationrequest-intent, required binding).",
        },
        "_intent": ref("Element", "Extensions on intent."),
        "category": array_of("CodeableConcept", "Kind of medication order, e.g. inpatient or outpatient."),
        "doNotPerform": ref("boolean", "True if the request is that the medication NOT be given (a modifier)."),
        "reportedBoolean": ref("boolean", "Reported rather than primary record."),
        "reportedReference": ref("Reference", "Who reported the request."),
        **medication_props(),
        "subject": ref("Reference", "The patient the medication is for."),
        "authoredOn": ref("dateTime", "When the request was first written."),
        "_authoredOn": ref("Element", "Extensions on authoredOn."),
        "dosageInstruction": array_of("Dosage", "How the medication is to be used."),
    })
    all_of = [
        required_primitive("status"),
        required_primitive("intent"),
        exactly_one(MEDICATION_KEYS, "medication[x]"),
        at_most_one(choice_keys("reported", ["Boolean", "Reference"]), "reported[x]"),
    ]
    return document(
        "medicationrequest", "calcium-cds MedicationRequest input profile",
        "FHIR R4 MedicationRequest as read by the cause assessment (drugs that lower calcium or magnesium, or treat "
        "hypocalcemia). All other R4 elements are allowed.",
        props, ["resourceType", "subject"], all_of)


def medication_statement():
    props = resource_common("MedicationStatement")
    props.update({
        "status": {
            "enum": ["active", "completed", "entered-in-error", "intended", "stopped", "on-hold", "unknown", "not-taken"],
            "description": "Whether the medication is being taken (medication-statement-status, required binding; not-taken is a modifier).",
        },
        "_status": ref("Element", "Extensions on status."),
        "statusReason": array_of("CodeableConcept", "Reason for the current status."),
        "category": ref("CodeableConcept", "Kind of use, e.g. inpatient, outpatient, community."),
        **medication_props(),
        "subject": ref("Reference", "The patient taking the medication."),
        "effectiveDateTime": ref("dateTime", "When the medication was, is or will be taken."),
        "_effectiveDateTime": ref("Element", "Extensions on effectiveDateTime."),
        "effectivePeriod": ref("Period", "Period over which the medication was, is or will be taken."),
        "dateAsserted": ref("dateTime", "When the statement was asserted."),
        "_dateAsserted": ref("Element", "Extensions on dateAsserted."),
        "dosage": array_of("Dosage", "How the medication is or was taken."),
    })
    all_of = [
        required_primitive("status"),
        exactly_one(MEDICATION_KEYS, "medication[x]"),
        at_most_one(choice_keys("effective", ["DateTime", "Period"]), "effective[x]"),
    ]
    return document(
        "medicationstatement", "calcium-cds MedicationStatement input profile",
        "FHIR R4 MedicationStatement as read by the cause assessment (drugs the patient is or was taking). "
        "All other R4 elements are allowed.",
        props, ["resourceType", "subject"], all_of)


def medication_administration():
    props = resource_common("MedicationAdministration")
    effective_keys = choice_keys("effective", ["DateTime", "Period"])
    props.update({
        "status": {
            "enum": ["in-progress", "not-done", "on-hold", "completed", "entered-in-error", "stopped", "unknown"],
            "description": "State of the administration (medication-admin-status, required binding; not-done is a modifier).",
        },
        "_status": ref("Element", "Extensions on status."),
        "statusReason": array_of("CodeableConcept", "Reason the administration was not performed."),
        "category": ref("CodeableConcept", "Kind of administration, e.g. inpatient or outpatient."),
        **medication_props(),
        "subject": ref("Reference", "The patient who received the medication."),
        "effectiveDateTime": ref("dateTime", "When the medication was given."),
        "_effectiveDateTime": ref("Element", "Extensions on effectiveDateTime."),
        "effectivePeriod": ref("Period", "Period over which the medication was given, e.g. an infusion."),
        "request": ref("Reference", "The MedicationRequest this administration fulfils."),
        "dosage": ref("MedicationAdministrationDosage", "Details of how the medication was given."),
    })
    own = {
        "MedicationAdministrationDosage": {
            "type": "object",
            "title": "MedicationAdministration.dosage",
            "description": "Dose actually given; read loosely. mad-1: SHALL have at least one of dose or rate[x].",
            "properties": {
                "modifierExtension": array_of("Extension", "Extensions that change the meaning of the dosage."),
                "text": ref("string", "Free-text dosage as given."),
                "route": ref("CodeableConcept", "How the drug entered the body."),
                "dose": ref("SimpleQuantity", "Amount given per administration."),
                "rateRatio": ref("Ratio", "Speed of administration, as a ratio."),
                "rateQuantity": ref("SimpleQuantity", "Speed of administration."),
            },
            "allOf": [
                present_any(["dose", "rateRatio", "rateQuantity"]),
                at_most_one(["rateRatio", "rateQuantity"], "rate[x]"),
            ],
            "additionalProperties": True,
        }
    }
    all_of = [
        required_primitive("status"),
        exactly_one(MEDICATION_KEYS, "medication[x]"),
        {
            "description": "effective[x] is mandatory (1..1): effectiveDateTime (or its _effectiveDateTime companion) or effectivePeriod.",
            "anyOf": [{"required": [k]} for k in effective_keys + ["_effectiveDateTime"]],
        },
        at_most_one(effective_keys, "effective[x]"),
    ]
    return document(
        "medicationadministration", "calcium-cds MedicationAdministration input profile",
        "FHIR R4 MedicationAdministration as read by the cause assessment (doses actually given, e.g. a phosphate "
        "enema or a transfusion-related citrate load). All other R4 elements are allowed.",
        props, ["resourceType", "subject"], all_of, own_defs=own)


def medication():
    props = resource_common("Medication")
    props.update({
        "code": ref("CodeableConcept", "The medication, e.g. WHO ATC or RxNorm, and/or text."),
        "status": {
            "enum": ["active", "inactive", "entered-in-error"],
            "description": "Whether the medication record is in use (medication-status, required binding).",
        },
        "form": ref("CodeableConcept", "Dose form, e.g. tablet or solution."),
        "amount": ref("Ratio", "Amount of drug in the package."),
        "ingredient": {
            "type": "array",
            "minItems": 1,
            "items": {"$ref": "#/$defs/MedicationIngredient"},
            "description": "Active or inactive ingredients; read loosely.",
        },
    })
    own = {
        "MedicationIngredient": {
            "type": "object",
            "title": "Medication.ingredient",
            "description": "One ingredient. item[x] is mandatory (1..1).",
            "properties": {
                "modifierExtension": array_of("Extension", "Extensions that change the meaning of the ingredient."),
                "itemCodeableConcept": ref("CodeableConcept", "The ingredient as a code."),
                "itemReference": ref("Reference", "The ingredient as a Substance or Medication."),
                "isActive": ref("boolean", "Whether it is an active ingredient."),
                "strength": ref("Ratio", "Quantity of ingredient per unit of the medication."),
            },
            "allOf": [exactly_one(choice_keys("item", ["CodeableConcept", "Reference"]), "item[x]")],
            "additionalProperties": True,
        }
    }
    return document(
        "medication", "calcium-cds Medication input profile",
        "FHIR R4 Medication, usually contained in or referenced from a MedicationRequest, MedicationStatement or "
        "MedicationAdministration; the cause assessment reads its code and ingredients. All other R4 elements are allowed.",
        props, ["resourceType"], None, own_defs=own)


# ---------------------------------------------------------------------------
# Procedure
# ---------------------------------------------------------------------------

PERFORMED_TYPES = ["DateTime", "Period", "String", "Age", "Range"]


def procedure():
    props = resource_common("Procedure")
    props.update({
        "status": {
            "enum": ["preparation", "in-progress", "not-done", "on-hold", "stopped", "completed",
                     "entered-in-error", "unknown"],
            "description": "State of the procedure (EventStatus, required binding; not-done is a modifier).",
        },
        "_status": ref("Element", "Extensions on status."),
        "statusReason": ref("CodeableConcept", "Reason for the current status."),
        "category": ref("CodeableConcept", "Classification of the procedure."),
        "code": ref("CodeableConcept", "The procedure, e.g. thyroidectomy or parathyroidectomy."),
        "subject": ref("Reference", "The patient the procedure was performed on."),
        "performedDateTime": ref("dateTime", "When the procedure was performed."),
        "_performedDateTime": ref("Element", "Extensions on performedDateTime."),
        "performedPeriod": ref("Period", "Period over which the procedure was performed."),
        "performedString": ref("string", "When the procedure was performed, as text."),
        "_performedString": ref("Element", "Extensions on performedString."),
        "performedAge": ref("Age", "Patient age when the procedure was performed."),
        "performedRange": ref("Range", "Patient age range when the procedure was performed."),
    })
    all_of = [
        required_primitive("status"),
        at_most_one(choice_keys("performed", PERFORMED_TYPES), "performed[x]"),
    ]
    return document(
        "procedure", "calcium-cds Procedure input profile",
        "FHIR R4 Procedure as read by the cause assessment (e.g. neck surgery before post-surgical hypoparathyroidism "
        "or hungry bone). All other R4 elements are allowed.",
        props, ["resourceType", "subject"], all_of)


# ---------------------------------------------------------------------------
# Bundle
# ---------------------------------------------------------------------------

BUNDLE_TYPES = ["document", "message", "transaction", "transaction-response", "batch",
                "batch-response", "history", "searchset", "collection"]


def bundle():
    props = resource_common("Bundle")
    props.update({
        "identifier": ref("Identifier", "Persistent identifier of the bundle."),
        "type": {"enum": BUNDLE_TYPES, "description": "Purpose of the bundle (BundleType, required binding)."},
        "_type": ref("Element", "Extensions on type."),
        "timestamp": ref("instant", "When the bundle was assembled."),
        "total": ref("unsignedInt", "Total number of search matches (searchset and history only, bdl-1)."),
        "link": {
            "type": "array",
            "minItems": 1,
            "items": {
                "type": "object",
                "properties": {
                    "relation": ref("string", "Link relation, e.g. self or next."),
                    "url": ref("uri", "The link target."),
                },
                "additionalProperties": True,
            },
            "description": "Links related to the bundle (paging, self).",
        },
        "entry": {
            "type": "array",
            "minItems": 1,
            "items": {"$ref": "#/$defs/BundleEntry"},
            "description": "Entries, each usually carrying one resource.",
        },
    })
    own = {
        "BundleEntry": {
            "type": "object",
            "title": "Bundle.entry",
            "description": "One entry. bdl-5: an entry carries a resource, a request or a response.",
            "properties": {
                "fullUrl": ref("uri", "Absolute URL or urn:uuid:/urn:oid: identifying the resource, used to resolve references inside the bundle."),
                "resource": {
                    "type": "object",
                    "properties": {
                        "resourceType": {"type": "string", "minLength": 1, "description": "The resource type, e.g. Patient."}
                    },
                    "required": ["resourceType"],
                    "additionalProperties": True,
                    "description": "The resource; validated separately against the profile for its resourceType.",
                },
                "search": {
                    "type": "object",
                    "properties": {
                        "mode": {"enum": ["match", "include", "outcome"], "description": "Why the entry is in a searchset."},
                        "score": ref("decimal", "Search ranking score."),
                    },
                    "additionalProperties": True,
                    "description": "Search information (searchset only, bdl-2).",
                },
                "request": {
                    "type": "object",
                    "properties": {
                        "method": {"enum": ["GET", "HEAD", "POST", "PUT", "DELETE", "PATCH"], "description": "HTTP verb."},
                        "url": ref("uri", "URL for the request, relative to the server base."),
                        "ifNoneMatch": ref("string", "Conditional read header."),
                        "ifModifiedSince": ref("instant", "Conditional read header."),
                        "ifMatch": ref("string", "Conditional update header."),
                        "ifNoneExist": ref("string", "Conditional create query."),
                    },
                    "allOf": [required_primitive("method"), required_primitive("url")],
                    "additionalProperties": True,
                    "description": "Request to perform (batch, transaction and history only, bdl-3).",
                },
                "response": {
                    "type": "object",
                    "properties": {
                        "status": ref("string", "HTTP status line or code."),
                        "location": ref("uri", "Location of the created or updated resource."),
                        "etag": ref("string", "ETag of the resource version."),
                        "lastModified": ref("instant", "Server modification time."),
                        "outcome": {"type": "object", "description": "OperationOutcome for this entry."},
                    },
                    "allOf": [required_primitive("status")],
                    "additionalProperties": True,
                    "description": "Result of a request (batch-response, transaction-response and history only, bdl-4).",
                },
            },
            "anyOf": [{"required": ["resource"]}, {"required": ["request"]}, {"required": ["response"]}],
            "additionalProperties": True,
        }
    }

    def when_type(types, then):
        return {"if": {"required": ["type"], "properties": {"type": {"enum": types}}}, "then": then}

    def entries_all(schema):
        return {"properties": {"entry": {"items": schema}}}

    all_of = [
        required_primitive("type"),
        dict(description="bdl-1: total only in a searchset or history.",
             **{"if": {"required": ["total"]}, "then": {"anyOf": [
                 {"not": {"required": ["type"]}},
                 {"properties": {"type": {"enum": ["searchset", "history"]}}}]}}),
        dict(description="bdl-2: entry.search only in a searchset.",
             **when_type([t for t in BUNDLE_TYPES if t != "searchset"],
                         entries_all({"not": {"required": ["search"]}}))),
        dict(description="bdl-3: entry.request is required in batch, transaction and history bundles.",
             **when_type(["batch", "transaction", "history"], entries_all({"required": ["request"]}))),
        dict(description="bdl-3: entry.request is prohibited in other bundle types.",
             **when_type([t for t in BUNDLE_TYPES if t not in ("batch", "transaction", "history")],
                         entries_all({"not": {"required": ["request"]}}))),
        dict(description="bdl-4: entry.response is required in batch-response, transaction-response and history bundles.",
             **when_type(["batch-response", "transaction-response", "history"], entries_all({"required": ["response"]}))),
        dict(description="bdl-4: entry.response is prohibited in other bundle types.",
             **when_type([t for t in BUNDLE_TYPES if t not in ("batch-response", "transaction-response", "history")],
                         entries_all({"not": {"required": ["response"]}}))),
        dict(description="bdl-9, bdl-10, bdl-11: a document has identifier.system, identifier.value, a timestamp and a Composition first.",
             **when_type(["document"], {
                 "required": ["identifier", "timestamp", "entry"],
                 "properties": {
                     "identifier": {"required": ["system", "value"]},
                     "entry": {"prefixItems": [{"required": ["resource"], "properties": {
                         "resource": {"properties": {"resourceType": {"const": "Composition"}}}}}]},
                 }})),
        dict(description="bdl-12: a message has a MessageHeader first.",
             **when_type(["message"], {
                 "required": ["entry"],
                 "properties": {"entry": {"prefixItems": [{"required": ["resource"], "properties": {
                     "resource": {"properties": {"resourceType": {"const": "MessageHeader"}}}}}]}}})),
    ]
    return document(
        "bundle", "calcium-cds Bundle envelope profile",
        "FHIR R4 Bundle envelope. Checks the Bundle itself and the shape of each entry; each entry.resource is "
        "validated separately against the profile for its resourceType (patient, observation, condition, "
        "medicationrequest, medicationstatement, medicationadministration, medication, procedure).",
        props, ["resourceType"], all_of, own_defs=own)


# ---------------------------------------------------------------------------
# Parameters
# ---------------------------------------------------------------------------

# All R4 types allowed for Parameters.parameter.value[x].
PARAM_VALUE_TYPES = [
    "Base64Binary", "Boolean", "Canonical", "Code", "Date", "DateTime", "Decimal", "Id", "Instant",
    "Integer", "Markdown", "Oid", "PositiveInt", "String", "Time", "UnsignedInt", "Uri", "Url", "Uuid",
    "Address", "Age", "Annotation", "Attachment", "CodeableConcept", "Coding", "ContactPoint", "Count",
    "Distance", "Duration", "HumanName", "Identifier", "Money", "Period", "Quantity", "Range", "Ratio",
    "Reference", "SampledData", "Signature", "Timing", "ContactDetail", "Contributor", "DataRequirement",
    "Expression", "ParameterDefinition", "RelatedArtifact", "TriggerDefinition", "UsageContext", "Dosage",
]
PARAM_PRIMITIVES = PARAM_VALUE_TYPES[:19]


def parameters():
    props = resource_common("Parameters")
    props.update({
        "parameter": {
            "type": "array",
            "minItems": 1,
            "items": {"$ref": "#/$defs/ParametersParameter"},
            "description": "Operation parameters.",
        },
    })
    value_keys = choice_keys("value", PARAM_VALUE_TYPES)
    value_any = value_keys + ["_value" + t for t in PARAM_PRIMITIVES]
    own = {
        "ParametersParameter": {
            "type": "object",
            "title": "Parameters.parameter",
            "description": "One named parameter. inv-1: exactly one of value[x], resource or part.",
            "properties": {
                "name": ref("string", "Parameter name, e.g. bundle or now for $assess."),
                "valueString": ref("string", "A string value."),
                "valueBoolean": ref("boolean", "A boolean value."),
                "valueCode": ref("code", "A code value."),
                "valueUri": ref("uri", "A uri value."),
                "valueDate": ref("date", "A date value."),
                "valueDateTime": ref("dateTime", "A dateTime value, e.g. the evaluation clock for $assess."),
                "valueInstant": ref("instant", "An instant value."),
                "valueDecimal": ref("decimal", "A decimal value."),
                "valueQuantity": ref("Quantity", "A quantity value."),
                "valueCodeableConcept": ref("CodeableConcept", "A coded value."),
                "valueCoding": ref("Coding", "A single coding value."),
                "valueReference": ref("Reference", "A reference value."),
                "valueIdentifier": ref("Identifier", "An identifier value."),
                "valuePeriod": ref("Period", "A period value."),
                "resource": {
                    "type": "object",
                    "properties": {
                        "resourceType": {"type": "string", "minLength": 1, "description": "The resource type, e.g. Bundle."}
                    },
                    "required": ["resourceType"],
                    "additionalProperties": True,
                    "description": "A resource passed as the parameter; validated separately against its own profile.",
                },
                "part": {
                    "type": "array",
                    "minItems": 1,
                    "items": {"$ref": "#/$defs/ParametersParameter"},
                    "description": "Named parts of a multi-part parameter.",
                },
            },
            "allOf": [
                required_primitive("name"),
                {
                    "description": "inv-1: exactly one of value[x], resource or part.",
                    "oneOf": [
                        present_any(value_any),
                        {"required": ["resource"]},
                        {"required": ["part"]},
                    ],
                },
            ],
            "additionalProperties": True,
        }
    }
    return document(
        "parameters", "calcium-cds Parameters input profile",
        "FHIR R4 Parameters, the body form of an operation call such as $assess. Any resource inside a parameter "
        "is validated separately against the profile for its resourceType.",
        props, ["resourceType"], None, own_defs=own)


BUILDERS = {
    "bundle": bundle,
    "parameters": parameters,
    "patient": patient,
    "observation": observation,
    "condition": condition,
    "medicationrequest": medication_request,
    "medicationstatement": medication_statement,
    "medicationadministration": medication_administration,
    "medication": medication,
    "procedure": procedure,
}


def render(schema):
    return json.dumps(schema, indent=2, ensure_ascii=False) + "\n"


def main(argv):
    check = "--check" in argv
    stale = []
    OUT_DIR.mkdir(parents=True, exist_ok=True)
    for name, build in BUILDERS.items():
        path = OUT_DIR / (name + ".schema.json")
        text = render(build())
        if check:
            if not path.exists() or path.read_text(encoding="utf-8") != text:
                stale.append(path.name)
        else:
            path.write_text(text, encoding="utf-8")
            print("wrote", path)
    if stale:
        print("stale (run build_schemas.py):", ", ".join(stale))
        return 1
    if check:
        print("schemas up to date")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
