#!/usr/bin/env python3
"""Regenerate the example request bundles in ../examples/ (invented hospital and patients).

    python3 fhir-profiles/tools/make_examples.py

All clinical codes come from the confirmed rows of the shared code table. The
evaluation date the examples assume is 2026-11-30.
"""
import json, uuid
from pathlib import Path
OUT = Path(__file__).resolve().parent.parent / 'examples'
MRN_SYS = "https://larkspur-childrens.example.org/fhir/sid/mrn"
BASE = "https://larkspur-childrens.example.org/fhir/"
LOINC, SCT, UCUM = "http://loinc.org", "http://snomed.info/sct", "http://unitsofmeasure.org"
CODES = {
 "ica": ("1994-3", "Calcium.ionized [Moles/volume] in Blood"),
 "tca_mass": ("17861-6", "Calcium [Mass/volume] in Serum or Plasma"),
 "tca_mol": ("2000-8", "Calcium [Moles/volume] in Serum or Plasma"),
 "alb": ("1751-7", "Albumin [Mass/volume] in Serum or Plasma"),
 "wt": ("29463-7", "Body weight"),
 "qtc": ("8636-3", "Q-T interval corrected"),
 "phos": ("2777-1", "Phosphate [Mass/volume] in Serum or Plasma"),
 "mg": ("19123-9", "Magnesium [Mass/volume] in Serum or Plasma"),
 "pth": ("2731-8", "Parathyrin.intact [Mass/volume] in Serum or Plasma"),
 "vitd": ("62292-8", "25-Hydroxyvitamin D2+25-Hydroxyvitamin D3 [Mass/volume] in Serum or Plasma"),
 "alp": ("6768-6", "Alkaline phosphatase [Enzymatic activity/volume] in Serum or Plasma"),
 "creat": ("2160-0", "Creatinine [Mass/volume] in Serum or Plasma"),
 "ht": ("8302-2", "Body height"),
}
TEXT = {"ica": "Ionized calcium (whole blood)", "tca_mass": "Calcium, total", "tca_mol": "Calcium, total",
        "alb": "Albumin", "wt": "Weight", "qtc": "QTc",
        "phos": "Phosphate (as phosphorus)", "mg": "Magnesium", "pth": "Parathyroid hormone, intact",
        "vitd": "25-hydroxyvitamin D, total", "alp": "Alkaline phosphatase", "creat": "Creatinine", "ht": "Height"}
ATC = "http://www.whocc.no/atc"

def u(tag):
    return str(uuid.uuid5(uuid.NAMESPACE_URL, "https://calcium-cds.example.org/examples/" + tag))

def patient(pid, mrn, family, given, gender, birth, extra=None):
    p = {"resourceType": "Patient"}
    if pid: p["id"] = pid
    p.update({
        "identifier": [{"use": "usual", "system": MRN_SYS, "value": mrn}],
        "active": True,
        "name": [{"use": "official", "family": family, "given": given}],
        "gender": gender, "birthDate": birth})
    if extra: p.update(extra)
    return p

def obs(oid, kind, subject_ref, when, issued, value=None, unit=None, status="final", extra=None, quantity=None):
    code, display = CODES[kind]
    o = {"resourceType": "Observation"}
    if oid: o["id"] = oid
    o.update({"status": status,
              "code": {"coding": [{"system": LOINC, "code": code, "display": display}], "text": TEXT[kind]},
              "subject": {"reference": subject_ref},
              "effectiveDateTime": when})
    if issued: o["issued"] = issued
    if quantity is not None:
        o["valueQuantity"] = quantity
    elif value is not None:
        o["valueQuantity"] = {"value": value, "unit": unit, "system": UCUM, "code": unit}
    if extra: o.update(extra)
    return o

def seizure(cid, subject_ref, onset, recorded):
    c = {"resourceType": "Condition"}
    if cid: c["id"] = cid
    c.update({
        "clinicalStatus": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-clinical", "code": "active"}]},
        "verificationStatus": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-ver-status", "code": "confirmed"}]},
        "code": {"coding": [{"system": SCT, "code": "91175000", "display": "Seizure"}], "text": "Seizure"},
        "subject": {"reference": subject_ref},
        "onsetDateTime": onset, "recordedDate": recorded})
    return c

