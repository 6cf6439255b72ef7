#!/usr/bin/env python3
"""Write the safety-check cases and the age-band cases of tests/cases, and the
site cases of tests/cases-site.

Each case is a child at the invented Larkspur Children's Hospital, written out
as a FHIR R4 request (a Bundle, or a Parameters wrapper when the vascular
access must be stated) with its expectation file. The expectation text, with
the hand-worked arithmetic in its comments, is in this script beside the
patient it belongs to, so a reviewer reads the data and the expectation
together. Codes are taken from the rule data as written below (LOINC,
SNOMED CT, ATC from service/rules/codes.toml and cause-codes.toml); the site
cases also use the site's local 1,25-dihydroxyvitamin D code
(tests/cases-site/site-rules.toml).

The evaluation clock of every case is 2026-11-30T15:00:00Z (10:00 at the
hospital, UTC-05:00). Results are stamped in local time.

Run from the repository root: python3 tests/cases/make_safety_band_cases.py
"""
import json
import pathlib
import uuid

ROOT = pathlib.Path(__file__).resolve().parents[2]
CASES = ROOT / "tests" / "cases"
SITE = ROOT / "tests" / "cases-site"
NOW = "2026-11-30T15:00:00Z"
UCUM = "http://unitsofmeasure.org"
LOINC = "http://loinc.org"
SCT = "http://snomed.info/sct"
ATC = "http://www.whocc.no/atc"
MRN = "https://larkspur-childrens.example.org/fhir/sid/mrn"
LOCAL_LAB = "https://larkspur.example.org/fhir/CodeSystem/lab"
NS = uuid.UUID("2b7d4c91-5e3a-4f08-9c6d-71a0e2f4b8c3")

# LOINC code, display, unit for each lab used here (service/rules/codes.toml).
LAB = {
    "ica": ("1994-3", "Calcium.ionized [Moles/volume] in Blood", "Ionized calcium (whole blood)", "mmol/L"),
    "tca_mg": ("17861-6", "Calcium [Mass/volume] in Serum or Plasma", "Calcium, total", "mg/dL"),
    "tca": ("2000-8", "Calcium [Moles/volume] in Serum or Plasma", "Calcium, total", "mmol/L"),
    "phos": ("14879-1", "Phosphate [Moles/volume] in Serum or Plasma", "Phosphate", "mmol/L"),
    "mg": ("2601-3", "Magnesium [Moles/volume] in Serum or Plasma", "Magnesium", "mmol/L"),
    "pth": ("14866-8", "Parathyrin.intact [Moles/volume] in Serum or Plasma", "PTH, intact", "pmol/L"),
    "vitd25": ("62292-8", "25-Hydroxyvitamin D2+25-Hydroxyvitamin D3 [Mass/volume] in Serum or Plasma",
               "25-OH vitamin D, total", "ng/mL"),
    "alp": ("6768-6", "Alkaline phosphatase [Enzymatic activity/volume] in Serum or Plasma",
            "Alkaline phosphatase", "U/L"),
    "creat": ("14682-9", "Creatinine [Moles/volume] in Serum or Plasma", "Creatinine", "umol/L"),
    "height": ("8302-2", "Body height", "Height", "cm"),
    "weight": ("29463-7", "Body weight", "Weight", "kg"),
    "qtc": ("8636-3", "QT interval corrected", "QTc (ECG)", "ms"),
    "ga": ("76516-4", "Gestational age--at birth", "Gestational age at birth", "wk"),
    "bw": ("8339-4", "Birth weight Measured", "Birth weight", "g"),
}
SYMPTOM = {
    "seizure": ("91175000", "Seizure"),
    "bradycardia": ("48867003", "Bradycardia"),
}
# ATC codes from service/rules/cause-codes.toml (code lists named in the comment).
DRUG = {
    "ca_gluconate_iv": ("B05XA19", "calcium gluconate", "Calcium gluconate 10% IV"),  # calcium_preparations
    "bicarbonate": ("B05XA02", "sodium bicarbonate", "Sodium bicarbonate 4.2% IV"),  # sodium_bicarbonate
    "k_phosphate": ("B05XA06", "potassium phosphate, incl. combinations with other potassium salts",
                    "Potassium phosphate IV"),  # phosphate_preparations
    "ceftriaxone": ("J01DD04", "ceftriaxone", "Ceftriaxone IV"),  # ceftriaxone
}
CONDITION = {
    "ckd": (SCT, "709044004", "Chronic kidney disease (disorder)"),  # chronic_kidney_disease
    "hypopara": ("http://hl7.org/fhir/sid/icd-10-cm", "E20.9", "Hypoparathyroidism, unspecified"),
    "rickets": (SCT, "41345002", "Rickets"),  # rickets
}
ALL_SAFETY = ["weight", "overshoot", "digoxin", "precipitation", "ceftriaxone", "saline-diluent", "arterial-line",
              "extravasation", "bradycardia", "qtc", "caxp", "daily-maximum"]


class Case:
    """One request under construction."""

    def __init__(self, name, family, given, gender, birth, birth_time=None):
        self.name = name
        self.n = 0
        self.subject = self.urn()
        patient = {
            "resourceType": "Patient",
            "identifier": [{"use": "usual", "system": MRN,
                            "value": f"LCH-{uuid.uuid5(NS, name).int % 10**8:08d}"}],
            "active": True,
            "name": [{"use": "official", "family": family, "given": given}],
            "gender": gender,
            "birthDate": birth,
        }
        if birth_time:
            patient["_birthDate"] = {"extension": [
                {"url": "http://hl7.org/fhir/StructureDefinition/patient-birthTime", "valueDateTime": birth_time}]}
        self.entries = [{"fullUrl": self.subject, "resource": patient}]
        self.access = None

    def urn(self):
        self.n += 1
        return f"urn:uuid:{uuid.uuid5(NS, f'{self.name}/{self.n}')}"

    def add(self, resource):
        self.entries.append({"fullUrl": self.urn(), "resource": resource})
        return self

    def lab(self, key, value, when):
        loinc, display, text, unit = LAB[key]
        coding = {"system": LOINC, "code": loinc, "display": display}
        vital = key in ("height", "weight", "qtc", "ga", "bw")
        r = {
            "resourceType": "Observation",
            "status": "final",
            "category": [{"coding": [{"system": "http://terminology.hl7.org/CodeSystem/observation-category",
                                      "code": "vital-signs" if key in ("height", "weight", "bw") else
                                      ("exam" if vital else "laboratory")}]}],
            "code": {"coding": [coding], "text": text},
            "subject": {"reference": self.subject},
            "effectiveDateTime": when,
            "valueQuantity": {"value": value, "unit": unit, "system": UCUM, "code": unit},
        }
        if not vital:
            r["issued"] = when[:14] + "55:00" + when[19:]
        return self.add(r)

    def local_lab(self, coding, text, value, unit, when):
        """A result under a site's local code (tests/cases-site/site-rules.toml)."""
        return self.add({
            "resourceType": "Observation",
            "status": "final",
            "category": [{"coding": [{"system": "http://terminology.hl7.org/CodeSystem/observation-category",
                                      "code": "laboratory"}]}],
            "code": {"coding": [coding], "text": text},
            "subject": {"reference": self.subject},
            "effectiveDateTime": when,
            "issued": "2026-11-30T06:15:00-05:00",
            "valueQuantity": {"value": value, "unit": unit, "system": UCUM, "code": unit},
        })

    def symptom(self, key, onset):
        code, display = SYMPTOM[key]
        return self.add({
            "resourceType": "Condition",
            "clinicalStatus": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-clinical",
                                           "code": "active"}]},
            "verificationStatus": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-ver-status",
                                               "code": "confirmed"}]},
            "code": {"coding": [{"system": SCT, "code": code, "display": display}], "text": display},
            "subject": {"reference": self.subject},
            "onsetDateTime": onset,
        })

    def condition(self, key, onset):
        system, code, display = CONDITION[key]
        return self.add({
            "resourceType": "Condition",
            "clinicalStatus": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-clinical",
                                           "code": "active"}]},
            "code": {"coding": [{"system": system, "code": code, "display": display}], "text": display},
            "subject": {"reference": self.subject},
            "onsetDateTime": onset,
        })

    def administration(self, key, status, start, end=None, dose_mg=None):
        code, display, text = DRUG[key]
        r = {
            "resourceType": "MedicationAdministration",
            "status": status,
            "medicationCodeableConcept": {"coding": [{"system": ATC, "code": code, "display": display}],
                                          "text": text},
            "subject": {"reference": self.subject},
        }
        if end is None and status == "completed":
            r["effectiveDateTime"] = start
        else:
            r["effectivePeriod"] = {"start": start, **({"end": end} if end else {})}
        if dose_mg is not None:
            r["dosage"] = {"route": {"coding": [{"system": SCT, "code": "47625008",
                                                  "display": "Intravenous route"}]},
                           "dose": {"value": dose_mg, "unit": "mg", "system": UCUM, "code": "mg"}}
        return self.add(r)

    def request(self):
        bundle = {"resourceType": "Bundle", "id": self.name, "type": "collection",
                  "timestamp": "2026-11-30T09:55:00-05:00", "entry": self.entries}
        if self.access is None:
            return bundle
        return {"resourceType": "Parameters", "id": f"{self.name}-request", "parameter": [
            {"name": "bundle", "resource": bundle},
            {"name": "vascularAccess", "valueCode": self.access},
        ]}


WRITTEN = []


def write(case, expect, folder=CASES):
    (folder / f"{case.name}.json").write_text(json.dumps(case.request(), indent=2) + "\n")
    text = expect.strip("\n") + "\n"
    assert f'now = "{NOW}"' in text, case.name
    (folder / f"{case.name}.expect.toml").write_text(text)
    WRITTEN.append(f"{folder.name}/{case.name}")


def absent(*present, extra=()):
    """Every safety key except those present (and the site-only saline check)."""
    keys = [k for k in ALL_SAFETY if k not in present and k not in extra]
    return "[" + ", ".join(f'"{k}"' for k in keys) + "]"


R = "2026-11-30T07:40:00-05:00"   # the calcium draw of most cases, 12:40Z
W = "2026-11-30T07:10:00-05:00"   # a weight measured on admission
SZ = "2026-11-30T06:50:00-05:00"  # a seizure before the draw

# ---------------------------------------------------------------------------
# Safety checks (defaults): one case per check key.
# ---------------------------------------------------------------------------

