#!/usr/bin/env python3
"""Read dipwatch's ECSV output with astropy and check the columns come out typed, with units. Not part of CI.

How to rerun (needs Python 3 and astropy: python3 -m pip install astropy), from the repo root:

    cargo run --release -- plan --sites sites.example.toml --targets targets.example.csv \
        --from 2027-03-01 --days 30 --format ecsv > /tmp/plan.ecsv
    python3 tools/check_ecsv_astropy.py /tmp/plan.ecsv
"""
import sys

import numpy as np
from astropy.table import Table
import astropy.units as u

t = Table.read(sys.argv[1], format="ascii.ecsv")
print(f"{len(t)} rows, {len(t.columns)} columns")
assert len(t) > 0
assert t["epoch"].dtype.kind == "i", t["epoch"].dtype
assert t["observable"].dtype == np.bool_, t["observable"].dtype
assert t["coverage"].dtype.kind == "f"
assert t["sigma_min"].unit == u.min, t["sigma_min"].unit
assert t["alt_mid_deg"].unit == u.deg
assert t["target"].dtype.kind in "US"
for name in t.colnames:
    print(f"  {name:22s} {str(t[name].dtype):8s} {t[name].unit or ''}")
print("ok: astropy reads typed columns with units")
