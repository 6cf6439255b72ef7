#!/usr/bin/env python3
"""Validate the example requests against the official FHIR R4 JSON Schema and
against the calcium-cds input profiles.

    pip install jsonschema          # the only dependency besides the stdlib
    python3 fhir-profiles/check_examples.py [FILE ...]

With no FILE, every examples/*.json and the two conformance resources
(CapabilityStatement, OperationDefinition) are checked, then a built-in set of
edge cases confirms that the profiles accept valid-but-unusual FHIR and reject
what FHIR forbids. Prints one line per file (and per edge case) and exits
non-zero on any error.

Checks per file:
  1. official: the whole document against r4/fhir.schema.json (draft-06), via
     the definition for its resourceType (the branch of the top-level oneOf
     that applies, used directly so that error messages are readable).
  2. profile: the document against schemas/<type>.schema.json (draft 2020-12);
     then, recursively, every Bundle.entry.resource, Parameters.parameter.resource
     (and part[].resource) and contained resource against the profile for its
     own resourceType. Resource types we have no profile for are counted as
     "unprofiled" (not an error).
"""

import json
import sys
from pathlib import Path

try:
    from jsonschema import Draft6Validator, Draft202012Validator
except ImportError:  # pragma: no cover
    sys.exit("check_examples.py needs the jsonschema package: pip install jsonschema")

HERE = Path(__file__).resolve().parent
OFFICIAL = HERE / "r4" / "fhir.schema.json"
CONFORMANCE = [HERE / "CapabilityStatement-calcium-cds.json", HERE / "OperationDefinition-assess.json"]
PROFILES = {
    "Bundle": "bundle",
    "Parameters": "parameters",
    "Patient": "patient",
    "Observation": "observation",
    "Condition": "condition",
    "MedicationRequest": "medicationrequest",
    "MedicationStatement": "medicationstatement",
    "MedicationAdministration": "medicationadministration",
    "Medication": "medication",
    "Procedure": "procedure",
    "Specimen": "specimen",
}


def short_path(err):
    return "/".join(str(p) for p in err.absolute_path) or "(root)"


def is_known_gap(rtype, err):
    """The vendored schema's FHIRVersion enum stops at "4.0.0", so the true
    value "4.0.1" (CapabilityStatement.fhirVersion, StructureDefinition.fhirVersion,
    ImplementationGuide.fhirVersion) is rejected. This one error is waived and
    reported; see r4/ORIGIN.md."""
    return (err.validator == "enum" and err.instance == "4.0.1"
            and "fhirVersion" in [str(p) for p in err.absolute_path])