c = Case("safety-weight-missing-child", "Orrinford", ["Caspian"], "male", "2021-06-14")
c.lab("ica", 0.84, R).symptom("seizure", SZ)
write(c, f'''
description = "Boy 5 y 5 mo, ionized Ca 0.84 mmol/L (at or below the severe grade 0.9: high) with a seizure, and no body weight recorded: no weight-based dose is proposed and the weight check says a current weight is needed. Without a proposal none of the IV checks can fire."
now = "{NOW}"
severity = "high"
safety_present = ["weight"]
# No proposal, so the checks tied to a proposed IV calcium (line, interactions, QTc, CaxP, daily maximum) stay silent.
safety_absent = {absent("weight")}
proposals_absent = ["calcium-bolus", "calcium-infusion", "calcium-chloride", "oral-calcium"]
''')

c = Case("safety-weight-stale-child", "Brackenbury", ["Imogen", "Tess"], "female", "2017-04-03")
c.lab("ica", 0.88, R).symptom("seizure", SZ).lab("weight", 27.5, "2026-11-20T11:30:00-05:00")
write(c, f'''
description = "Girl 9 y 7 mo, ionized Ca 0.88 mmol/L (severe grade 0.9: high) with a seizure; the only weight (27.5 kg) was measured on 2026-11-20, 10 days before the clock, older than the 7-day limit of treatment.toml (weight.max_age_days): no dose is proposed until a current weight is recorded."
now = "{NOW}"
severity = "high"
safety_present = ["weight"]
safety_absent = {absent("weight")}
proposals_absent = ["calcium-bolus", "calcium-infusion", "calcium-chloride", "oral-calcium"]
''')

c = Case("safety-overshoot-child", "Quenby", ["Rafferty"], "male", "2020-02-19")
c.lab("ica", 1.24, R).lab("weight", 21.0, W)
c.administration("ca_gluconate_iv", "in-progress", "2026-11-29T22:00:00-05:00")
write(c, f'''
description = "Boy 6 y 9 mo on a calcium gluconate infusion since 22:00 yesterday (MedicationAdministration in-progress); ionized Ca now 1.24 mmol/L, within the child interval 1.11-1.30: not hypocalcemic, so no calcium is proposed, and the running infusion is flagged for overshoot (consider weaning or stopping)."
now = "{NOW}"
status = "success"
severity = "none"
safety_present = ["overshoot"]
# Nothing is proposed with a normal calcium, so no proposal-tied check fires, and no weight check either.
safety_absent = {absent("overshoot")}
proposals_absent = ["calcium-bolus", "calcium-infusion", "calcium-chloride", "oral-calcium"]
''')

c = Case("safety-precipitation-bicarbonate-infant", "Pellowe", ["Juniper"], "female", "2026-04-22")
c.lab("ica", 0.86, R).symptom("seizure", SZ).lab("weight", 7.9, W)
c.administration("bicarbonate", "in-progress", "2026-11-30T06:30:00-05:00")
c.access = "central"
write(c, f'''
description = "Girl 7 mo in intensive care with a sodium bicarbonate infusion running, ionized Ca 0.86 mmol/L (severe grade 0.9: high) with a seizure; central line: IV calcium is proposed and the bicarbonate precipitation check fires (never through the same line)."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "calcium-chloride"]
safety_present = ["precipitation"]
# Central line: no extravasation or arterial warning; 7 months: not a neonate, so no ceftriaxone check; no total calcium, so no CaxP.
safety_absent = {absent("precipitation", extra=["saline-diluent"])}
[doses.calcium-bolus]
# 7.9 kg x 50 mg/kg = 395 mg calcium gluconate (under the 1000 mg cap).
min = 394.0
max = 396.0
[doses.calcium-chloride]
# 7.9 kg x 20 mg/kg = 158 mg calcium chloride (central line only).
min = 157.0
max = 159.0
''')

c = Case("safety-precipitation-phosphate-child", "Ellacombe", ["Thaddeus"], "male", "2016-08-30")
c.lab("ica", 0.87, R).lab("weight", 31.0, W)
c.administration("k_phosphate", "in-progress", "2026-11-30T04:00:00-05:00")
c.access = "peripheral"
write(c, f'''
description = "Boy 10 y 3 mo receiving IV potassium phosphate for refeeding hypophosphatemia (MedicationAdministration in-progress) whose ionized Ca fell to 0.87 mmol/L (severe grade 0.9: high); peripheral line: IV calcium is proposed and the phosphate precipitation check fires, as does the peripheral extravasation warning."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
proposals_absent = ["calcium-chloride"]
safety_present = ["precipitation", "extravasation"]
safety_absent = {absent("precipitation", "extravasation", extra=["saline-diluent"])}
[doses.calcium-bolus]
# 31 kg x 50 mg/kg = 1550 mg, capped at the maximum single dose 1000 mg (treatment.toml bolus.chosen).
min = 1000.0
max = 1000.0
''')

c = Case("safety-ceftriaxone-neonate-28-days", "Harrowgate", ["Baby Girl"], "female", "2026-11-02",
         "2026-11-02T04:15:00-05:00")
c.lab("ica", 0.68, R).lab("weight", 3.9, W)
c.administration("ceftriaxone", "completed", "2026-11-30T05:00:00-05:00")
c.access = "peripheral"
write(c, f'''
description = "Girl born 2026-11-02 04:15, 28 completed days old at the 07:40 draw (28 days 3 h 25 min) (still a neonate: the contraindication is for 28 days or younger, inclusive), given IV ceftriaxone at 05:00 for suspected late-onset sepsis; ionized Ca 0.68 mmol/L (term-neonate severe grade 0.7: high): IV calcium is proposed and the neonatal ceftriaxone contraindication fires."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus"]
safety_present = ["ceftriaxone", "extravasation"]
safety_absent = {absent("ceftriaxone", "extravasation", extra=["saline-diluent"])}
[doses.calcium-bolus]
# Under 29 days the neonatal source applies: 3.9 kg x 100 mg/kg = 390 mg calcium gluconate.
min = 389.0
max = 391.0
''')

c = Case("safety-ceftriaxone-infant-29-days", "Merriwether", ["Ansel"], "male", "2026-11-01",
         "2026-11-01T06:05:00-05:00")
c.lab("ica", 0.85, R).lab("weight", 4.2, W)
c.administration("ceftriaxone", "completed", "2026-11-30T05:00:00-05:00")
c.access = "peripheral"
write(c, f'''
description = "Boy born 2026-11-01 06:05, 29 completed days old at the 07:40 draw (29 days 1 h 35 min), given IV ceftriaxone at 05:00; ionized Ca 0.85 mmol/L (infant severe grade 0.9: high). Past 28 days the neonatal contraindication does not apply (the label allows sequential use with a flushed line), so the neonatal ceftriaxone check does not fire; the any-age notice not to give them together through one line does. The dose is the 29-day-and-older one."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus"]
safety_present = ["extravasation", "ceftriaxone-line"]
safety_absent = ["ceftriaxone", "digoxin", "precipitation", "arterial-line", "weight", "bradycardia", "qtc"]
[doses.calcium-bolus]
# From 29 days: 4.2 kg x 50 mg/kg = 210 mg calcium gluconate.
min = 209.0
max = 211.0
''')

c = Case("safety-arterial-line-neonate", "Fairweather", ["Baby Boy"], "male", "2026-11-28",
         "2026-11-28T19:05:00-05:00")
c.lab("ga", 38, "2026-11-28T19:05:00-05:00").lab("ica", 0.66, R).lab("weight", 3.3, W)
c.access = "umbilical-arterial"
write(c, f'''
description = "Boy born at 38 weeks on 2026-11-28, day 1 at the draw, whose only recorded line is an umbilical arterial catheter; ionized Ca 0.66 mmol/L (term-neonate severe grade 0.7: high): IV calcium is proposed with the warning never to give it through the arterial line (secure venous access first); calcium chloride is not proposed without a central venous line."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
proposals_absent = ["calcium-chloride"]
safety_present = ["arterial-line"]
# The line is known (arterial), so the peripheral extravasation warning is not the one given.
safety_absent = {absent("arterial-line", extra=["saline-diluent"])}
[doses.calcium-bolus]
# Neonate: 3.3 kg x 100 mg/kg = 330 mg calcium gluconate.
min = 329.0
max = 331.0
''')

c = Case("safety-extravasation-peripheral-child", "Lindqvist", ["Saffron"], "female", "2022-07-11")
c.lab("ica", 0.89, R).lab("weight", 16.0, W)
c.access = "peripheral"
write(c, f'''
description = "Girl 4 y 4 mo, ionized Ca 0.89 mmol/L (severe grade 0.9: high), asymptomatic, with a peripheral cannula stated in the request: IV calcium is proposed with the extravasation warning; calcium chloride is not proposed for a peripheral line."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
proposals_absent = ["calcium-chloride"]
safety_present = ["extravasation"]
safety_absent = {absent("extravasation", extra=["saline-diluent"])}
[doses.calcium-bolus]
# 16 kg x 50 mg/kg = 800 mg calcium gluconate.
min = 799.0
max = 801.0
''')

c = Case("safety-bradycardia-neonate", "Oakenshaw", ["Baby Girl"], "female", "2026-11-26",
         "2026-11-26T10:20:00-05:00")
c.lab("ica", 0.78, R).lab("weight", 3.4, W).symptom("bradycardia", "2026-11-30T07:25:00-05:00")
c.access = "umbilical-venous"
write(c, f'''
description = "Girl day 4 (born 2026-11-26 10:20), ionized Ca 0.78 mmol/L (term-neonate mild grade 1.0, above the severe 0.7: moderate by value) with bradycardia recorded at 07:25: symptomatic, so severity high and IV calcium is proposed, with the bradycardia check (ECG and heart-rate monitoring; stop the neonatal bolus below 100 bpm). Umbilical venous catheter: no arterial or peripheral warning."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["bradycardia"]
safety_absent = {absent("bradycardia", extra=["saline-diluent"])}
[doses.calcium-bolus]
# Neonate: 3.4 kg x 100 mg/kg = 340 mg calcium gluconate.
min = 339.0
max = 341.0
''')

c = Case("safety-qtc-adolescent", "Vantongeren", ["Marisol"], "female", "2012-03-08")
c.lab("ica", 1.02, R).lab("qtc", 476, "2026-11-30T07:55:00-05:00").lab("weight", 48.0, W)
c.access = "peripheral"
write(c, f'''
description = "Girl 14 y 8 mo, ionized Ca 1.02 mmol/L (below 1.11, above the mild grade 1.0: low by value) with a QTc of 476 ms 15 minutes after the draw (> 440 ms, within the 24 h pairing window): symptomatic, so severity high, IV calcium proposed, and the QTc check asks for ECG monitoring."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["qtc", "extravasation"]
safety_absent = {absent("qtc", "extravasation", extra=["saline-diluent"])}
[doses.calcium-bolus]
# 48 kg x 50 mg/kg = 2400 mg, capped at 1000 mg (treatment.toml).
min = 1000.0
max = 1000.0
''')

