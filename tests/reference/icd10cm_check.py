#!/usr/bin/env python3
"""Every ICD-10-CM code in the rule data exists, with that title, in the CMS
ICD-10-CM code file as shipped in the PyPI package simple-icd-10-cm (pinned in
requirements.txt).

  python3 tests/reference/icd10cm_check.py           # list every code and its title
  python3 tests/reference/icd10cm_check.py --check   # exit 1 on any missing code or other title
"""
import pathlib
import sys
import tomllib

import simple_icd_10_cm as cm

SYSTEM = "http://hl7.org/fhir/sid/icd-10-cm"
RULES = pathlib.Path(__file__).resolve().parents[2] / "service" / "rules"


def codes(node, where):
    """(file location, code, display) of every coding-like table with the ICD-10-CM system."""
    if isinstance(node, dict):
        if node.get("system") == SYSTEM and "code" in node:
            yield where, node["code"], node.get("display", "")
        for k, v in node.items():
            yield from codes(v, f"{where}.{k}")
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from codes(v, f"{where}[{i}]")


def main():
    check = "--check" in sys.argv[1:]
    problems = []
    n = 0
    for path in sorted(RULES.glob("*.toml")):
        data = tomllib.loads(path.read_text(encoding="utf-8"))
        for where, code, display in codes(data, path.name):
            n += 1
            if not cm.is_valid_item(code):
                problems.append(f"{where}: {code} is not in the ICD-10-CM code file")
                continue
            title = cm.get_description(code)
            if title.casefold() != display.casefold():
                problems.append(f"{where}: {code} is titled '{title}', the rule data says '{display}'")
            elif not check:
                print(f"{code}\t{title}")
    for p in problems:
        print(p, file=sys.stderr)
    print(f"{n} ICD-10-CM codes read, {len(problems)} problem(s)", file=sys.stderr)
    if check and problems:
        sys.exit(1)


if __name__ == "__main__":
    main()
