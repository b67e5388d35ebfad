#!/usr/bin/env python3
"""Extract the check values porewise's model tests use from the project's reference notes.

Usage: python3 extract_soil_reference.py PATH/TO/soil-reference.json > soil_reference_tables.json

Keeps the Carsel & Parrish (1988) parameter table and the `computed` records of the retention
models, the conductivity models and the unit conversions, unchanged. The tests read only the
output file, never the notes themselves.
"""
import json
import sys

KEEP_MODELS = {
    "unit_conversion",
    "van_genuchten_mualem_m=1-1/n",
    "kosugi_1996",
    "fredlund_xing_1994",
    "durner_1994",
    "van_genuchten_burdine_free_m",
}

def main():
    with open(sys.argv[1], encoding="utf-8") as f:
        ref = json.load(f)
    out = {
        "source": "soil-reference.md / soil-reference.json (the project's reference notes), section 3 "
        "and section 8: Carsel, R.F. & Parrish, R.S. (1988) Water Resour. Res. 24(5):755-769 "
        "parameters (from memory, high); values computed independently (mpmath, 50 digits).",
        "meta": ref["meta"],
        "carsel_parrish_1988": [
            {k: row[k] for k in ("class", "theta_r", "theta_s", "alpha_per_cm", "n", "ks_cm_per_day")}
            for row in ref["carsel_parrish"]
        ],
        "computed": [r for r in ref["computed"] if r["model"] in KEEP_MODELS],
    }
    json.dump(out, sys.stdout, indent=1, ensure_ascii=False)
    sys.stdout.write("\n")

if __name__ == "__main__":
    main()