c = Case("safety-caxp-child-ckd", "Abernathy", ["Lucan"], "male", "2018-05-27")
(c.lab("ica", 0.98, R).lab("tca", 1.95, R).lab("phos", 3.0, R).lab("weight", 25.0, W)
 .condition("ckd", "2024-09-01"))
write(c, f'''
description = "Boy 8 y 6 mo with chronic kidney disease: ionized Ca 0.98 mmol/L (mild grade 1.0: moderate), asymptomatic, so oral calcium is proposed; total Ca 1.95 mmol/L and phosphate 3.0 mmol/L give a calcium-phosphate product above the under-12 limit, so the CaxP check fires."
now = "{NOW}"
severity = "moderate"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
# Ca 1.95 mmol/L x 40.078 / 10 = 7.82 mg/dL; P 3.0 mmol/L x 30.974 / 10 = 9.29 mg/dL;
# 7.82 x 9.29 = 72.6 mg2/dL2 > 65 (KDOQI, 12 years and younger; formulary.toml ca_x_p_under_12y).
safety_present = ["caxp"]
safety_absent = {absent("caxp", extra=["saline-diluent"])}
''')

c = Case("safety-caxp-adolescent-limit", "Drummelow", ["Keziah"], "female", "2012-01-15")
(c.lab("ica", 0.97, R).lab("tca", 2.00, R).lab("phos", 2.3, R).lab("weight", 50.0, W)
 .condition("hypopara", "2025-03-10"))
write(c, f'''
description = "Girl 14 y 10 mo with hypoparathyroidism: ionized Ca 0.97 mmol/L (mild grade: moderate), oral calcium proposed; total Ca 2.00 and phosphate 2.3 mmol/L give a product between the two KDOQI limits: above the adolescent limit 55, so the check fires (the same numbers in a child under 12 do not: safety-caxp-child-below-limit)."
now = "{NOW}"
severity = "moderate"
proposals = ["oral-calcium"]
# Ca 2.00 x 40.078 / 10 = 8.02 mg/dL; P 2.3 x 30.974 / 10 = 7.12 mg/dL; 8.02 x 7.12 = 57.1 mg2/dL2 > 55 (ca_x_p_over_12y).
safety_present = ["caxp"]
safety_absent = {absent("caxp", extra=["saline-diluent"])}
''')

c = Case("safety-caxp-child-below-limit", "Drummelow", ["Ottilie"], "female", "2016-06-02")
(c.lab("ica", 0.97, R).lab("tca", 2.00, R).lab("phos", 2.3, R).lab("weight", 33.0, W)
 .condition("hypopara", "2025-03-10"))
write(c, f'''
description = "Girl 10 y 5 mo with hypoparathyroidism and the same results as safety-caxp-adolescent-limit (ionized 0.97: moderate, oral calcium; total Ca 2.00, phosphate 2.3 mmol/L): the product 57.1 is below the limit 65 for 12 years and younger, so the CaxP check does not fire."
now = "{NOW}"
severity = "moderate"
proposals = ["oral-calcium"]
# 8.02 mg/dL x 7.12 mg/dL = 57.1 mg2/dL2, not above 65 (ca_x_p_under_12y).
safety_absent = {absent(extra=["saline-diluent"])}
''')

c = Case("safety-daily-maximum-toddler", "Castellane", ["Ignatius"], "male", "2023-09-05")
c.lab("ica", 0.86, R).symptom("seizure", SZ).lab("weight", 14.0, W)
c.administration("ca_gluconate_iv", "completed", "2026-11-29T19:30:00-05:00", dose_mg=700)
c.administration("ca_gluconate_iv", "completed", "2026-11-29T20:00:00-05:00", "2026-11-30T06:00:00-05:00",
                 dose_mg=1120)
c.administration("ca_gluconate_iv", "completed", "2026-11-30T07:00:00-05:00", dose_mg=700)
c.access = "central"
write(c, f'''
description = "Boy 3 y 2 mo, 14 kg, who has had two calcium gluconate boluses and a 10-hour infusion in the last 24 h and still has an ionized Ca of 0.86 mmol/L (severe: high) with a seizure; central line. The proposed infusion on top of what was given exceeds the daily maximum, so the daily-maximum check fires."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "calcium-chloride"]
# Given in the last 24 h (MedicationAdministration doses in mg): 700 + 1120 (10 h x 112 mg/h) + 700 = 2520 mg.
# Proposed infusion: 14 kg x 8 mg/kg/h = 112 mg/h = 11.2 mL/h at 10 mg/mL; over 24 h 112 x 24 = 2688 mg.
# Daily maximum: the upper rate 13 mg/kg/h x 24 h x 14 kg = 4368 mg; 2520 + 2688 = 5208 mg > 4368 mg.
safety_present = ["daily-maximum"]
safety_absent = {absent("daily-maximum", extra=["saline-diluent"])}
[doses.calcium-bolus]
# 14 kg x 50 mg/kg = 700 mg (the check warns; it does not change the weight-based dose).
min = 699.0
max = 701.0
''')

c = Case("safety-clean-central-child", "Whitlock", ["Philippa"], "female", "2020-10-09")
(c.lab("ica", 0.85, R).symptom("seizure", SZ).lab("qtc", 432, "2026-11-30T07:50:00-05:00")
 .lab("weight", 20.0, W))
c.access = "central"
write(c, f'''
description = "Girl 6 y 1 mo, 20 kg, ionized Ca 0.85 mmol/L (severe: high) with a seizure; central venous line, QTc 432 ms (not above 440), no interacting medicine, no calcium given yet: IV calcium gluconate and the calcium chloride alternative are proposed and no safety check fires."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "calcium-chloride"]
safety_absent = {absent(extra=["saline-diluent"])}
[doses.calcium-bolus]
# 20 kg x 50 mg/kg = 1000 mg, exactly the 1000 mg cap.
min = 1000.0
max = 1000.0
[doses.calcium-chloride]
# 20 kg x 20 mg/kg = 400 mg calcium chloride = 4 mL of 10%.
min = 399.0
max = 401.0
''')

# ---------------------------------------------------------------------------
# Age bands (calcium.toml): for each band a value just below its lower limit
# and one at it; each pair is chosen so that a neighbouring band would give a
# different answer. Then the grade thresholds where bands differ.
# ---------------------------------------------------------------------------

NEO_R = "2026-11-30T07:40:00-05:00"

c = Case("band-vlbw-neonate-low", "Thistlewood", ["Baby Boy"], "male", "2026-11-24", "2026-11-24T02:30:00-05:00")
(c.lab("ga", 30, "2026-11-24T02:30:00-05:00").lab("bw", 1350, "2026-11-24T02:30:00-05:00")
 .lab("ica", 0.99, NEO_R).lab("weight", 1.32, W))
write(c, f'''
description = "Boy born at 30 weeks weighing 1350 g (birth weight recorded, LOINC 8339-4), day 6: very-low-birth-weight band (Vuralli 2019, Int J Pediatr 2019:4318075: ionized Ca < 1.0 mmol/L under 1500 g). Ionized 0.99 is below it: hypocalcemia, asymptomatic, so oral calcium is proposed (a term neonate at 0.99 would also be low)."
now = "{NOW}"
# data-required: with only a calcium (and a weight) the causes cannot be told apart (tied leading causes), so the work-up asks for tests while treatment is proposed.
status = "data-required"
# 0.99 <= 1.0, the band's mild grade (Tayside mild <= 1.0, at the band's lower limit): moderate, as a term neonate at 0.99 would be.
severity = "moderate"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
''')

c = Case("band-vlbw-neonate-normal", "Thistlewood", ["Baby Girl"], "female", "2026-11-24",
         "2026-11-24T02:34:00-05:00")
(c.lab("ga", 30, "2026-11-24T02:34:00-05:00").lab("bw", 1290, "2026-11-24T02:34:00-05:00")
 .lab("ica", 1.00, NEO_R).lab("weight", 1.27, W))
write(c, f'''
description = "Girl born at 30 weeks weighing 1290 g (twin of band-vlbw-neonate-low), day 6: ionized 1.00 mmol/L is at the very-low-birth-weight lower limit 1.0 (Vuralli 2019): normal. Had the term-neonate band been used (lower 1.10, mild grade 1.0) she would be low, moderate."
now = "{NOW}"
status = "success"
severity = "none"
proposals_absent = ["oral-calcium", "calcium-bolus"]
''')

c = Case("band-term-neonate-low", "Ravensdale", ["Baby Girl"], "female", "2026-11-20")
c.lab("ga", 39, "2026-11-20T08:00:00-05:00").lab("ica", 1.09, NEO_R).lab("weight", 3.5, W)
write(c, f'''
description = "Girl born at 39 weeks, day 10: term-neonate band, ionized lower limit 1.10 mmol/L. Ionized 1.09 is below it and above the mild grade 1.0: low. (The very-low-birth-weight band, lower 1.0, would call it normal.)"
now = "{NOW}"
# data-required: with only a calcium (and a weight) the causes cannot be told apart (tied leading causes), so the work-up asks for tests while treatment is proposed.
status = "data-required"
severity = "low"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
''')

c = Case("band-term-neonate-normal-28-days", "Ravensdale", ["Baby Boy"], "male", "2026-11-02",
         "2026-11-02T03:10:00-05:00")
c.lab("ica", 1.10, NEO_R).lab("weight", 4.1, W)
write(c, f'''
description = "Boy born 2026-11-02 03:10, 28 completed days old at the 07:40 draw (28 days 4 h 30 min) (the last day of the neonatal bands, which end before 29 days): ionized 1.10 mmol/L is at the term-neonate lower limit 1.10: normal. (The infant band, lower 1.11, would call it low: see band-infant-29-days-ionized-low.)"
now = "{NOW}"
status = "success"
severity = "none"
proposals_absent = ["oral-calcium", "calcium-bolus"]
''')

c = Case("band-infant-29-days-ionized-low", "Ravensdale", ["Wilhelmina"], "female", "2026-11-01",
         "2026-11-01T05:20:00-05:00")
