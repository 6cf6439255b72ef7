#!/usr/bin/env python3
"""Ratios from criterion's estimates of `cargo bench -p calcium-cds --bench assess`.

For each example: the median time of `assess` (bytes in, result Bundle text
out), of `parse_serialise` (serde_json parse of the request bytes to a Value
and back to text: the floor the target is set against, at most 2x), of
`answer_parse_serialise` (the same for the answer's bytes) and of `profiles`
(our input-profile checks alone). Reads target/criterion/<example>/<fn>/new/estimates.json.
"""
import json
import pathlib
import sys

root = pathlib.Path(__file__).resolve().parent.parent / "target" / "criterion"
FNS = ["assess", "parse_serialise", "answer_parse_serialise", "profiles"]


def median_us(group, fn):
    path = root / group / fn / "new" / "estimates.json"
    if not path.exists():
        return None
    return json.loads(path.read_text())["median"]["point_estimate"] / 1000.0


rows = []
for group in sorted(p.name for p in root.iterdir() if (p / "assess").is_dir()) if root.exists() else []:
    t = {fn: median_us(group, fn) for fn in FNS}
    if None in t.values():
        continue
    rows.append((group, t))
if not rows:
    sys.exit("no criterion estimates: run `cargo bench -p calcium-cds --bench assess` first")
print(f"{'example':42} {'assess':>9} {'p+s req':>9} {'p+s ans':>9} {'profiles':>9} {'x req':>7} {'x ans':>7}")
for group, t in rows:
    print(
        f"{group:42} {t['assess']:8.1f}u {t['parse_serialise']:8.1f}u {t['answer_parse_serialise']:8.1f}u "
        f"{t['profiles']:8.1f}u {t['assess'] / t['parse_serialise']:7.1f} {t['assess'] / t['answer_parse_serialise']:7.2f}"
    )
print("times are criterion medians in microseconds; x req = assess / parse+serialise of the request "
      "(target <= 2); x ans = assess / parse+serialise of the answer")
