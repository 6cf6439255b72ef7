#!/usr/bin/env python3
"""Write the preterm weight LMS tables into service/rules/growth.toml and the
preterm z-score check values into preterm-check-values.json.

Copied by program from rcpchgrowth (pinned in requirements.txt), never typed
by hand:
  * UK-WHO preterm weight data: the UK 1990 reference reanalysed in 2009
    (rcpchgrowth/data_tables/uk90_preterm.json, measurement "weight"), weekly
    rows from 23 to 42 weeks postmenstrual age, [weeks, L, M, S].
The block between the two marker lines in growth.toml is replaced; nothing
else in that file is touched.

Check values: z-scores that rcpchgrowth's own UK-WHO calculation gives
(`Measurement(reference="uk-who", gestation_weeks=...)`, corrected SDS) for a
few preterm babies, next to the plain LMS z from growth.toml's rows with
linear interpolation (the service's arithmetic). rcpchgrowth interpolates
between weeks cubically, so the two differ slightly between tabulated weeks.

Run from anywhere:
  python3 tests/reference/growth/make_preterm_tables.py          # write
  python3 tests/reference/growth/make_preterm_tables.py --check  # CI: both files are what the package gives
"""
import datetime as dt
import importlib.metadata as md
import importlib.util
import json
import math
import pathlib
import sys

HERE = pathlib.Path(__file__).resolve().parent
ROOT = HERE.parents[2]
TOML = ROOT / "service" / "rules" / "growth.toml"
JSON = HERE / "preterm-check-values.json"
BEGIN = "# >>> preterm weight tables: written by tests/reference/growth/make_preterm_tables.py; do not edit by hand"
END = "# <<< preterm weight tables"
TABLE_ID = "uk90_preterm_weight"


def pkg_dir(name):
    spec = importlib.util.find_spec(name)
    if spec is None or spec.origin is None:
        raise SystemExit(f"package {name!r} is not installed (see tests/reference/growth/requirements.txt)")
    return pathlib.Path(spec.origin).parent


def preterm_rows():
    raw = json.loads((pkg_dir("rcpchgrowth") / "data_tables" / "uk90_preterm.json").read_text())
    w = raw["measurement"]["weight"]
    out = {}
    for sex in ("male", "female"):
        rows = [[float(r["value"]), r["L"], r["M"], r["S"]] for r in w[sex]]
        assert all(r["interval"] == "weeks" for r in w[sex])
        out[sex] = rows
    return out, raw["acknowledgement_text"]


def render_block():
    rows, ack = preterm_rows()
    version = md.version("rcpchgrowth")
    lines = [BEGIN, "# Rows are [postmenstrual_weeks, L, M, S]; weight in kg.", ""]
    for sex in ("male", "female"):
        r = rows[sex]
        lines += [
            "[[preterm_references]]",
            f'id = "{TABLE_ID}"',
            'label = "UK-WHO preterm weight (UK 1990 reference, reanalysed 2009)"',
            f'sex = "{sex}"',
            'measure = "weight"',
            f"from_weeks = {r[0][0]!r}",
            f"until_weeks = {r[-1][0]!r}",
            f'source = "UK-WHO growth charts, preterm section: {ack} Weight LMS by completed week of postmenstrual age, as distributed in the PyPI package rcpchgrowth {version} (rcpchgrowth/data_tables/uk90_preterm.json, measurement weight)"',
            "rows = [",
        ]
        lines += [f"  [{a!r}, {l!r}, {m!r}, {s!r}]," for a, l, m, s in r]
        lines += ["]", ""]
    lines.append(END)
    return "\n".join(lines)


def with_block(text):
    block = render_block()
    if BEGIN in text:
        head, rest = text.split(BEGIN, 1)
        _, tail = rest.split(END, 1)
        return head + block + tail
    # First write: the block goes before the policy section.
    marker = "# --------------------------------------------------------------------------\n# Policy:"
    head, tail = text.split(marker, 1)
    return head + block + "\n" + marker + tail


def lms_z(x, l, m, s):
    return math.log(x / m) / s if l == 0 else ((x / m) ** l - 1.0) / (l * s)