c.lab("ica", 1.10, NEO_R).lab("weight", 4.0, W)
write(c, f'''
description = "Girl born 2026-11-01 05:20, 29 completed days old at the 07:40 draw (29 days 2 h 20 min): infant band (29 days to under 2 years), ionized lower limit 1.11 mmol/L. The same 1.10 that is normal at 28 days (band-term-neonate-normal-28-days) is low here, above the mild grade 1.0: low."
now = "{NOW}"
# data-required: with only a calcium (and a weight) the causes cannot be told apart (tied leading causes), so the work-up asks for tests while treatment is proposed.
status = "data-required"
severity = "low"
proposals = ["oral-calcium"]
''')

c = Case("band-infant-total-low", "Greywell", ["Osric"], "male", "2025-09-18")
c.lab("tca_mg", 8.9, R).lab("weight", 9.8, W)
write(c, f'''
description = "Boy 14 mo, total Ca 8.9 mg/dL with no albumin: infant band, total lower limit 2.245 mmol/L (9.0 mg/dL). 8.9 mg/dL is low (severity low, above the mild grade 2.0); as an unadjusted total it needs an albumin and an ionized Ca (data-required). The child band (lower 2.20) would call it normal."
now = "{NOW}"
# 8.9 mg/dL x 10 / 40.078 = 2.2207 mmol/L < 2.245.
status = "data-required"
severity = "low"
proposals = ["oral-calcium"]
''')

c = Case("band-infant-total-normal", "Greywell", ["Primrose"], "female", "2025-09-18")
c.lab("tca_mg", 9.0, R).lab("weight", 9.2, W)
write(c, f'''
description = "Girl 14 mo, total Ca 9.0 mg/dL with no albumin: at the infant band's lower limit (9.0 mg/dL = 2.245 mmol/L, inclusive): normal, though still data-required as an unadjusted total."
now = "{NOW}"
# 9.0 mg/dL x 10 / 40.078 = 2.2456 mmol/L >= 2.245.
status = "data-required"
severity = "none"
proposals_absent = ["oral-calcium"]
''')

c = Case("band-child-total-low", "Penhallow", ["Ida"], "female", "2019-05-06")
c.lab("tca", 2.19, R).lab("weight", 23.0, W)
write(c, f'''
description = "Girl 7 y 6 mo, total Ca 2.19 mmol/L with no albumin: child band, total lower limit 2.20 mmol/L: low (above the mild grade 2.0: severity low), data-required as an unadjusted total. The adolescent band (lower 2.095) would call it normal."
now = "{NOW}"
status = "data-required"
severity = "low"
proposals = ["oral-calcium"]
''')

c = Case("band-child-total-normal", "Penhallow", ["Bertram"], "male", "2019-05-06")
c.lab("tca", 2.20, R).lab("weight", 24.0, W)
write(c, f'''
description = "Boy 7 y 6 mo, total Ca 2.20 mmol/L with no albumin: at the child band's lower limit 2.20: normal (data-required as an unadjusted total). The infant band (lower 2.245) would call it low."
now = "{NOW}"
status = "data-required"
severity = "none"
proposals_absent = ["oral-calcium"]
''')

c = Case("band-adolescent-total-low", "Kilbride", ["Declan"], "male", "2011-07-21")
c.lab("tca_mg", 8.3, R).lab("weight", 56.0, W)
write(c, f'''
description = "Boy 15 y 4 mo, total Ca 8.3 mg/dL with no albumin: adolescent band, total lower limit 2.095 mmol/L (8.4 mg/dL): low, above the mild grade 2.0 (severity low), data-required as an unadjusted total."
now = "{NOW}"
# 8.3 mg/dL x 10 / 40.078 = 2.0710 mmol/L < 2.095 and > 2.0.
status = "data-required"
severity = "low"
proposals = ["oral-calcium"]
''')

c = Case("band-adolescent-total-normal", "Kilbride", ["Maeve"], "female", "2011-07-21")
c.lab("tca_mg", 8.4, R).lab("weight", 54.0, W)
write(c, f'''
description = "Girl 15 y 4 mo, total Ca 8.4 mg/dL with no albumin: at the adolescent lower limit (8.4 mg/dL = 2.095 mmol/L, inclusive): normal (data-required as an unadjusted total). The child band (lower 2.20) would call it low."
now = "{NOW}"
# 8.4 mg/dL x 10 / 40.078 = 2.0959 mmol/L >= 2.095.
status = "data-required"
severity = "none"
proposals_absent = ["oral-calcium"]
''')

# Grades where the bands differ: ionized severe is <= 0.7 in neonates and <= 0.9 from 29 days.
c = Case("band-term-neonate-grade-mild", "Ashdown", ["Baby Boy"], "male", "2026-11-27", "2026-11-27T16:45:00-05:00")
c.lab("ica", 0.71, NEO_R).lab("weight", 3.6, W)
write(c, f'''
description = "Boy day 2 (term-neonate band), ionized 0.71 mmol/L, asymptomatic: at or below the mild grade 1.0 but above the neonatal severe grade 0.7: moderate, oral calcium. (From 29 days the severe grade is 0.9 and this value would be high.)"
now = "{NOW}"
# data-required: with only a calcium (and a weight) the causes cannot be told apart (tied leading causes), so the work-up asks for tests while treatment is proposed.
status = "data-required"
severity = "moderate"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
''')

c = Case("band-term-neonate-grade-severe", "Ashdown", ["Baby Girl"], "female", "2026-11-27",
         "2026-11-27T16:49:00-05:00")
c.lab("ica", 0.70, NEO_R).lab("weight", 3.4, W)
write(c, f'''
description = "Girl day 2 (term-neonate band), ionized 0.70 mmol/L, asymptomatic: at the neonatal severe grade 0.7 (at or below): high, so IV calcium is proposed."
now = "{NOW}"
# data-required: with only a calcium (and a weight) the causes cannot be told apart (tied leading causes), so the work-up asks for tests while treatment is proposed.
status = "data-required"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
[doses.calcium-bolus]
# Neonate: 3.4 kg x 100 mg/kg = 340 mg calcium gluconate.
min = 339.0
max = 341.0
''')

c = Case("band-child-grade-severe", "Marchbank", ["Florian"], "male", "2020-01-12")
c.lab("ica", 0.90, R).lab("weight", 22.0, W)
write(c, f'''
description = "Boy 6 y 10 mo, ionized 0.90 mmol/L, asymptomatic: at the child severe grade 0.9 (at or below): high, IV calcium. (A neonate at 0.90 would be moderate: the neonatal severe grade is 0.7.)"
now = "{NOW}"
# data-required: with only a calcium (and a weight) the causes cannot be told apart (tied leading causes), so the work-up asks for tests while treatment is proposed.
status = "data-required"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
[doses.calcium-bolus]
# 22 kg x 50 mg/kg = 1100 mg, capped at 1000 mg.
min = 1000.0
max = 1000.0
''')

c = Case("band-child-grade-mild", "Marchbank", ["Clementine"], "female", "2020-01-12")
c.lab("ica", 0.91, R).lab("weight", 21.0, W)
write(c, f'''
description = "Girl 6 y 10 mo, ionized 0.91 mmol/L, asymptomatic: above the severe grade 0.9, at or below the mild grade 1.0: moderate, oral calcium, no IV calcium."
now = "{NOW}"
# data-required: with only a calcium (and a weight) the causes cannot be told apart (tied leading causes), so the work-up asks for tests while treatment is proposed.
status = "data-required"
severity = "moderate"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
''')

c = Case("band-term-neonate-total-grade", "Ashdown", ["Cosimo"], "male", "2026-11-22")
c.lab("tca", 1.80, NEO_R).lab("weight", 3.5, W)
write(c, f'''
description = "Boy day 8 (term-neonate band), total Ca 1.80 mmol/L with no albumin: at the neonatal mild grade 1.8, above the neonatal severe grade 1.6: moderate (from 29 days 1.8 is the severe total grade and would be high); data-required as an unadjusted total."
now = "{NOW}"
status = "data-required"
severity = "moderate"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
''')

# ---------------------------------------------------------------------------
# IV speed in elemental calcium, phosphate with ionized calcium only, vitamin D with calcium
# (issue 13, sections 3, 4 and 7). Expectations from the sources named in each case, worked
# by hand before running: US calcium gluconate label (9.3 mg Ca/mL, <= 100 mg/min in children);
# Hospira calcium chloride label (27.3 mg Ca/mL, <= 1 mL/min); BNFC (0.5 mL/kg over >= 5 min);
# KDOQI pediatric CKD bone guideline 2005 (6.2, 7.1-7.5, 9A.1.a); Munns 2016 rickets consensus;
# SPEG; IOM 2011.
# ---------------------------------------------------------------------------

LAB["alb"] = ("1751-7", "Albumin [Mass/volume] in Serum or Plasma", "Albumin", "g/dL")  # service/rules/codes.toml
CONDITION["aki"] = (SCT, "14669001", "Acute renal failure syndrome")  # acute_kidney_injury (cause-codes.toml)
D25_DRAW = "2026-11-27T08:30:00-05:00"  # a 25-OH vitamin D drawn earlier in the week

c = Case("iv-speed-neonate-central-chloride", "Ashgrove", ["Baby Girl"], "female", "2026-11-20",
         "2026-11-20T03:10:00-05:00")
c.lab("ica", 0.66, R).symptom("seizure", SZ).lab("weight", 3.2, W).lab("ga", 39, W)
c.access = "central"
write(c, f'''
description = "Term girl, 10 days old, 3.2 kg, ionized Ca 0.66 mmol/L with a seizure, central line: the calcium chloride alternative is given over a duration that keeps its elemental calcium per minute no faster than the gluconate bolus allows (US calcium gluconate label: 9.3 mg Ca/mL, at most 100 mg/min in children including neonates; BNFC 0.5 mL/kg over at least 5 min = 0.93 mg Ca/kg/min; Hospira calcium chloride label: 27.3 mg Ca/mL, a maximum of 1 mL/min, which is not a duration)."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "calcium-chloride"]
# 25-OH vitamin D not measured: a maintenance vitamin D with the calcium, a liquid, so the drop/mL warning.
safety_present = ["vitamin-d-liquid"]
safety_absent = ["extravasation", "arterial-line", "phosphate-high", "caxp", "weight"]
[doses.calcium-bolus]
# US label under 1 month, low end: 3.2 kg x 100 mg/kg = 320 mg = 3.2 mL = 29.76 mg elemental Ca.
min = 319.0
max = 321.0
[rates.calcium-bolus]
# Ceiling: the lower of 9.3 mg Ca/min and 0.93 mg/kg/min x 3.2 kg = 2.976 mg Ca/min -> 29.76 / 2.976
# = 10 min (the 10-min shortest too): 320 mg / 10 min = 32 mg/min of the salt.
min = 31.9
max = 32.1
[doses.calcium-chloride]
# AHA PALS 20 mg/kg: 3.2 x 20 = 64 mg = 0.64 mL x 27.3 = 17.47 mg elemental Ca.
min = 63.9
max = 64.1
[rates.calcium-chloride]
# At the label's 1 mL/min alone: 0.64 mL in 0.64 min = 27.3 mg Ca/min (the old "over at least 1 min":
# 17.47 mg Ca/min, 5.9 x the gluconate's 2.976). Held to 2.976 mg Ca/min: at least 5.87 min, and the
# 10-min shortest duration -> 10 min: 64 mg / 10 = 6.4 mg/min of the salt = 1.75 mg Ca/min.
min = 6.3
max = 6.5
''')

