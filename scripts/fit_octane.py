"""Fit the octane blending models on the open mixture data and write their parameter file.

    python scripts/fit_octane.py            # writes dha/properties/octane_params.json
    python scripts/fit_octane.py --check    # fits, compares with the stored file, writes nothing

Data: dha/properties/octane_data/ (KUZ2022_MON MON mixtures, COOPTIMA surrogate blends; see
PROVENANCE.md there). Neat values, groups and densities come from the shipped component
library. The fit is deterministic (least squares from fixed starting values), so the same
library and data give the same file. The held-out errors stored as the models' uncertainties
come from leave-one-group-out cross-validation (octane_fit.cross_validate).
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from dha.properties import octane as oc
from dha.properties import octane_fit as of


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("-o", "--output", type=Path, default=oc.PARAMS_FILE,
                    help="parameter file to write (default: the packaged one)")
    ap.add_argument("--check", action="store_true",
                    help="refit and compare with the stored file; exit 1 if they differ")
    args = ap.parse_args(argv)
    data = of.load_mixtures()
    params = of.build_params(data)
    table, _ = of.validate_all(data)
    print(of.format_table(table))
    if args.check:
        old = json.loads(args.output.read_text(encoding="utf-8"))
        same = old.get("models") == params["models"]
        print("stored parameters match the refit" if same else
              "stored parameters DIFFER from the refit: run scripts/fit_octane.py")
        return 0 if same else 1
    args.output.write_text(json.dumps(params, indent=1) + "\n", encoding="utf-8")
    print(f"wrote {args.output}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