class Checker:
    def __init__(self):
        official = json.loads(OFFICIAL.read_text(encoding="utf-8"))
        Draft6Validator.check_schema(official)
        self.official = official
        self._official_by_type = {}
        self.last_waived = []
        self.profiles = {}
        for rtype, stem in PROFILES.items():
            schema = json.loads((HERE / "schemas" / (stem + ".schema.json")).read_text(encoding="utf-8"))
            Draft202012Validator.check_schema(schema)
            self.profiles[rtype] = Draft202012Validator(schema)

    def official_validator(self, rtype):
        if rtype not in self._official_by_type:
            if rtype not in self.official["discriminator"]["mapping"]:
                return None
            # Same document, root narrowed to one resource type so that errors
            # are specific rather than 150 failed oneOf branches.
            schema = {k: v for k, v in self.official.items() if k not in ("oneOf", "discriminator")}
            schema["allOf"] = [{"$ref": "#/definitions/" + rtype}]
            self._official_by_type[rtype] = Draft6Validator(schema)
        return self._official_by_type[rtype]

    def check_official(self, doc):
        rtype = doc.get("resourceType") if isinstance(doc, dict) else None
        v = self.official_validator(rtype)
        if v is None:
            return ["official: unknown resourceType %r" % (rtype,)]
        errors, self.last_waived = [], []
        for e in sorted(v.iter_errors(doc), key=lambda e: list(map(str, e.absolute_path))):
            msg = "official: %s: %s" % (short_path(e), e.message)
            if is_known_gap(rtype, e):
                self.last_waived.append(msg)
            else:
                errors.append(msg)
        return errors

    def check_profiles(self, resource, where, stats):
        errors = []
        if not isinstance(resource, dict):
            return ["profile: %s: not a JSON object" % where]
        rtype = resource.get("resourceType")
        v = self.profiles.get(rtype)
        if v is None:
            stats["unprofiled"] += 1
        else:
            stats["profiled"] += 1
            for e in v.iter_errors(resource):
                errors.append("profile %s: %s/%s: %s" % (PROFILES[rtype], where, short_path(e), e.message))
        for i, c in enumerate(resource.get("contained") or []):
            errors += self.check_profiles(c, "%s/contained/%d" % (where, i), stats)
        if rtype == "Bundle":
            for i, entry in enumerate(resource.get("entry") or []):
                if isinstance(entry, dict):
                    if "resource" in entry:
                        errors += self.check_profiles(entry["resource"], "%s/entry/%d/resource" % (where, i), stats)
                    outcome = (entry.get("response") or {}).get("outcome")
                    if outcome is not None:
                        errors += self.check_profiles(outcome, "%s/entry/%d/response/outcome" % (where, i), stats)
        if rtype == "Parameters":
            errors += self._parameters(resource.get("parameter") or [], where + "/parameter", stats)
        return errors

    def _parameters(self, params, where, stats):
        errors = []
        for i, p in enumerate(params):
            if not isinstance(p, dict):
                continue
            if "resource" in p:
                errors += self.check_profiles(p["resource"], "%s/%d/resource" % (where, i), stats)
            errors += self._parameters(p.get("part") or [], "%s/%d/part" % (where, i), stats)
        return errors

    def check(self, doc):
        stats = {"profiled": 0, "unprofiled": 0}
        errors = self.check_official(doc) + self.check_profiles(doc, "", stats)
        return errors, stats


# ---------------------------------------------------------------------------
# Edge cases: (label, resource, expected_valid_in_profile). Valid ones are also
# run through the official schema, which must accept them too, unless marked
# with official=False (a known limitation of the official schema).
# ---------------------------------------------------------------------------

def _obs(**kw):
    o = {"resourceType": "Observation", "status": "final",
         "code": {"coding": [{"system": "http://loinc.org", "code": "1994-3"}]}}
    o.update(kw)
    return o


def _pat(**kw):
    p = {"resourceType": "Patient"}
    p.update(kw)
    return p


def _cond(**kw):
    c = {"resourceType": "Condition", "subject": {"reference": "Patient/p1"}}
    c.update(kw)
    return c


PAT_REF = {"reference": "Patient/p1"}
FUROSEMIDE = {"coding": [{"system": "http://www.whocc.no/atc", "code": "C03CA01", "display": "furosemide"}]}


def _mreq(**kw):
    m = {"resourceType": "MedicationRequest", "status": "active", "intent": "order",
         "medicationCodeableConcept": FUROSEMIDE, "subject": PAT_REF}
    m.update(kw)
    return m


def _mstmt(**kw):
    m = {"resourceType": "MedicationStatement", "status": "active",
         "medicationCodeableConcept": FUROSEMIDE, "subject": PAT_REF}
    m.update(kw)
    return m


def _madmin(**kw):
    m = {"resourceType": "MedicationAdministration", "status": "completed",
         "medicationCodeableConcept": FUROSEMIDE, "subject": PAT_REF,
         "effectiveDateTime": "2026-11-29T20:00:00-05:00"}
    m.update(kw)
    return m


def _med(**kw):
    m = {"resourceType": "Medication"}
    m.update(kw)
    return m


def _proc(**kw):
    p = {"resourceType": "Procedure", "status": "completed", "code": {"text": "Thyroidectomy"}, "subject": PAT_REF}
    p.update(kw)
    return p