c = Case("phosphate-high-aki-ionized-only", "Pembury", ["Lucan"], "male", "2020-05-11")
(c.lab("ica", 0.86, R).symptom("seizure", SZ).lab("weight", 20.0, W).lab("phos", 3.6, R).lab("creat", 180, R)
 .condition("aki", "2026-11-28T14:00:00-05:00"))
c.access = "peripheral"
write(c, f'''
description = "Boy 6 y 6 mo with acute kidney injury, ionized Ca 0.86 mmol/L with a seizure and phosphate 3.6 mmol/L, twice the upper limit 1.80 of the 1-16 y range, and no total calcium: the IV bolus and infusion carry the high-phosphate warning (calcium and phosphate precipitate; KDOQI pediatric 7.5: control phosphorus; calcium gluconate label 5.3 calcinosis); the calcium x phosphate product cannot be computed; calcitriol is deferred while the phosphate is high (KDOQI pediatric 9A.1.a)."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
proposals_absent = ["calcium-chloride", "oral-calcium", "calcitriol", "cholecalciferol"]
safety_present = ["phosphate-high", "extravasation", "calcitriol-deferred"]
safety_absent = ["caxp", "precipitation", "weight", "vitamin-d-liquid"]
[doses.calcium-bolus]
# 20 kg x 50 mg/kg = 1000 mg (the 10 mL cap exactly) = 93 mg elemental Ca.
min = 999.0
max = 1001.0
[rates.calcium-bolus]
# 93 mg Ca at 9.3 mg Ca/min = 10 min (0.93 x 20 = 18.6 is higher): 1000 / 10 = 100 mg/min.
min = 99.9
max = 100.1
''')

c = Case("phosphate-high-ckd-binder-with-meals", "Thistlewood", ["Maren"], "female", "2017-03-02")
(c.lab("ica", 1.02, R).lab("weight", 28.0, W).lab("phos", 2.9, R).lab("creat", 220, R).lab("pth", 30.0, R)
 .condition("ckd", "2024-01-10"))
write(c, f'''
description = "Girl 9 y 8 mo with chronic kidney disease, ionized Ca 1.02 mmol/L without symptoms, phosphate 2.9 mmol/L (1.6 x the upper limit 1.80): oral calcium carbonate is proposed as the phosphate binder, given with meals (KDOQI pediatric 6.2: calcium-based binders first; 6.5: at most 2500 mg/day), with the high-phosphate warning; calcitriol is deferred until the phosphate is below the age limit (KDOQI pediatric 9A.1.a)."
now = "{NOW}"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus", "calcitriol", "cholecalciferol"]
safety_present = ["phosphate-high", "calcitriol-deferred"]
safety_absent = ["caxp", "weight", "extravasation"]
[doses.oral-calcium]
# ZA STG 50 mg/kg/day: 28 x 50 = 1400 mg/day (under 2500, KDOQI; and 3000, IOM 9-18 y) / 4 = 350 mg per
# dose. Tablets from 6 y: 500 mg is 43% above, 2 x 200 mg 14% above (> 10%), so the liquid: 3.5 mL of
# 100 mg/mL.
min = 3.5
max = 3.5
''')

c = Case("caxp-albumin-adjusted-adolescent", "Kettleby", ["Sorcha"], "female", "2013-07-15")
(c.lab("ica", 0.85, R).lab("tca_mg", 8.0, R).lab("alb", 2.0, R).lab("phos", 1.94, R).lab("weight", 45.0, W))
c.access = "peripheral"
write(c, f'''
description = "Girl 13 y 4 mo, ionized Ca 0.85 mmol/L, total calcium 8.0 mg/dL with albumin 2.0 g/dL drawn with it, phosphate 1.94 mmol/L (6.0 mg/dL, above 1.80): the calcium x phosphate product uses the albumin-adjusted total calcium (KDOQI pediatric 7.1-7.3 state calcium as corrected total calcium): 9.6 x 6.0 = 58 mg2/dL2, above the < 55 for adolescents older than 12 (KDOQI 7.5); unadjusted it would be 48 and stay silent."
now = "{NOW}"
proposals = ["calcium-bolus"]
safety_present = ["caxp", "phosphate-high", "extravasation"]
safety_absent = ["weight", "precipitation"]
# Adjusted Ca = 8.0 + 0.8 x (4.0 - 2.0) = 9.6 mg/dL (calcium.toml albumin_adjustment); phosphate
# 1.94 mmol/L x 30.974 / 10 = 6.01 mg/dL; 9.6 x 6.01 = 57.7 > 55.
[doses.calcium-bolus]
# 45 kg x 50 mg/kg = 2250 mg, capped at 1000 mg.
min = 1000.0
max = 1000.0
''')

c = Case("vitamin-d-with-oral-calcium-25oh-unknown", "Harbottle", ["Emrys"], "male", "2022-08-09")
c.lab("ica", 1.05, R).lab("weight", 16.0, W)
write(c, f'''
description = "Boy 4 y 3 mo, ionized Ca 1.05 mmol/L without symptoms, 25-OH vitamin D not measured: oral calcium with feeds or meals (ZA STG 'given with meals') paired with vitamin D (Munns 2016 global consensus pairs cholecalciferol with calcium); while 25-OH vitamin D is unknown, the maintenance dose 600 IU/day from 1 year (IOM 2011 RDA), shown in IU and in mL of the 3000 IU/mL colecalciferol solution (UK SmPC, emc 8091: 0.2 mL), with the drop/mL warning."
now = "{NOW}"
proposals = ["oral-calcium", "cholecalciferol"]
proposals_absent = ["calcium-bolus", "calcitriol"]
safety_present = ["vitamin-d-liquid"]
safety_absent = ["phosphate-high", "caxp", "weight"]
[doses.oral-calcium]
# 16 kg x 50 = 800 mg/day / 4 = 200 mg per dose; under 6 y the liquid: 2 mL of 100 mg/mL.
min = 2.0
max = 2.0
[doses.cholecalciferol]
# 600 IU once daily = 600 / 3000 IU per mL (SmPC emc 8091) = 0.2 mL, on the 0.1 mL step.
min = 600.0
max = 600.0
''')

c = Case("vitamin-d-deficient-iv-calcium-first", "Larchmere", ["Ottilie"], "female", "2026-03-25")
c.lab("ica", 0.80, R).symptom("seizure", SZ).lab("weight", 8.0, W).lab("vitd25", 8.0, D25_DRAW)
c.access = "peripheral"
write(c, f'''
description = "Girl 8 mo, ionized Ca 0.80 mmol/L with a seizure and 25-OH vitamin D 8 ng/mL (20 nmol/L, deficient below 30 nmol/L, Munns 2016): IV calcium first, and the cholecalciferol treatment dose is proposed with it (SPEG 6 months-12 years 3000-6400 IU/day, low end, 90 days), the plan stating the step to oral calcium with vitamin D."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "cholecalciferol"]
proposals_absent = ["oral-calcium"]
safety_present = ["extravasation", "vitamin-d-liquid"]
safety_absent = ["phosphate-high", "caxp", "weight"]
[doses.calcium-bolus]
# 8 kg x 50 mg/kg = 400 mg.
min = 399.0
max = 401.0
[doses.cholecalciferol]
# 3000 IU once daily = 3000 / 3000 IU per mL (SmPC emc 8091) = 1 mL.
min = 3000.0
max = 3000.0
''')

# ---------------------------------------------------------------------------
# Site cases (tests/cases-site, run with --rules tests/cases-site/site-rules.toml).
# ---------------------------------------------------------------------------

D125 = {"system": LOCAL_LAB, "code": "VITD125", "display": "1,25-dihydroxyvitamin D, serum (send-out)"}
WEEK = "2026-11-27T08:30:00-05:00"  # send-out vitamin D results drawn earlier in the week

c = Case("vddr-type1-leads", "Sorensby", ["Elodie"], "female", "2025-06-02")
(c.lab("ica", 0.96, R).lab("phos", 0.8, R).lab("pth", 22.0, R).lab("alp", 980, R).lab("vitd25", 34.0, WEEK)
 .local_lab(D125, "1,25-dihydroxyvitamin D", 8, "pg/mL", WEEK).lab("weight", 9.4, W))
write(c, f'''
description = "Girl 17 mo with rickets: ionized Ca 0.96 mmol/L (mild: moderate), phosphate 0.8 mmol/L (low), PTH 22 pmol/L (high), alkaline phosphatase 980 U/L (high), 25-OH vitamin D 34 ng/mL (sufficient) and 1,25-dihydroxyvitamin D 8 pg/mL under the site's local code VITD125 (low): vitamin D-dependent rickets type 1 (1-alpha-hydroxylase defect) leads; nutritional vitamin D deficiency is ruled out by the normal 25-OH D and hypoparathyroidism by the high PTH. Calcitriol is proposed for specialist dosing."
now = "{NOW}"
# 8 pg/mL x 2.4 = 19.2 pmol/L, below the 0-16 y interval 57.6-206.4 pmol/L (lab-ranges.toml);
# 34 ng/mL x 2.496 = 84.9 nmol/L, sufficient (> 50 nmol/L, Munns 2016); PTH 22 > 6.25 pmol/L (1-10 y);
# phosphate 0.8 < 0.90 mmol/L (1-16 y). Type 1: low 1,25 +3 (strong_for), normal 25-OH D +1, high PTH +1 = 5: likely.
# Type 2 stays possible behind type 1: a low 1,25-(OH)2D argues strongly against end-organ
# resistance (-3) without excluding it, since the published tables disagree (Merck: normal or
# high; a rickets-types table, PMC7335963 Table 2: normal or low); -3 + 1 + 1 = -1.
severity = "moderate"
leading_cause = "vddr_type1"
causes_ruled_out = ["vitamin_d_deficiency", "hypoparathyroidism"]
proposals = ["oral-calcium", "calcitriol"]
proposals_absent = ["cholecalciferol"]
''', SITE)

