#!/usr/bin/env python3
"""Molar-mass check values for calcium-cds, produced by the molmass library.

Every number in the output is computed by molmass (PyPI, version pinned in
requirements.txt) from a molecular formula written here; none is copied from
service/rules/analytes.toml. molmass takes its average atomic masses from its
own element table (IUPAC standard atomic weights).

    python3 molar_mass_check_values.py           # writes molar-mass-check-values.json
    python3 molar_mass_check_values.py --check   # exits 1 if the committed file differs
                                                 # (the "generated" date is ignored)
"""

from __future__ import annotations

import argparse
import datetime
import json
import sys
from pathlib import Path

import molmass
from molmass import Formula

HERE = Path(__file__).resolve().parent
OUTPUT = HERE / "molar-mass-check-values.json"

# key, name, formula as written (molmass syntax: "." joins a hydrate), kind,
# element whose mass fraction is wanted (or None).
SUBSTANCES = [
    ("Ca", "calcium", "Ca", "element", None),
    ("P", "phosphorus", "P", "element", None),
    ("Mg", "magnesium", "Mg", "element", None),
    ("creatinine", "creatinine", "C4H7N3O", "compound", None),
    ("calcifediol", "25-hydroxyvitamin D3 (calcifediol)", "C27H44O2", "compound", None),
    ("calcitriol", "1,25-dihydroxyvitamin D3 (calcitriol)", "C27H44O3", "compound", None),
    ("calcium_gluconate_monohydrate", "calcium gluconate monohydrate", "C12H22CaO14.H2O", "compound", "Ca"),
    ("calcium_gluconate_anhydrous", "calcium gluconate, anhydrous", "C12H22CaO14", "compound", "Ca"),
    ("calcium_chloride_dihydrate", "calcium chloride dihydrate", "CaCl2.2H2O", "compound", "Ca"),
    ("calcium_carbonate", "calcium carbonate", "CaCO3", "compound", "Ca"),
    ("calcium_citrate_tetrahydrate", "calcium citrate tetrahydrate", "Ca3(C6H5O7)2.4H2O", "compound", "Ca"),
    ("calcium_lactate_pentahydrate", "calcium lactate pentahydrate", "C6H10CaO6.5H2O", "compound", "Ca"),
    ("magnesium_sulfate_heptahydrate", "magnesium sulfate heptahydrate", "MgSO4.7H2O", "compound", "Mg"),
]


def compute() -> dict:
    substances = {}
    for key, name, written, kind, of in SUBSTANCES:
        f = Formula(written)
        entry = {
            "name": name,
            "formula": written,
            "hill_formula": f.formula,
            "kind": kind,
            "molar_mass_g_per_mol": f.mass,
        }
        if of is not None:
            comp = f.composition()
            item = comp[of]
            entry["fraction_of"] = of
            entry["atoms_of_element"] = item.count
            entry["element_mass_in_formula_g_per_mol"] = item.mass
            entry["mass_fraction"] = item.fraction
            # mg of salt that carry 1 mmol of the element (handy for dosing work).
            entry["mg_salt_per_mmol_element"] = f.mass / item.count
        substances[key] = entry
    return {
        "library": "molmass",
        "version": molmass.__version__,
        "source": "PyPI package molmass; average molar masses from molmass's element table",
        "generated": datetime.date.today().isoformat(),
        "substances": substances,
    }


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--check", action="store_true", help="compare with the committed JSON instead of writing it")
    args = ap.parse_args()
    data = compute()
    if args.check:
        try:
            committed = json.loads(OUTPUT.read_text(encoding="utf-8"))
        except FileNotFoundError:
            print(f"{OUTPUT.name} is missing; run without --check", file=sys.stderr)
            return 1
        a = {k: v for k, v in committed.items() if k != "generated"}
        b = {k: v for k, v in data.items() if k != "generated"}
        if a != b:
            print(f"{OUTPUT.name} is out of date; regenerate with: python3 {Path(__file__).name}", file=sys.stderr)
            for k in sorted(set(a) | set(b)):
                if a.get(k) != b.get(k):
                    print(f"  differs at '{k}'", file=sys.stderr)
            return 1
        print(f"{OUTPUT.name} is up to date (molmass {molmass.__version__})")
        return 0
    OUTPUT.write_text(json.dumps(data, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
    print(f"wrote {OUTPUT.name} (molmass {molmass.__version__})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