def linear_lms(rows, weeks):
    for lo, hi in zip(rows, rows[1:]):
        if lo[0] <= weeks <= hi[0]:
            t = (weeks - lo[0]) / (hi[0] - lo[0])
            return tuple(lo[i] + t * (hi[i] - lo[i]) for i in (1, 2, 3)), f"linear between weeks {lo[0]} and {hi[0]}"
    raise ValueError(weeks)


# (label, sex, gestation weeks at birth, days after birth, weight kg). Ages in
# whole days; postmenstrual age = gestation + days / 7.
POINTS = [
    ("27-week boy, 1.0 kg, day 3", "male", 27, 3, 1.0),
    ("27-week girl, 1.0 kg, day 3", "female", 27, 3, 1.0),
    ("28-week boy, 1.1 kg, day 3", "male", 28, 3, 1.1),
    ("30-week girl, 1.3 kg, day 10", "female", 30, 10, 1.3),
    ("24-week girl, 0.6 kg, day 1", "female", 24, 1, 0.6),
    ("25-week boy, 0.35 kg, day 2 (very light)", "male", 25, 2, 0.35),
    ("35-week boy, 2.6 kg, day 2", "male", 35, 2, 2.6),
    ("32-week girl, 1.4 kg at 40 weeks postmenstrual (day 56)", "female", 32, 56, 1.4),
]


def rcpch_z(sex, ga, days, kg):
    from rcpchgrowth import Measurement

    birth = dt.date(2026, 1, 1)
    m = Measurement(sex=sex, birth_date=birth, observation_date=birth + dt.timedelta(days=days),
                    measurement_method="weight", observation_value=kg, reference="uk-who",
                    gestation_weeks=ga, gestation_days=0)
    r = m.measurement
    return r["measurement_calculated_values"]["corrected_sds"], r["measurement_dates"]["corrected_gestational_age"]


def check_values():
    rows, _ = preterm_rows()
    pts = []
    for label, sex, ga, days, kg in POINTS:
        weeks = ga + days / 7.0
        z, cga = rcpch_z(sex, ga, days, kg)
        (l, m, s), how = linear_lms(rows[sex], weeks)
        pts.append({
            "label": label, "sex": sex, "gestation_weeks": ga, "days_after_birth": days,
            "postmenstrual_weeks": round(weeks, 6), "weight_kg": kg,
            "z": round(float(z), 4),
            "z_source": "rcpchgrowth Measurement(reference='uk-who', gestation_weeks=..., gestation_days=0): corrected_sds",
            "package_corrected_gestational_age": cga,
            "z_plain_lms": round(lms_z(kg, l, m, s), 4),
            "plain_lms": [round(v, 9) for v in (l, m, s)],
            "plain_lms_from": f"growth.toml {TABLE_ID} {sex}, {how}",
        })
    return {
        "generator": "tests/reference/growth/make_preterm_tables.py",
        "packages": {"rcpchgrowth": md.version("rcpchgrowth")},
        "formula": "z = ((X/M)^L - 1)/(L*S), L != 0; z = ln(X/M)/S, L = 0",
        "points": pts,
    }


if __name__ == "__main__":
    text = TOML.read_text()
    new_text = with_block(text)
    values = json.dumps(check_values(), indent=1, ensure_ascii=False) + "\n"
    if "--check" in sys.argv:
        bad = []
        if new_text != text:
            bad.append(f"{TOML.relative_to(ROOT)}: the preterm block differs from what rcpchgrowth gives")
        if not JSON.exists() or JSON.read_text() != values:
            bad.append(f"{JSON.relative_to(ROOT)} differs from a fresh generation")
        for b in bad:
            print(b, file=sys.stderr)
        if bad:
            raise SystemExit("re-run without --check")
        print("preterm tables and check values: match rcpchgrowth")
    else:
        TOML.write_text(new_text)
        JSON.write_text(values)
        print(f"wrote the preterm block of {TOML.relative_to(ROOT)} and {JSON.relative_to(ROOT)}")