def _without(res, *keys):
    return {k: v for k, v in res.items() if k not in keys}


def _bundle(btype, entry, **kw):
    b = {"resourceType": "Bundle", "type": btype, "entry": entry}
    b.update(kw)
    return b


UCUM = "http://unitsofmeasure.org"
CLIN = "http://terminology.hl7.org/CodeSystem/condition-clinical"
VER = "http://terminology.hl7.org/CodeSystem/condition-ver-status"
PAT_ENTRY = {"fullUrl": "urn:uuid:2b7c8a7e-4a0e-4f4e-9a51-0c1d1d5b7a10", "resource": {"resourceType": "Patient"}}
EDGE_CASES = [
    # must pass
    ("year-only birthDate", _pat(birthDate="2019"), True, True),
    ("year-month birthDate", _pat(birthDate="2019-03"), True, True),
    ("year-only effectiveDateTime", _obs(effectiveDateTime="2026"), True, True),
    ("dateTime with fractional seconds and Z", _obs(effectiveDateTime="2026-11-30T08:15:00.125Z"), True, True),
    ("dateTime at +14:00", _obs(effectiveDateTime="2026-11-30T08:15:00+14:00"), True, True),
    ("leap second", _obs(issued="2016-12-31T23:59:60Z"), True, True),
    ("comparator <", _obs(valueQuantity={"value": 0.5, "comparator": "<", "unit": "mmol/L", "system": UCUM, "code": "mmol/L"}), True, True),
    ("unit text only (no code)", _obs(valueQuantity={"value": 8.4, "unit": "mg/dl"}), True, True),
    ("integer value", _obs(valueQuantity={"value": 9, "system": UCUM, "code": "mg/dL"}), True, True),
    ("status only as _status", {"resourceType": "Observation", "_status": {"extension": [{"url": "http://example.org/x", "valueString": "?"}]},
                                "code": {"text": "calcium"}}, True, True),
    ("dataAbsentReason without value", _obs(dataAbsentReason={"text": "not done"}), True, True),
    ("component with own value", _obs(component=[{"code": {"text": "a"}, "valueQuantity": {"value": 1}}]), True, True),
    ("modifierExtension with url", _obs(modifierExtension=[{"url": "http://example.org/m", "valueBoolean": True}]), True, True),
    ("unread elements pass through", _obs(note=[{"text": "x"}], referenceRange=[{"text": "1.15-1.35"}]), True, True),
    ("given with null + _given", _pat(name=[{"given": ["Ada", None], "_given": [None, {"extension": [{"url": "http://example.org/g", "valueString": "x"}]}]}]), True, False),
    ("contained-style reference", _obs(subject={"reference": "#p1"}), True, True),
    ("Condition onsetString, no clinicalStatus", _cond(onsetString="this morning"), True, True),
    ("Condition abated and resolved (con-4)", _cond(abatementDateTime="2026-11-29",
        clinicalStatus={"coding": [{"system": CLIN, "code": "resolved"}]}), True, True),
    ("collection Bundle", _bundle("collection", [PAT_ENTRY]), True, True),
    ("transaction entry with request", _bundle("transaction", [dict(PAT_ENTRY, request={"method": "POST", "url": "Patient"})]), True, True),
    ("searchset with total and search.mode", _bundle("searchset", [dict(PAT_ENTRY, search={"mode": "match"})], total=1), True, True),
    ("Parameters with value and with part", {"resourceType": "Parameters", "parameter": [
        {"name": "now", "valueDateTime": "2026-11-30T08:15:00-05:00"},
        {"name": "grp", "part": [{"name": "bundle", "resource": _bundle("collection", [PAT_ENTRY])}]}]}, True, True),
    # medications and procedures: must pass
    ("MedicationRequest minimal", _mreq(), True, True),
    ("MedicationRequest text-only medication", _mreq(medicationCodeableConcept={"text": "furosemide oral solution"}), True, True),
    ("MedicationRequest -> contained Medication", dict(_without(_mreq(), "medicationCodeableConcept"),
        contained=[_med(id="med1", code=FUROSEMIDE, ingredient=[{"itemCodeableConcept": FUROSEMIDE, "isActive": True,
            "strength": {"numerator": {"value": 10, "unit": "mg", "system": UCUM, "code": "mg"},
                         "denominator": {"value": 1, "unit": "mL", "system": UCUM, "code": "mL"}}}])],
        medicationReference={"reference": "#med1"}), True, True),
    ("MedicationRequest status/intent only as _status/_intent", dict(_without(_mreq(), "status", "intent"),
        _status={"extension": [{"url": "http://example.org/x", "valueString": "?"}]},
        _intent={"extension": [{"url": "http://example.org/x", "valueString": "?"}]}), True, True),
    ("MedicationRequest year-only authoredOn", _mreq(authoredOn="2026"), True, True),
    ("MedicationRequest doNotPerform, reportedBoolean", _mreq(doNotPerform=True, reportedBoolean=True), True, True),
    ("MedicationRequest unusual dosageInstruction", _mreq(dosageInstruction=[
        {"sequence": 1, "text": "1 mg/kg IV twice daily", "timing": {"code": {"text": "BID"}, "repeat": {"frequency": 2, "period": 1, "periodUnit": "d"}},
         "asNeededCodeableConcept": {"text": "oedema"},
         "doseAndRate": [{"doseRange": {"low": {"value": 10, "unit": "mg", "system": UCUM, "code": "mg"}},
                          "rateQuantity": {"value": 5, "unit": "mL/h", "system": UCUM, "code": "mL/h"}}],
         "maxDosePerPeriod": {"numerator": {"value": 40, "unit": "mg"}, "denominator": {"value": 1, "unit": "d"}}},
        {"text": "then review"}]), True, True),
    ("MedicationRequest unread elements pass through", _mreq(priority="stat", note=[{"text": "x"}],
        dispenseRequest={"numberOfRepeatsAllowed": 0}, substitution={"allowedBoolean": False}), True, True),
    ("MedicationStatement not-taken, no effective[x]", _mstmt(status="not-taken", statusReason=[{"text": "refused"}]), True, True),
    ("MedicationStatement open effectivePeriod", _mstmt(effectivePeriod={"start": "2026-11-20"},
        dateAsserted="2026-11-30T08:00:00.5+00:00"), True, True),
    ("MedicationStatement medicationReference", dict(_without(_mstmt(), "medicationCodeableConcept"),
        medicationReference={"reference": "Medication/m1"}), True, True),
    ("MedicationAdministration only _effectiveDateTime", dict(_without(_madmin(), "effectiveDateTime"),
        _effectiveDateTime={"extension": [{"url": "http://hl7.org/fhir/StructureDefinition/data-absent-reason", "valueCode": "unknown"}]}), True, True),
    ("MedicationAdministration effectivePeriod, rate only", dict(_without(_madmin(), "effectiveDateTime"),
        effectivePeriod={"start": "2026-11-29T20:00:00-05:00", "end": "2026-11-29T20:30:00-05:00"},
        dosage={"rateRatio": {"numerator": {"value": 2, "unit": "mg"}, "denominator": {"value": 1, "unit": "h"}}}), True, True),
    ("Medication with only resourceType", _med(), True, True),
    ("Medication ingredient by reference", _med(status="active", ingredient=[{"itemReference": {"reference": "Substance/s1"}}]), True, True),
    ("Procedure performedString", _proc(performedString="in infancy"), True, True),
    ("Procedure performedAge in UCUM years", _proc(performedAge={"value": 3, "unit": "years", "system": UCUM, "code": "a"}), True, True),
    ("Procedure performedAge 0 (age-1 XPath >= 0)", _proc(performedAge={"value": 0, "unit": "days", "system": UCUM, "code": "d"}), True, True),
    ("Procedure performedAge unit text only", _proc(performedAge={"unit": "infancy"}), True, True),
    ("Procedure performedRange low only", _proc(performedRange={"low": {"value": 1, "unit": "a", "system": UCUM, "code": "a"}}), True, True),
    ("Procedure not-done, no code, no performed[x]", dict(_without(_proc(), "code"), status="not-done",
        statusReason={"text": "cancelled"}), True, True),
    ("collection Bundle with medication entries", _bundle("collection", [PAT_ENTRY,
        {"fullUrl": "urn:uuid:5e0b7c52-8a53-4d0c-9f0e-3f3c1f6c2a01", "resource": _mreq()},
        {"fullUrl": "urn:uuid:5e0b7c52-8a53-4d0c-9f0e-3f3c1f6c2a02", "resource": _madmin()},
        {"fullUrl": "urn:uuid:5e0b7c52-8a53-4d0c-9f0e-3f3c1f6c2a03", "resource": _proc()}]), True, True),
    # must fail
    ("status not an R4 code", _obs(status="done"), False, False),
    ("no status at all", {"resourceType": "Observation", "code": {"text": "x"}}, False, True),
    ("birthDate with time", _pat(birthDate="2019-03-04T10:00:00Z"), False, False),
    ("dateTime without time zone", _obs(effectiveDateTime="2026-11-30T08:15:00"), False, False),
    ("dateTime without seconds", _obs(effectiveDateTime="2026-11-30T08:15-05:00"), False, False),
    ("instant without time", _obs(issued="2026-11-30"), False, False),
    ("value as string number", _obs(valueQuantity={"value": "1.05"}), False, False),
    ("bad comparator", _obs(valueQuantity={"value": 1, "comparator": "=="}), False, False),
    ("Quantity code without system (qty-3)", _obs(valueQuantity={"value": 1, "code": "mmol/L"}), False, True),
    ("value and dataAbsentReason (obs-6)", _obs(valueString="x", dataAbsentReason={"text": "y"}), False, True),
    ("two value[x]", _obs(valueString="x", valueQuantity={"value": 1}), False, True),
    ("modifierExtension without url", _obs(modifierExtension=[{"valueBoolean": True}]), False, True),
    ("bad id", _obs(id="has space"), False, False),
    ("gender not an R4 code", _pat(gender="F"), False, False),
    ("empty coding array", _obs(code={"coding": []}), False, True),
    ("Condition without subject", {"resourceType": "Condition"}, False, False),
    ("Condition abated but active (con-4)", _cond(abatementDateTime="2026-11-29",
        clinicalStatus={"coding": [{"system": CLIN, "code": "active"}]}), False, True),
    ("Condition entered-in-error with clinicalStatus (con-5)", _cond(
        verificationStatus={"coding": [{"system": VER, "code": "entered-in-error"}]},
        clinicalStatus={"coding": [{"system": CLIN, "code": "active"}]}), False, True),
    ("Bundle type not an R4 code", _bundle("bag", [PAT_ENTRY]), False, False),
    ("transaction entry without request (bdl-3)", _bundle("transaction", [PAT_ENTRY]), False, True),
    ("collection entry with request (bdl-3)", _bundle("collection", [dict(PAT_ENTRY, request={"method": "POST", "url": "Patient"})]), False, True),
    ("search.mode outside a searchset (bdl-2)", _bundle("collection", [dict(PAT_ENTRY, search={"mode": "match"})]), False, True),
    ("total outside searchset/history (bdl-1)", _bundle("collection", [PAT_ENTRY], total=1), False, True),
    ("entry resource without resourceType", _bundle("collection", [{"resource": {"id": "x"}}]), False, False),
    ("parameter with value and resource (inv-1)", {"resourceType": "Parameters", "parameter": [
        {"name": "bundle", "valueString": "x", "resource": _bundle("collection", [PAT_ENTRY])}]}, False, True),
    ("parameter without name", {"resourceType": "Parameters", "parameter": [{"valueString": "x"}]}, False, True),
    # medications and procedures: must fail
    ("MedicationRequest status not an R4 code", _mreq(status="ordered"), False, True),
    ("MedicationRequest intent not an R4 code", _mreq(intent="prescription"), False, True),
    ("MedicationRequest without intent", _without(_mreq(), "intent"), False, True),
    ("MedicationRequest without medication[x]", _without(_mreq(), "medicationCodeableConcept"), False, True),
    ("MedicationRequest two medication[x]", _mreq(medicationReference={"reference": "Medication/m1"}), False, True),
    ("MedicationRequest without subject", _without(_mreq(), "subject"), False, False),
    ("MedicationRequest authoredOn without time zone", _mreq(authoredOn="2026-11-25T09:00:00"), False, False),
    ("MedicationRequest two reported[x]", _mreq(reportedBoolean=True, reportedReference={"reference": "Patient/p1"}), False, True),
    ("MedicationRequest modifierExtension without url", _mreq(modifierExtension=[{"valueBoolean": True}]), False, True),
    ("dose with comparator (sqty-1)", _mreq(dosageInstruction=[{"doseAndRate": [
        {"doseQuantity": {"value": 1, "comparator": "<", "unit": "mg"}}]}]), False, True),
    ("doseAndRate with two dose[x]", _mreq(dosageInstruction=[{"doseAndRate": [
        {"doseQuantity": {"value": 1, "unit": "mg"}, "doseRange": {"low": {"value": 1, "unit": "mg"}}}]}]), False, True),
    ("Dosage with two asNeeded[x]", _mreq(dosageInstruction=[{"asNeededBoolean": True,
        "asNeededCodeableConcept": {"text": "pain"}}]), False, True),
    ("dosageInstruction not an array", _mreq(dosageInstruction={"text": "bd"}), False, False),
    ("MedicationStatement status not an R4 code", _mstmt(status="taking"), False, True),
    ("MedicationStatement two effective[x]", _mstmt(effectiveDateTime="2026-11-20",
        effectivePeriod={"start": "2026-11-20"}), False, True),
    ("MedicationStatement effectiveDateTime without seconds", _mstmt(effectiveDateTime="2026-11-20T08:00-05:00"), False, False),
    ("MedicationStatement dateAsserted without time zone", _mstmt(dateAsserted="2026-11-30T08:00:00"), False, False),
    ("MedicationAdministration without effective[x]", _without(_madmin(), "effectiveDateTime"), False, True),
    ("MedicationAdministration two effective[x]", _madmin(effectivePeriod={"start": "2026-11-29"}), False, True),
    ("MedicationAdministration status not an R4 code", _madmin(status="given"), False, True),
    ("MedicationAdministration dosage without dose or rate (mad-1)", _madmin(dosage={"text": "slowly"}), False, True),
    ("Ratio numerator without denominator (rat-1)", _madmin(dosage={"rateRatio": {"numerator": {"value": 2, "unit": "mg"}}}), False, True),
    ("Medication status not an R4 code", _med(status="available"), False, True),
    ("Medication ingredient without item[x]", _med(ingredient=[{"isActive": True}]), False, True),
    ("Medication ingredient with two item[x]", _med(ingredient=[{"itemCodeableConcept": FUROSEMIDE,
        "itemReference": {"reference": "Substance/s1"}}]), False, True),
    ("Procedure status not an R4 code", _proc(status="done"), False, True),
    ("Procedure without subject", _without(_proc(), "subject"), False, False),
    ("Procedure two performed[x]", _proc(performedString="last year", performedDateTime="2025"), False, True),
    ("Procedure performedAge value without code (age-1)", _proc(performedAge={"value": 3, "unit": "years"}), False, True),
    ("Procedure performedAge not UCUM (age-1)", _proc(performedAge={"value": 3, "system": "http://example.org/units", "code": "yr"}), False, True),
    ("Procedure performedAge negative (age-1)", _proc(performedAge={"value": -1, "system": UCUM, "code": "a"}), False, True),
    ("Procedure performedDateTime with impossible hour", _proc(performedDateTime="2026-11-30T25:00:00Z"), False, False),
    ("Specimen condition clotted, contained", _obs(contained=[{"resourceType": "Specimen", "id": "s1", "status": "available",
        "condition": [{"coding": [{"system": "http://terminology.hl7.org/CodeSystem/v2-0493", "code": "CLOT"}]}]}],
        specimen={"reference": "#s1"}), True, True),
    ("Specimen condition text only, with a note", {"resourceType": "Specimen", "condition": [{"text": "slightly hemolysed"}],
        "note": [{"text": "drawn through a line"}]}, True, True),
    ("Specimen condition as a bare string", {"resourceType": "Specimen", "condition": "CLOT"}, False, False),
    ("Specimen status not a SpecimenStatus code", {"resourceType": "Specimen", "status": "clotted"}, False, False),
    ("nested: Bundle entry MedicationRequest without intent", _bundle("collection", [PAT_ENTRY,
        {"fullUrl": "urn:uuid:5e0b7c52-8a53-4d0c-9f0e-3f3c1f6c2a04", "resource": _without(_mreq(), "intent")}]), False, True),
    ("nested: contained Medication with bad ingredient", dict(_without(_mreq(), "medicationCodeableConcept"),
        contained=[_med(id="med1", ingredient=[{"isActive": True}])], medicationReference={"reference": "#med1"}), False, True),
    ("nested: Parameters -> Bundle -> Procedure, two performed[x]", {"resourceType": "Parameters", "parameter": [
        {"name": "bundle", "resource": _bundle("collection", [PAT_ENTRY,
            {"fullUrl": "urn:uuid:5e0b7c52-8a53-4d0c-9f0e-3f3c1f6c2a05",
             "resource": _proc(performedString="x", performedPeriod={"start": "2020"})}])}]}, False, True),
]