def med_request(mid, subject_ref, atc_code, display, text, authored, status="active", intent="order", dosage=None):
    m = {"resourceType": "MedicationRequest"}
    if mid: m["id"] = mid
    m.update({"status": status, "intent": intent,
              "medicationCodeableConcept": {"coding": [{"system": ATC, "code": atc_code, "display": display}], "text": text},
              "subject": {"reference": subject_ref},
              "authoredOn": authored})
    if dosage: m["dosageInstruction"] = dosage
    return m

def urn_bundle(bid, btype, ts, resources, ids=False):
    """resources: list of (tag, resource) -> entries with urn:uuid fullUrls.
    ids=True also gives each resource the tag as its logical id."""
    if ids:
        resources = [(t, {"resourceType": r["resourceType"], "id": t,
                          **{k: v for k, v in r.items() if k != "resourceType"}}) for t, r in resources]
    return {"resourceType": "Bundle", "id": bid, "type": btype, "timestamp": ts,
            "entry": [{"fullUrl": "urn:uuid:" + u(bid + "/" + tag), "resource": r} for tag, r in resources]}

def ref(bid, tag): return "urn:uuid:" + u(bid + "/" + tag)

def write(name, doc):
    (OUT / name).write_text(json.dumps(doc, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    print("wrote", name)

OUT.mkdir(parents=True, exist_ok=True)

# 1 ------------------------------------------------------------------
b = "ionized-low-seizure-toddler"; P = ref(b, "patient")
write(b + ".json", urn_bundle(b, "collection", "2026-11-30T08:15:00-05:00", [
  ("patient", patient(None, "LCH-40211873", "Talbridge", ["Wren", "Odette"], "female", "2024-09-12")),
  ("ica", obs(None, "ica", P, "2026-11-30T07:40:00-05:00", "2026-11-30T07:52:00-05:00", 0.82, "mmol/L")),
  ("seizure", seizure(None, P, "2026-11-30T06:55:00-05:00", "2026-11-30T07:10:00-05:00")),
  ("weight", obs(None, "wt", P, "2026-11-30T07:05:00-05:00", None, 12.1, "kg")),
]))

# 2 ------------------------------------------------------------------
b = "total-calcium-low-albumin-child"; pid = "pt-73115"; P = "Patient/" + pid
draw = "2026-11-29T22:30:00-05:00"; res = "2026-11-29T23:10:00-05:00"
def put(r):
    return {"fullUrl": BASE + r["resourceType"] + "/" + r["id"], "resource": r,
            "request": {"method": "PUT", "url": r["resourceType"] + "/" + r["id"]}}
write(b + ".json", {"resourceType": "Bundle", "id": b, "type": "transaction", "timestamp": "2026-11-30T08:15:00-05:00", "entry": [
  put(patient(pid, "LCH-30598142", "Fenwright", ["Tobias"], "male", "2019-03-04",
              {"meta": {"versionId": "3", "lastUpdated": "2026-11-29T21:48:12.411-05:00"}})),
  put(obs("ca-tot-73115-1", "tca_mass", P, draw, res, 7.6, "mg/dL")),
  put(obs("alb-73115-1", "alb", P, draw, res, 2.6, "g/dL")),
  {"fullUrl": "urn:uuid:" + u(b + "/qtc"),
   "resource": obs(None, "qtc", P, "2026-11-29T23:05:00-05:00", None, 468, "ms"),
   "request": {"method": "POST", "url": "Observation"}},
  put(obs("wt-73115-1", "wt", P, "2026-11-29T21:55:00-05:00", None, 22.4, "kg")),
]})

# 3 ------------------------------------------------------------------
b = "total-calcium-si-units"; pid = "pt-58820"; P = "Patient/" + pid
draw = "2026-11-30T05:45:00-05:00"; res = "2026-11-30T06:31:27-05:00"
def hit(r, mode):
    return {"fullUrl": BASE + r["resourceType"] + "/" + r["id"], "resource": r, "search": {"mode": mode}}
write(b + ".json", {"resourceType": "Bundle", "id": b, "type": "searchset", "timestamp": "2026-11-30T08:15:00-05:00", "total": 2,
  "link": [{"relation": "self", "url": BASE + "Observation?patient=" + pid + "&code=http://loinc.org|2000-8,http://loinc.org|1751-7&_include=Observation:patient"}],
  "entry": [
  hit(obs("ca-tot-58820-7", "tca_mol", P, draw, res, 1.95, "mmol/L"), "match"),
  hit(obs("alb-58820-7", "alb", P, draw, res, 31, "g/L"), "match"),
  hit(patient(pid, "LCH-20744619", "Marrowby", ["Ilse"], "female", "2012-06-20"), "include"),
]})

# 4 ------------------------------------------------------------------
b = "normal-calcium-adolescent"; P = ref(b, "patient")
draw = "2026-11-30T07:20:00-05:00"; res = "2026-11-30T07:58:00-05:00"
write(b + ".json", urn_bundle(b, "collection", "2026-11-30T08:15:00-05:00", [
  ("patient", patient(None, "LCH-10388257", "Drayhurst", ["Callum"], "male", "2011-01-15")),
  ("ica", obs(None, "ica", P, draw, "2026-11-30T07:31:00-05:00", 1.24, "mmol/L")),
  ("tca", obs(None, "tca_mass", P, draw, res, 9.6, "mg/dL")),
  ("alb", obs(None, "alb", P, draw, res, 4.3, "g/dL")),
]))

# 5 ------------------------------------------------------------------
b = "neonate-day-two"; P = ref(b, "patient")
write(b + ".json", urn_bundle(b, "collection", "2026-11-30T08:15:00-05:00", [
  ("patient", patient(None, "LCH-90017334", "Ashcombe", ["Baby Girl"], "female", "2026-11-28",
     {"_birthDate": {"extension": [{"url": "http://hl7.org/fhir/StructureDefinition/patient-birthTime",
                                     "valueDateTime": "2026-11-28T14:22:00-05:00"}]}})),
  ("ica", obs(None, "ica", P, "2026-11-30T06:00:00-05:00", "2026-11-30T06:09:00-05:00", 0.95, "mmol/L")),
  ("weight", obs(None, "wt", P, "2026-11-29T20:00:00-05:00", None, 3.18, "kg")),
]))

# 6 ------------------------------------------------------------------
b = "parameters-wrapper-bundle"; P = ref(b, "patient")
inner = urn_bundle(b, "collection", "2026-11-30T08:15:00-05:00", [
  ("patient", patient(None, "LCH-60251180", "Quillfeather", ["Rosalind"], "female", "2020-05-01")),
  ("ica", obs(None, "ica", P, "2026-11-30T06:50:00-05:00", "2026-11-30T07:02:00-05:00", 1.02, "mmol/L")),
])
write("parameters-wrapper.json", {"resourceType": "Parameters", "id": "parameters-wrapper",
  "parameter": [{"name": "bundle", "resource": inner}]})

# 7 ------------------------------------------------------------------
b = "albumin-only"; P = ref(b, "patient")
write(b + ".json", urn_bundle(b, "collection", "2026-11-30T08:15:00-05:00", [
  ("patient", patient(None, "LCH-50962471", "Penhallow", ["Milo"], "male", "2018-08-08")),
  ("alb", obs(None, "alb", P, "2026-11-30T06:10:00-05:00", "2026-11-30T06:55:00-05:00", 3.9, "g/dL")),
]))

# 8 ------------------------------------------------------------------
b = "set-aside-mix"; P = ref(b, "patient")
other = "urn:uuid:" + u(b + "/someone-else")
d1 = "2026-11-30T07:30:00-05:00"; d0 = "2026-11-29T18:05:00-05:00"
write(b + ".json", urn_bundle(b, "collection", "2026-11-30T08:15:00-05:00", [
  ("patient", patient(None, "LCH-70430916", "Vantreese", ["Hollis"], "female", "2017-02-02")),
  ("ica-usable", obs(None, "ica", P, d1, "2026-11-30T07:41:00-05:00", 1.05, "mmol/L")),
  ("tca-preliminary", obs(None, "tca_mass", P, d1, "2026-11-30T07:49:00-05:00", 8.1, "mg/dL", status="preliminary")),
  ("ica-entered-in-error", obs(None, "ica", P, d0, "2026-11-29T18:14:00-05:00", 0.71, "mmol/L", status="entered-in-error")),
  ("tca-data-absent", obs(None, "tca_mass", P, d0, "2026-11-29T18:40:00-05:00", extra={
      "dataAbsentReason": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/data-absent-reason", "code": "error", "display": "Error"}],
                           "text": "Specimen haemolysed; result withheld by the laboratory"}})),
  ("tca-no-ucum-code", obs(None, "tca_mass", P, d0, "2026-11-29T18:52:00-05:00", quantity={"value": 8.4, "unit": "mg/dl"})),
  ("ica-other-patient", obs(None, "ica", other, d1, "2026-11-30T07:44:00-05:00", 1.18, "mmol/L")),
  ("tca-future", obs(None, "tca_mass", P, "2027-01-10T10:00:00Z", None, 9.2, "mg/dL")),
], ids=True))

# 9 ------------------------------------------------------------------
# Cause work-up: nutritional vitamin D deficiency (low phosphate, high PTH,
# very low 25-OH vitamin D, high alkaline phosphatase, normal magnesium).
b = "workup-vitamin-d-deficiency-toddler"; P = ref(b, "patient")
draw = "2026-11-30T08:00:00-05:00"; chem = "2026-11-30T08:52:00-05:00"; endo = "2026-11-30T09:41:00-05:00"
write(b + ".json", urn_bundle(b, "collection", "2026-11-30T09:45:00-05:00", [
  ("patient", patient(None, "LCH-81427063", "Hollingbrook", ["Jasper"], "male", "2024-10-01")),
  ("ica", obs(None, "ica", P, draw, "2026-11-30T08:09:00-05:00", 0.98, "mmol/L")),
  ("phosphate", obs(None, "phos", P, draw, chem, 2.9, "mg/dL")),
  ("magnesium", obs(None, "mg", P, draw, chem, 2.0, "mg/dL")),
  ("alp", obs(None, "alp", P, draw, chem, 890, "U/L")),
  ("pth", obs(None, "pth", P, draw, endo, 180, "pg/mL")),
  ("vitamin-d", obs(None, "vitd", P, draw, endo, 6, "ng/mL")),
  ("weight", obs(None, "wt", P, draw, None, 11.8, "kg")),
  ("height", obs(None, "ht", P, draw, None, 84, "cm")),
]))

# 10 -----------------------------------------------------------------
# Cause work-up: hypomagnesemia while on a loop diuretic (normal phosphate,
# normal creatinine for height).
b = "workup-hypomagnesemia-furosemide"; P = ref(b, "patient")
draw = "2026-11-30T06:30:00-05:00"; chem = "2026-11-30T07:24:00-05:00"
write(b + ".json", urn_bundle(b, "collection", "2026-11-30T08:15:00-05:00", [
  ("patient", patient(None, "LCH-62095318", "Castellow", ["Elowen"], "female", "2015-04-10")),
  ("ica", obs(None, "ica", P, draw, "2026-11-30T06:41:00-05:00", 0.92, "mmol/L")),
  ("magnesium", obs(None, "mg", P, draw, chem, 0.9, "mg/dL")),
  ("phosphate", obs(None, "phos", P, draw, chem, 4.6, "mg/dL")),
  ("creatinine", obs(None, "creat", P, draw, chem, 0.45, "mg/dL")),
  ("height", obs(None, "ht", P, "2026-11-25T09:10:00-05:00", None, 138, "cm")),
  ("furosemide", med_request(None, P, "C03CA01", "furosemide", "Furosemide 1 mg/kg IV twice daily",
                             "2026-11-25T11:20:00-05:00", dosage=[{"text": "1 mg/kg IV every 12 hours"}])),
]))