c = Case("vddr-type2-leads", "Sorensby", ["Anselm"], "male", "2024-02-14")
(c.lab("ica", 0.95, R).lab("phos", 0.8, R).lab("pth", 30.0, R).lab("alp", 1150, R).lab("vitd25", 38.0, WEEK)
 .local_lab(D125, "1,25-dihydroxyvitamin D", 310, "pg/mL", WEEK).lab("weight", 13.0, W))
write(c, f'''
description = "Boy 2 y 9 mo with rickets: ionized Ca 0.95 mmol/L (mild: moderate), phosphate 0.8 mmol/L (low), PTH 30 pmol/L (high), alkaline phosphatase 1150 U/L (high), 25-OH vitamin D 38 ng/mL (sufficient) and 1,25-dihydroxyvitamin D 310 pg/mL under the local code VITD125 (high): vitamin D-dependent rickets type 2 (end-organ resistance) leads; type 1 and nutritional deficiency are ruled out."
now = "{NOW}"
# 310 pg/mL x 2.4 = 744 pmol/L, above 206.4 pmol/L; 38 ng/mL x 2.496 = 94.8 nmol/L, sufficient; PTH 30 > 6.25 pmol/L.
# Type 2: high 1,25 +3, normal 25-OH D +1, high PTH +1 = 5: likely.
severity = "moderate"
leading_cause = "vddr_type2"
causes_ruled_out = ["vitamin_d_deficiency", "vddr_type1", "hypoparathyroidism"]
# Calcitriol for specialist dosing (treatment.toml, calcitriol_for includes vddr_type2).
proposals = ["oral-calcium", "calcitriol"]
proposals_absent = ["cholecalciferol"]
''', SITE)

c = Case("vddr-type1-ruled-out", "Trevanion", ["Rosalie"], "female", "2023-11-20")
(c.lab("ica", 0.97, R).lab("pth", 18.0, R).lab("vitd25", 10.0, WEEK)
 .local_lab(D125, "1,25-dihydroxyvitamin D", 95, "pg/mL", WEEK).lab("weight", 13.5, W))
write(c, f'''
description = "Girl 3 y with nutritional rickets: ionized Ca 0.97 mmol/L (mild: moderate), PTH 18 pmol/L (high), 25-OH vitamin D 10 ng/mL (deficient) and 1,25-dihydroxyvitamin D 95 pg/mL under the local code VITD125 (high, as it can be in nutritional deficiency once PTH is raised): the 1-alpha-hydroxylase defect is ruled out and nutritional vitamin D deficiency leads, with cholecalciferol proposed."
now = "{NOW}"
# 95 pg/mL x 2.4 = 228 pmol/L, above 206.4: 'normal_or_high' rules type 1 out;
# 10 ng/mL x 2.496 = 25.0 nmol/L, deficient (< 30 nmol/L, Munns 2016).
severity = "moderate"
leading_cause = "vitamin_d_deficiency"
causes_ruled_out = ["vddr_type1"]
proposals = ["oral-calcium", "cholecalciferol"]
''', SITE)

c = Case("vddr-type2-unlikely", "Trevanion", ["Caspar"], "male", "2023-11-20")
(c.lab("ica", 0.97, R).lab("pth", 16.0, R)
 .local_lab(D125, "1,25-dihydroxyvitamin D", 60, "pg/mL", WEEK).lab("weight", 14.0, W))
write(c, f'''
description = "Boy 3 y: ionized Ca 0.97 mmol/L (mild: moderate), PTH 16 pmol/L (high) and 1,25-dihydroxyvitamin D 60 pg/mL under the local code VITD125 (within the interval); no 25-OH vitamin D yet. End-organ resistance (type 2) needs a high 1,25-(OH)2D, so it is unlikely; a 1,25-(OH)2D that is not low rules out type 1."
now = "{NOW}"
# 60 pg/mL x 2.4 = 144 pmol/L, within 57.6-206.4 (lab-ranges.toml); PTH 16 > 6.25 pmol/L (1-10 y).
# Type 2 (causes.toml weighing): 'low_or_normal' 1,25 strong_against -3, high PTH for +1 = -2 <= -2: unlikely.
severity = "moderate"
causes_unlikely = ["vddr_type2"]
causes_ruled_out = ["vddr_type1"]
''', SITE)

c = Case("safety-saline-diluent", "Halloran", ["Niamh"], "female", "2019-12-01")
c.lab("ica", 0.84, R).symptom("seizure", SZ).lab("weight", 22.5, W)
c.access = "central"
write(c, f'''
description = "Girl 6 y 11 mo, ionized Ca 0.84 mmol/L (severe: high) with a seizure, central line, at a site whose bolus diluent is 0.9% sodium chloride (site-rules.toml) while dextrose stays the preferred diluent: the low-severity saline-diluent notice fires; no other check does."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "calcium-chloride"]
safety_present = ["saline-diluent"]
safety_absent = {absent("saline-diluent")}
[doses.calcium-bolus]
# 22.5 kg x 50 mg/kg = 1125 mg, capped at 1000 mg; the diluent does not change the dose.
min = 1000.0
max = 1000.0
''', SITE)

# ---------------------------------------------------------------------------
# Preterm and very small babies (issue 13, section 1): dosing weight judged
# against gestation (UK-WHO preterm weight data, growth.toml), low weights of
# unknown gestation dosed with a caution, unit slips named; the neonatal band
# chosen by birth weight (Vuralli 2019); the infusion's fluid load.
# Written to tests/cases.
# ---------------------------------------------------------------------------

PT_BIRTH = "2026-11-27T05:10:00-05:00"  # 3 days 2 h 30 min before the 07:40 draw: day of life 4

c = Case("preterm-27wk-1kg-day3-seizure", "Fairweather", ["Baby Boy"], "male", "2026-11-27", PT_BIRTH)
(c.lab("ga", 27, PT_BIRTH).lab("bw", 980, PT_BIRTH).lab("ica", 0.62, R).symptom("seizure", SZ)
 .lab("weight", 1.0, W))
write(c, f'''
description = "Boy born at 27 weeks weighing 980 g, 3 days old, seizing, ionized Ca 0.62 mmol/L: very-low-birth-weight band (Vuralli 2019, Int J Pediatr 2019:4318075: < 1.0 mmol/L under 1500 g), at or below the neonatal severe grade 0.7 (NHS Tayside): high. His 1.0 kg is judged against the UK-WHO preterm weight data at 27 3/7 weeks postmenstrual age (rcpchgrowth 4.6.5: z -0.46), not the term chart (z below -5), so the IV bolus and infusion are proposed. The infusion is 40.8 mL/kg/day, 68% of the day-4 fluid allowance of 60 mL/kg/day (ESPGHAN/ESPEN/ESPR/CSPEN 2018, term lower end): a fluid-load warning."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["fluid-load"]
safety_absent = ["weight", "weight-confirm"]
[proposal_text]
# 1.0 kg x 17 mg/kg/h (US label, neonates) = 17 mg/h at 10 mg/mL = 1.7 mL/h; x 24 / 1.0 kg = 40.8 mL/kg/day; / 60 = 68%.
calcium-infusion = ["1.7 mL/h x 24 h / 1 kg = 40.8 mL/kg/day", "68% of the day-4 fluid allowance of 60 mL/kg/day"]
[doses.calcium-bolus]
# 1.0 kg x 100 mg/kg (US label, neonates, low end) = 100 mg calcium gluconate.
min = 99.0
max = 101.0
''')

c = Case("neonate-1100g-gestation-unknown-seizure", "Fairweather", ["Baby Girl"], "female", "2026-11-27", PT_BIRTH)
c.lab("ica", 0.65, R).symptom("seizure", SZ).lab("weight", 1.1, W)
write(c, f'''
description = "Girl 3 days old weighing 1.1 kg, gestational age and birth weight not recorded, seizing with ionized Ca 0.65 mmol/L (term-neonate band, severe grade 0.7: high). 1.1 kg is far below the WHO term chart (z below -5) but possible for a baby born preterm (UK-WHO preterm weight data), so the emergency bolus is proposed on 1.1 kg with a WARNING to confirm the weight and record the gestation, never a silent refusal."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["weight-confirm", "fluid-load"]
safety_absent = ["weight"]
[safety_text]
weight-confirm = ["the gestational age at birth is not recorded", "born preterm at", "Confirm the weight"]
[doses.calcium-bolus]
# 1.1 kg x 100 mg/kg (US label, neonates, low end) = 110 mg calcium gluconate.
min = 109.0
max = 111.0
''')

c = Case("neonate-weight-unit-slip-1100-kg", "Fairweather", ["Baby Boy"], "male", "2026-11-27", PT_BIRTH)
c.lab("ica", 0.65, R).symptom("seizure", SZ).lab("weight", 1100, W)
write(c, f'''
description = "Boy 3 days old, seizing with ionized Ca 0.65 mmol/L (severe: high), whose weight is recorded as 1100 kg: grams entered as kilograms (1100 g = 1.1 kg is possible for a newborn). No dose is proposed on it, and the weight check says it is a unit slip."
now = "{NOW}"
severity = "high"
proposals_absent = ["calcium-bolus", "calcium-infusion", "oral-calcium"]
safety_present = ["weight"]
safety_absent = ["weight-confirm"]
[safety_text]
weight = ["Unit slip", "grams entered as kilograms", "1.1 kg would be plausible"]
''')

c = Case("late-preterm-35wk-2600g-ionized-1.05-low", "Penhallow", ["Baby Girl"], "female", "2026-11-25",
         "2026-11-25T09:20:00-05:00")
(c.lab("ga", 35, "2026-11-25T09:20:00-05:00").lab("bw", 2600, "2026-11-25T09:20:00-05:00")
 .lab("ica", 1.05, R).lab("weight", 2.52, W))
write(c, f'''
description = "Girl born at 35 weeks weighing 2600 g, day 5, ionized Ca 1.05 mmol/L: a late-preterm baby of normal birth weight is judged on the limits for term and preterm infants over 1500 g (Vuralli 2019, Int J Pediatr 2019:4318075: ionized < 1.1 mmol/L), not the very-low-birth-weight limit (< 1.0): low, above the mild grade 1.0, asymptomatic: oral calcium."
now = "{NOW}"
severity = "low"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
safety_absent = ["weight", "weight-confirm"]
''')

