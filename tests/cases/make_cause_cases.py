#!/usr/bin/env python3
"""Write the cause cases of tests/cases: for each cause, one request where it
leads and one where its own findings rule it out or make it unlikely.

The clinical content of each case (the labs, events and the expected label)
is the hand-worked table of the work-up unit tests
(service/src/clinical/workup.rs: each_cause_leads_on_its_own_findings and
each_cause_is_ruled_out_or_made_unlikely_by_its_findings), turned into FHIR
R4 bundles at the invented Larkspur Children's Hospital. Only the codes are
taken from the rule data (the first LOINC of each analyte, the first code of
each code list), since they are the input vocabulary. Every patient is a boy
with an ionized calcium of 0.95 mmol/L one hour before the clock.

Not covered here: the two vitamin D-dependent rickets types and the urine
calcium/creatinine ratio, which have no verified LOINC in the default rules
(a site adds its codes).

Run from the repository root: python3 tests/cases/make_cause_cases.py
"""
import datetime
import json
import pathlib
import tomllib
import uuid

ROOT = pathlib.Path(__file__).resolve().parents[2]
OUT = ROOT / "tests" / "cases"
NOW = datetime.datetime(2026, 11, 30, 15, 0, tzinfo=datetime.timezone.utc)
UCUM = "http://unitsofmeasure.org"
NS = uuid.UUID("6f1c2a3e-4b5d-4e6f-8a9b-0c1d2e3f4a5b")

codes = tomllib.loads((ROOT / "service/rules/codes.toml").read_text())
lists = tomllib.loads((ROOT / "service/rules/cause-codes.toml").read_text())["code_lists"]
LOINC = {}
for o in codes["observation_codes"]:
    LOINC.setdefault(o["analyte"], (o["code"], o.get("display", o["analyte"])))
LIST = {l["id"]: l for l in lists}

# analyte: (canonical UCUM unit)
UNIT = {"phosphate": "mmol/L", "magnesium": "mmol/L", "pth_intact": "pmol/L", "vitamin_d_25oh": "nmol/L",
        "alkaline_phosphatase": "U/L", "creatinine": "umol/L", "body_height": "cm", "blood_ph": "[pH]",
        "lipase": "U/L"}


def lab(analyte, value):
    return ("lab", analyte, value)


def ev(kind, list_id, hours_ago):
    return ("event", kind, list_id, hours_ago)


SEVEN = 7 * 365 + 30
# (cause id, age in days, findings) -- where the cause leads.
LEADS = [
    ("vitamin_d_deficiency", SEVEN, [lab("vitamin_d_25oh", 15.0), lab("phosphate", 0.8), lab("pth_intact", 15.0), lab("alkaline_phosphatase", 600.0)]),
    ("dietary_calcium_deficiency", SEVEN, [lab("vitamin_d_25oh", 80.0), lab("phosphate", 0.8), lab("pth_intact", 15.0), lab("alkaline_phosphatase", 600.0)]),
    ("hypoparathyroidism", SEVEN, [lab("pth_intact", 0.5), lab("phosphate", 2.2), lab("magnesium", 0.8)]),
    ("casr_activating", SEVEN, [lab("pth_intact", 2.0), lab("phosphate", 2.2), lab("magnesium", 0.8), ev("condition", "calcium_sensing_receptor_activating", 24)]),
    ("pth_resistance", SEVEN, [lab("pth_intact", 15.0), lab("phosphate", 2.2), lab("vitamin_d_25oh", 80.0), lab("creatinine", 35.0), lab("body_height", 120.0)]),
    ("hypomagnesemia", SEVEN, [lab("magnesium", 0.4)]),
    ("kidney_disease", SEVEN, [lab("creatinine", 300.0), lab("body_height", 120.0), lab("phosphate", 2.5), lab("pth_intact", 15.0)]),
    ("alkalosis", SEVEN, [lab("blood_ph", 7.55)]),
    ("citrate_chelation", SEVEN, [ev("procedure", "blood_transfusion", 6)]),
    ("phosphate_load", SEVEN, [lab("phosphate", 2.5), ev("condition", "tumor_lysis_syndrome", 24)]),
    ("drug_effect", SEVEN, [ev("medication", "bisphosphonates", 24)]),
    ("early_neonatal", 1, [ev("condition", "prematurity", 24)]),
    ("late_neonatal", 10, [lab("phosphate", 3.0), lab("vitamin_d_25oh", 20.0)]),
    ("critical_illness", SEVEN, [ev("condition", "sepsis", 24)]),
    ("acute_pancreatitis", SEVEN, [lab("lipase", 300.0)]),
    ("malabsorption", SEVEN, [ev("condition", "malabsorption", 24)]),
    ("hungry_bone", SEVEN, [lab("phosphate", 0.8), lab("alkaline_phosphatase", 600.0), ev("condition", "hungry_bone_syndrome", 24)]),
]
# (cause id, age in days, findings, expected label) -- where its findings rule it out or make it unlikely.
AGAINST = [
    ("vitamin_d_deficiency", SEVEN, [lab("vitamin_d_25oh", 80.0)], "ruled_out"),
    ("dietary_calcium_deficiency", SEVEN, [lab("pth_intact", 0.5)], "unlikely"),
    ("hypoparathyroidism", SEVEN, [lab("pth_intact", 15.0)], "ruled_out"),
    ("casr_activating", SEVEN, [lab("pth_intact", 15.0)], "ruled_out"),
    ("pth_resistance", SEVEN, [lab("pth_intact", 0.5)], "ruled_out"),
    ("hypomagnesemia", SEVEN, [lab("magnesium", 0.8)], "ruled_out"),
    ("kidney_disease", SEVEN, [lab("creatinine", 35.0), lab("body_height", 120.0)], "unlikely"),
    ("alkalosis", SEVEN, [lab("blood_ph", 7.40)], "ruled_out"),
    ("citrate_chelation", SEVEN, [ev("procedure", "blood_transfusion", 24 * 5)], "unlikely"),
    ("phosphate_load", SEVEN, [lab("phosphate", 1.2)], "ruled_out"),
    ("drug_effect", SEVEN, [], "unlikely"),
    ("early_neonatal", SEVEN, [], "ruled_out"),
    ("late_neonatal", 1, [], "ruled_out"),
    ("critical_illness", SEVEN, [], "unlikely"),
    ("acute_pancreatitis", SEVEN, [lab("lipase", 20.0)], "unlikely"),
    ("malabsorption", SEVEN, [], "unlikely"),
    ("hungry_bone", SEVEN, [], "unlikely"),
]