def run_edge_cases(checker):
    failures = 0
    for label, res, profile_ok, official_ok in EDGE_CASES:
        stats = {"profiled": 0, "unprofiled": 0}
        prof_errs = checker.check_profiles(res, "", stats)
        off_errs = checker.check_official(res)
        ok = (not prof_errs) == profile_ok and (not off_errs) == official_ok
        if not ok:
            failures += 1
        print("%s edge case: %-40s profile %s (expected %s), official %s (expected %s)" % (
            "ok  " if ok else "FAIL", label,
            "accepts" if not prof_errs else "rejects", "accept" if profile_ok else "reject",
            "accepts" if not off_errs else "rejects", "accept" if official_ok else "reject"))
        if not ok:
            for e in prof_errs + off_errs:
                print("       " + e)
    return failures


def main(argv):
    checker = Checker()
    files = [Path(a) for a in argv] or (sorted((HERE / "examples").glob("*.json")) + CONFORMANCE)
    failures = 0
    for f in files:
        try:
            doc = json.loads(f.read_text(encoding="utf-8"))
        except (OSError, ValueError) as exc:
            print("FAIL %s: cannot read JSON: %s" % (f.name, exc))
            failures += 1
            continue
        errors, stats = checker.check(doc)
        waived = list(checker.last_waived)
        if isinstance(doc, dict) and not doc.get("id"):
            errors.append("example has no top-level id")
        if errors:
            failures += 1
            print("FAIL %s (%d errors)" % (f.name, len(errors)))
            for e in errors:
                print("       " + e)
        else:
            print("ok   %s: %s valid (official R4 schema + profiles; %d resources profiled, %d unprofiled)%s" % (
                f.name, doc.get("resourceType"), stats["profiled"], stats["unprofiled"],
                "; waived known schema gap: " + "; ".join(waived) if waived else ""))
    if not argv:
        failures += run_edge_cases(checker)
    if failures:
        print("%d failure(s)" % failures)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