c = Case("vlbw-29wk-1200g-ionized-1.05-normal", "Penhallow", ["Baby Boy"], "male", "2026-11-25",
         "2026-11-25T09:40:00-05:00")
(c.lab("ga", 29, "2026-11-25T09:40:00-05:00").lab("bw", 1200, "2026-11-25T09:40:00-05:00")
 .lab("ica", 1.05, R).lab("weight", 1.16, W))
write(c, f'''
description = "Boy born at 29 weeks weighing 1200 g, day 5, ionized Ca 1.05 mmol/L: very low birth weight, so the limit is ionized < 1.0 mmol/L (Vuralli 2019, Int J Pediatr 2019:4318075): not low, nothing proposed. (The 35-week, 2600 g girl at the same value is low.)"
now = "{NOW}"
severity = "none"
proposals_absent = ["oral-calcium", "calcium-bolus"]
''')

c = Case("preterm-34wk-birth-weight-unknown-ionized-1.00-low", "Penhallow", ["Baby Girl"], "female", "2026-11-24",
         "2026-11-24T02:34:00-05:00")
c.lab("ga", 34, "2026-11-24T02:34:00-05:00").lab("ica", 1.00, NEO_R).lab("weight", 2.0, W)
write(c, f'''
description = "Girl born at 34 weeks, day 6, birth weight not recorded, ionized Ca 1.00 mmol/L. Vuralli 2019 sets the limit by birth weight (< 1.1 mmol/L for preterm over 1500 g, < 1.0 under 1500 g); without a birth weight the higher limit is used (project decision: no low value is missed; the basis says so): low, at the mild grade 1.0 (NHS Tayside): moderate, oral calcium."
now = "{NOW}"
severity = "moderate"
proposals = ["oral-calcium"]
''')

c = Case("neonate-term-day1-infusion-fluid-load", "Penhallow", ["Baby Boy"], "male", "2026-11-30",
         "2026-11-30T01:15:00-05:00")
(c.lab("ga", 39, "2026-11-30T01:15:00-05:00").lab("bw", 3200, "2026-11-30T01:15:00-05:00")
 .lab("ica", 0.6, R).symptom("seizure", SZ).lab("weight", 3.2, W))
write(c, f'''
description = "Boy born at 39 weeks weighing 3200 g, 6 hours old (day of life 1), seizing with ionized Ca 0.60 mmol/L (severe: high): bolus and infusion proposed. The infusion is 40.5 mL/kg/day, 101% of the day-1 fluid allowance of 40 mL/kg/day (ESPGHAN/ESPEN/ESPR/CSPEN 2018: term neonates day 1 40-60 mL/kg/day): a fluid-load warning suggesting the calcium be counted within, or added to, the maintenance fluid."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["fluid-load"]
safety_absent = ["weight", "weight-confirm"]
[proposal_text]
# 3.2 kg x 17 mg/kg/h = 54.4 mg/h at 10 mg/mL = 5.44 mL/h, rounded to the pump's 0.1 mL/h = 5.4 mL/h;
# 5.4 x 24 / 3.2 = 40.5 mL/kg/day; / 40 = 101%.
calcium-infusion = ["5.4 mL/h x 24 h / 3.2 kg = 40.5 mL/kg/day", "101% of the day-1 fluid allowance of 40 mL/kg/day"]
''')

# ---------------------------------------------------------------------------
# Specimen problems (issue 13, section 5): Specimen.condition (HL7 v2 table 0493), the
# result's own flags and notes, read as service/rules/specimen.toml says. Codes: v2-0493 CLOT
# (Clotted) and HEM (Hemolyzed), verified in HL7 Terminology (THO) CodeSystem v2-0493.
# Policy sources: CLSI C31-A2 and laboratory test directories (a clotted sample is rejected for
# ionized calcium: the ionized result is set aside); Agana et al. J Appl Lab Med 2024 and Yang and
# Tacker Clin Chim Acta 2025 (hemolysis lowers ionized calcium: used, with a named caution).
# ---------------------------------------------------------------------------

V2_0493 = "http://terminology.hl7.org/CodeSystem/v2-0493"
LAB["alb"] = ("1751-7", "Albumin [Mass/volume] in Serum or Plasma", "Albumin", "g/dL")


def specimen(case, condition=None, where="contained", reference=None, note=None):
    """Give the Observation added last a specimen: a contained Specimen, a Bundle entry, or a
    reference to a Specimen that is not in the request (where="elsewhere"), or none
    (where="none"); optionally a note on the result."""
    obs = case.entries[-1]["resource"]
    spec = {
        "resourceType": "Specimen",
        "status": "available",
        "type": {"text": "Whole blood, heparinised syringe"},
        "subject": {"reference": case.subject},
        "collection": {"collectedDateTime": obs["effectiveDateTime"]},
    }
    if condition:
        code, display = condition
        spec["condition"] = [{"coding": [{"system": V2_0493, "code": code, "display": display}]}]
    if where == "contained":
        spec["id"] = "spec"
        obs["contained"] = [spec]
        obs["specimen"] = {"reference": "#spec"}
    elif where == "bundle":
        url = case.urn()
        case.entries.append({"fullUrl": url, "resource": spec})
        obs["specimen"] = {"reference": url}
    elif where == "elsewhere":
        obs["specimen"] = {"reference": reference}
    if note:
        obs["note"] = [{"text": note}]
    return case


c = Case("specimen-clotted-ionized-seizure-toddler", "Wetherell", ["Bramwell"], "male", "2024-09-18")
c.lab("ica", 0.78, R)
specimen(c, ("CLOT", "Clotted"))
c.lab("tca_mg", 7.0, R).lab("alb", 4.0, R).symptom("seizure", SZ).lab("weight", 12.0, W)
write(c, f'''
description = "Boy 2 y 2 mo with a seizure: ionized Ca 0.78 mmol/L on a sample whose contained Specimen is coded clotted (v2-0493 CLOT). A clotted whole-blood sample is rejected for ionized calcium (CLSI C31-A2; laboratory test directories), so the ionized result is set aside and named, and the status falls back to the total calcium of the same draw, 7.0 mg/dL with albumin 4.0 g/dL: adjusted 7.0 mg/dL = 1.75 mmol/L, at or below the severe adjusted grade 1.8 mmol/L, and with the seizure high. IV calcium is proposed on that basis, with the clotted sample stated."
now = "{NOW}"
severity = "high"
adjusted_calcium = true
# 7.0 + 0.8 x (4.0 - 4.0) = 7.0 mg/dL; 7.0 x 10 / 40.078 = 1.747 mmol/L <= 1.8 (severe).
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["specimen-clotted"]
safety_absent = ["specimen-unread", "specimen-hemolyzed"]
set_aside = [".contained[0].condition[0]"]
[doses.calcium-bolus]
# 12.0 kg x 50 mg/kg calcium gluconate = 600 mg, below the 1000 mg cap.
min = 600.0
max = 600.0
''')

c = Case("specimen-clotted-ionized-only-infant", "Wetherell", ["Ottilie"], "female", "2026-02-10")
c.lab("ica", 0.80, R)
specimen(c, ("CLOT", "Clotted"), where="bundle")
c.symptom("seizure", SZ).lab("weight", 8.2, W)
write(c, f'''
description = "Girl 9 mo with a seizure: the only calcium is an ionized Ca 0.80 mmol/L whose Specimen (a Bundle entry) is coded clotted (v2-0493 CLOT). The ionized result is set aside (CLSI C31-A2; laboratory rejection criteria), so no calcium status is given and no dose is computed from it; the clotted sample is raised as a high-severity DetectedIssue whose mitigation asks for a repeat and says a seizing child is treated by local protocol without waiting."
now = "{NOW}"
status = "data-required"
hypocalcemia = false
safety_present = ["specimen-clotted"]
proposals_absent = ["calcium-bolus", "calcium-infusion", "oral-calcium"]
set_aside = [".specimen"]
''')

c = Case("specimen-hemolyzed-ionized-child", "Pentreath", ["Isolde"], "female", "2019-05-06")
c.lab("ica", 0.85, R)
specimen(c, ("HEM", "Hemolyzed"), where="bundle")
c.symptom("seizure", SZ).lab("weight", 20.0, W)
write(c, f'''
description = "Girl 7 y 6 mo with a seizure: ionized Ca 0.85 mmol/L on a sample coded hemolyzed (v2-0493 HEM, Specimen in the Bundle). Hemolysis lowers measured ionized calcium (Agana et al. J Appl Lab Med 2024; Yang and Tacker Clin Chim Acta 2025) but the bias is modest, so the result is used (severe grade 0.9 and a seizure: high), IV calcium is proposed, and the hemolysis is named in a DetectedIssue and on the proposals."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["specimen-hemolyzed"]
safety_absent = ["specimen-clotted", "specimen-unread"]
[doses.calcium-bolus]
# 20.0 kg x 50 mg/kg = 1000 mg, at the 1000 mg cap.
min = 1000.0
max = 1000.0
''')

c = Case("specimen-missing-ionized-child", "Pentreath", ["Lowen"], "male", "2018-08-21")
c.lab("ica", 0.84, R)
specimen(c, where="elsewhere", reference="Specimen/larkspur-spec-40417")
c.lab("weight", 24.0, W)
write(c, f'''
description = "Boy 8 y 3 mo: ionized Ca 0.84 mmol/L (at or below the child severe grade 0.9: high) whose Observation.specimen refers to a Specimen that is not in the request: the specimen check could not run, and that is said as a DetectedIssue (specimen-unread, project decision) and on the IV proposals; the result is still used."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["specimen-unread"]
safety_absent = ["specimen-clotted", "specimen-hemolyzed"]
set_aside = [".specimen"]
[doses.calcium-bolus]
# 24.0 kg x 50 mg/kg = 1200 mg, capped at 1000 mg.
min = 1000.0
max = 1000.0
''')

c = Case("specimen-clot-in-note-child", "Ashcombe", ["Tamsin"], "female", "2020-03-09")
c.lab("ica", 0.86, R)
specimen(c, where="none", note="Small clot seen in the syringe; analysed as received.")
c.symptom("seizure", SZ).lab("weight", 19.0, W)
write(c, f'''
description = "Girl 6 y 8 mo with a seizure: ionized Ca 0.86 mmol/L with no coded specimen condition but a note on the result saying a small clot was seen. Words in a note only give a caution (project decision: a note cannot be told from 'no clots seen'), so the result is used (severe and symptomatic: high), IV calcium is proposed, and the clot is named as read by text."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["specimen-clotted"]
[doses.calcium-bolus]
# 19.0 kg x 50 mg/kg = 950 mg, below the 1000 mg cap.
min = 950.0
max = 950.0
''')