def iso(hours_ago):
    return (NOW - datetime.timedelta(hours=hours_ago)).strftime("%Y-%m-%dT%H:%M:%SZ")


def urn(case, n):
    return f"urn:uuid:{uuid.uuid5(NS, f'{case}/{n}')}"


def observation(case, n, subject, analyte, value):
    code, display = LOINC[analyte]
    unit = UNIT.get(analyte, "mmol/L")
    return {"fullUrl": urn(case, n), "resource": {
        "resourceType": "Observation", "status": "final",
        "category": [{"coding": [{"system": "http://terminology.hl7.org/CodeSystem/observation-category",
                                  "code": "vital-signs" if analyte == "body_height" else "laboratory"}]}],
        "code": {"coding": [{"system": "http://loinc.org", "code": code, "display": display}]},
        "subject": {"reference": subject}, "effectiveDateTime": iso(1),
        "valueQuantity": {"value": value, "unit": unit, "system": UCUM, "code": unit}}}


def event(case, n, subject, kind, list_id, hours_ago):
    c = LIST[list_id]["codes"][0]
    concept = {"coding": [{"system": c["system"], "code": c["code"], "display": c.get("display", list_id)}],
               "text": LIST[list_id].get("label", list_id)}
    if kind == "condition":
        r = {"resourceType": "Condition",
             "clinicalStatus": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-clinical", "code": "active"}]},
             "code": concept, "subject": {"reference": subject}, "onsetDateTime": iso(hours_ago)}
    elif kind == "procedure":
        r = {"resourceType": "Procedure", "status": "completed", "code": concept,
             "subject": {"reference": subject}, "performedDateTime": iso(hours_ago)}
    else:
        r = {"resourceType": "MedicationStatement", "status": "active", "medicationCodeableConcept": concept,
             "subject": {"reference": subject}, "effectiveDateTime": iso(hours_ago)}
    return {"fullUrl": urn(case, n), "resource": r}


def bundle(case, age_days, findings):
    subject = urn(case, 0)
    birth = (NOW.date() - datetime.timedelta(days=age_days)).isoformat()
    entries = [
        {"fullUrl": subject, "resource": {"resourceType": "Patient", "gender": "male", "birthDate": birth,
                                          "identifier": [{"system": "https://larkspur-childrens.example.org/fhir/sid/mrn",
                                                          "value": f"LCH-CASE-{uuid.uuid5(NS, case).hex[:8].upper()}"}]}},
        observation(case, 1, subject, "calcium_ionized", 0.95),
    ]
    for n, f in enumerate(findings, start=2):
        if f[0] == "lab":
            entries.append(observation(case, n, subject, f[1], f[2]))
        else:
            entries.append(event(case, n, subject, f[1], f[2], f[3]))
    return {"resourceType": "Bundle", "id": case, "type": "collection", "timestamp": iso(0), "entry": entries}


def describe(findings):
    parts = [f"{f[1]} {f[2]}" if f[0] == "lab" else f"{f[1]} '{f[2]}' {f[3]} h ago" for f in findings]
    return ", ".join(parts) if parts else "nothing else"


def write(case, age_days, findings, expect_lines, what):
    (OUT / f"{case}.json").write_text(json.dumps(bundle(case, age_days, findings), indent=2) + "\n")
    age = f"{age_days} days" if age_days < 365 else "7 years"
    text = [f'description = "Boy, {age}, ionized calcium 0.95 mmol/L; {describe(findings)}: {what}."',
            'now = "2026-11-30T15:00:00Z"'] + expect_lines
    (OUT / f"{case}.expect.toml").write_text("\n".join(text) + "\n")


for cause, age, findings in LEADS:
    write(f"cause-{cause.replace('_', '-')}-leads", age, findings, [f'leading_cause = "{cause}"'], f"{cause} leads")
for cause, age, findings, label in AGAINST:
    key = "causes_ruled_out" if label == "ruled_out" else "causes_unlikely"
    write(f"cause-{cause.replace('_', '-')}-against", age, findings, [f'{key} = ["{cause}"]'],
          f"{cause} is {label.replace('_', ' ')}")
print(f"wrote {len(LEADS) + len(AGAINST)} cause cases")