# Medication records as US EHRs code them, and symptoms as charted (issue 13, sections 2 and 6).
# RxNorm, ICD-10-CM and SNOMED CT codes below are the ones in service/rules (cause-codes.toml,
# codes.toml), each verified in the listing named there.
# ---------------------------------------------------------------------------
RXNORM = "http://www.nlm.nih.gov/research/umls/rxnorm"
ICD10CM = "http://hl7.org/fhir/sid/icd-10-cm"
LOCAL_FORMULARY = "https://larkspur.example.org/fhir/CodeSystem/pharmacy-item"


NEW_CHECKS = ["unidentified-medication", "daily-maximum-incomplete", "symptoms-unknown"]


def absent_new(*present):
    """The checks added for these records, except those present."""
    return ", ".join(f'"{k}"' for k in NEW_CHECKS if k not in present)


def medication(case, resource_type, status, concept, when, dose_mg=None):
    """A medication record with the given CodeableConcept (no ATC code)."""
    r = {"resourceType": resource_type, "status": status, "medicationCodeableConcept": concept,
         "subject": {"reference": case.subject}}
    if resource_type == "MedicationRequest":
        r["intent"] = "order"
        r["authoredOn"] = when
    elif status == "completed":
        r["effectiveDateTime"] = when
    else:
        r["effectivePeriod"] = {"start": when}
    if dose_mg is not None:
        r["dosage"] = {"route": {"coding": [{"system": SCT, "code": "47625008", "display": "Intravenous route"}]},
                       "dose": {"value": dose_mg, "unit": "mg", "system": UCUM, "code": "mg"}}
    return case.add(r)


def charted(case, system, code, display, onset, category="encounter-diagnosis"):
    """A Condition charted with one code (ICD-10-CM or SNOMED CT)."""
    return case.add({
        "resourceType": "Condition",
        "clinicalStatus": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-clinical",
                                       "code": "active"}]},
        "category": [{"coding": [{"system": "http://terminology.hl7.org/CodeSystem/condition-category",
                                  "code": category}]}],
        "code": {"coding": [{"system": system, "code": code, "display": display}]},
        "subject": {"reference": case.subject},
        "onsetDateTime": onset,
    })


c = Case("rxnorm-ceftriaxone-neonate", "Ashcombe", ["Baby Boy"], "male", "2026-11-20", "2026-11-20T03:10:00-05:00")
c.lab("ica", 0.68, R).lab("weight", 3.5, W)
medication(c, "MedicationRequest", "active",
           {"coding": [{"system": RXNORM, "code": "1152108", "display": "ceftriaxone Injectable Product"}]},
           "2026-11-30T04:30:00-05:00")
c.access = "peripheral"
write(c, f'''
description = "Boy 10 days old, ionized Ca 0.68 mmol/L (term-neonate severe grade 0.7: high), with an active ceftriaxone order coded only in RxNorm (1152108, ceftriaxone Injectable Product; no ATC code): the neonatal ceftriaxone contraindication (FDA safety labeling change 2012; calcium gluconate label) fires on the RxNorm code."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus"]
safety_present = ["ceftriaxone", "extravasation"]
safety_absent = [{absent("ceftriaxone", "extravasation", extra=["saline-diluent"])[1:-1]}, {absent_new()}]
''')

c = Case("name-only-bicarbonate-running", "Ashcombe", ["Tobias"], "male", "2021-05-14")
c.lab("ica", 0.84, R).symptom("seizure", SZ).lab("weight", 18.0, W)
medication(c, "MedicationAdministration", "in-progress",
           {"text": "Sodium Bicarbonate 4.2% infusion"}, "2026-11-30T07:00:00-05:00")
c.access = "central"
write(c, f'''
description = "Boy 5 y 6 mo, ionized Ca 0.84 mmol/L (severe: high) with a seizure, central line, with a sodium bicarbonate infusion running that the EHR sent as text only ('Sodium Bicarbonate 4.2% infusion', no code): matched by name, the calcium-bicarbonate precipitation warning (calcium gluconate label) fires and says the medication was identified by name."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "calcium-chloride"]
safety_present = ["precipitation"]
safety_absent = [{absent("precipitation", extra=["saline-diluent"])[1:-1]}, {absent_new()}]
''')

c = Case("rxnorm-calcium-given-counted", "Ashcombe", ["Delphine"], "female", "2019-10-20")
c.lab("ica", 0.84, R).symptom("seizure", SZ).lab("weight", 22.0, W)
medication(c, "MedicationAdministration", "completed",
           {"coding": [{"system": RXNORM, "code": "1668250"}]}, "2026-11-30T05:00:00-05:00", dose_mg=3000)
c.access = "peripheral"
write(c, f'''
description = "Girl 7 y 1 mo, 22 kg, ionized Ca 0.84 mmol/L (severe: high) with a seizure; 3000 mg IV calcium gluconate given at 05:00, coded only in RxNorm (1668250, the 10% calcium gluconate injection of openFDA NDC 0143-9180; no ATC code, no text): its salt is found from the code, and it is counted toward the daily maximum of the US label's pediatric rate."
now = "{NOW}"
# Infusion 8 mg/kg/h x 22 kg = 176 mg/h = 4224 mg over 24 h; daily maximum 13 mg/kg/h x 24 h x 22 kg = 6864 mg
# (US label, pediatric 8-13 mg/kg/h). 3000 + 4224 = 7224 > 6864: the daily-maximum check fires.
# Not counted, 4224 < 6864 would stay silent.
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["daily-maximum", "extravasation"]
safety_absent = [{absent("daily-maximum", "extravasation", extra=["saline-diluent"])[1:-1]}, {absent_new()}]
''')

c = Case("rxnorm-bicarbonate-running", "Ashcombe", ["Lucan"], "male", "2022-02-11")
c.lab("ica", 0.84, R).symptom("seizure", SZ).lab("weight", 15.0, W)
medication(c, "MedicationAdministration", "in-progress",
           {"coding": [{"system": RXNORM, "code": "1868486"}]}, "2026-11-30T07:00:00-05:00")
c.access = "central"
write(c, f'''
description = "Boy 4 y 9 mo, ionized Ca 0.84 mmol/L (severe: high) with a seizure, central line, with a sodium bicarbonate infusion running that is coded only in RxNorm (1868486, the 8.4% sodium bicarbonate injection of openFDA NDC 71357-004): the calcium-bicarbonate precipitation warning (calcium gluconate label) fires on the RxNorm code."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion", "calcium-chloride"]
safety_present = ["precipitation"]
safety_absent = [{absent("precipitation", extra=["saline-diluent"])[1:-1]}, {absent_new()}]
''')

c = Case("unidentified-medication-warning", "Ashcombe", ["Ingrid"], "female", "2020-03-09")
c.lab("ica", 0.84, R).symptom("seizure", SZ).lab("weight", 20.0, W)
medication(c, "MedicationRequest", "active",
           {"coding": [{"system": LOCAL_FORMULARY, "code": "LCH-77341"}]}, "2026-11-30T06:00:00-05:00")
c.access = "peripheral"
write(c, f'''
description = "Girl 6 y 8 mo, ionized Ca 0.84 mmol/L (severe: high) with a seizure, with an active order carrying only a local pharmacy item code (no RxNorm, ATC, text or display): it cannot be identified, so the proposals carry a warning that line-compatibility and interaction checks may be incomplete (project decision: a check that could not run is said where the clinician looks)."
now = "{NOW}"
severity = "high"
proposals = ["calcium-bolus", "calcium-infusion"]
safety_present = ["unidentified-medication", "extravasation"]
safety_absent = [{absent("extravasation", extra=["saline-diluent"])[1:-1]}, {absent_new("unidentified-medication")}]
''')

c = Case("tetany-icd10cm-iv", "Ashcombe", ["Rowan"], "male", "2019-06-02")
c.lab("ica", 0.95, R).lab("weight", 23.0, W)
charted(c, ICD10CM, "R29.0", "Tetany", SZ)
c.access = "peripheral"
write(c, f'''
description = "Boy 7 y 5 mo, ionized Ca 0.95 mmol/L (mild grade: moderate), with tetany charted only as ICD-10-CM R29.0 (Tetany): read as a symptom, so the child is symptomatic and IV calcium is proposed, not oral calcium (symptomatic hypocalcemia is treated with IV calcium gluconate, US label and pediatric sources in TREATMENT-SOURCES.md)."
now = "{NOW}"
proposals = ["calcium-bolus", "calcium-infusion"]
proposals_absent = ["oral-calcium"]
safety_present = ["extravasation"]
safety_absent = [{absent_new()}]
''')

c = Case("apnea-snomed-neonate-iv", "Ashcombe", ["Baby Girl"], "female", "2026-11-24", "2026-11-24T22:40:00-05:00")
c.lab("ica", 0.95, R).lab("weight", 3.4, W)
charted(c, SCT, "1023001", "Apnoea", SZ, category="problem-list-item")
c.access = "peripheral"
write(c, f'''
description = "Girl 5 days old, ionized Ca 0.95 mmol/L, with apnea charted as SNOMED CT 1023001 (Apnoea): read as a symptom, so IV calcium is proposed, not oral."
now = "{NOW}"
proposals = ["calcium-bolus"]
proposals_absent = ["oral-calcium"]
safety_absent = [{absent_new()}]
''')

c = Case("unclassified-condition-oral-caution", "Ashcombe", ["Perpetua"], "female", "2019-06-02")
c.lab("ica", 0.95, R).lab("weight", 23.0, W)
charted(c, ICD10CM, "R25.8", "Other abnormal involuntary movements", SZ)
write(c, f'''
description = "Girl 7 y 5 mo, ionized Ca 0.95 mmol/L (mild grade: moderate), no recognised symptom, but an encounter diagnosis charted 50 min before the draw (ICD-10-CM R25.8, Other abnormal involuntary movements) that is in none of the symptom lists: the symptom state is unknown, not none, so the oral proposal carries the caution that IV calcium may be needed if the child is symptomatic (project decision)."
now = "{NOW}"
proposals = ["oral-calcium"]
proposals_absent = ["calcium-bolus"]
safety_present = ["symptoms-unknown"]
safety_absent = [{absent_new("symptoms-unknown")}]
''')

print(f"wrote {len(WRITTEN)} cases")
