#!/usr/bin/env python3
"""Check that astropy reads the units flowsift writes, in every output format.

Not part of `cargo test` (it needs Python): run by hand, or from CI's Python step, with
the flowsift binary as the argument:

    python3 -m venv /tmp/fmtenv
    /tmp/fmtenv/bin/pip install astropy==8.0.2 numpy==2.4.6 pyerfa==2.0.1.5 \
        pyarrow==26.0.1 PyYAML==6.0.4 pandas==3.1.1
    /tmp/fmtenv/bin/python tests/reference/check_astropy_reads_units.py target/debug/flowsift

It runs `flowsift velocities` on the demo catalogue into Parquet, VOTable, ECSV and FITS
outputs and reads each with astropy.table.Table.read: `v_pec` must come back in km/s, `d_c`
in Mpc, with the UCD (VOTable, ECSV, Parquet) and the description (VOTable, ECSV,
Parquet), and the values must agree across the formats. Exit status 0 when every check
passes, 1 with a message per failure otherwise, 2 on a usage error.
"""

import os
import subprocess
import sys
import tempfile


def main():
    if len(sys.argv) != 2:
        print("usage: check_astropy_reads_units.py FLOWSIFT_BINARY", file=sys.stderr)
        return 2
    binary = sys.argv[1]
    import astropy.units as u
    import numpy as np
    from astropy.table import Table

    here = os.path.dirname(os.path.abspath(__file__))
    demo = os.path.join(here, "..", "..", "demo-data", "lantern_survey.csv")
    failures = []
    with tempfile.TemporaryDirectory() as tmp:
        tables = {}
        for ext in ["parquet", "vot", "ecsv", "fits"]:
            out = os.path.join(tmp, f"out.{ext}")
            run = subprocess.run(
                [binary, "velocities", demo, "-o", out],
                capture_output=True,
                text=True,
            )
            if run.returncode != 0:
                failures.append(f"{ext}: flowsift failed: {run.stderr.strip()}")
                continue
            fmt = {"vot": "votable"}.get(ext)
            t = Table.read(out, format=fmt) if fmt else Table.read(out)
            tables[ext] = t
            for col, unit in [("v_pec", u.km / u.s), ("d_c", u.Mpc), ("glon", u.deg)]:
                got = t[col].unit
                if got is None or u.Unit(got) != unit:
                    failures.append(f"{ext}: {col} has unit {got!r}, expected {unit}")
            if ext != "fits":
                ucd = t["v_pec"].meta.get("ucd")
                if ext == "vot":
                    ucd = ucd or getattr(t["v_pec"], "ucd", None)
                if ucd != "phys.veloc":
                    failures.append(f"{ext}: v_pec has UCD {ucd!r}, expected phys.veloc")
                if not t["v_pec"].description:
                    failures.append(f"{ext}: v_pec has no description")
        def values(t):
            # A masked cell (a null) as NaN, as the Parquet and FITS outputs hold it.
            return np.ma.filled(np.ma.asarray(t["v_pec"], dtype=float), np.nan)

        if "parquet" in tables:
            ref = values(tables["parquet"])
            for ext, t in tables.items():
                got = values(t)
                if got.shape != ref.shape or not np.allclose(
                    got, ref, rtol=0, atol=0, equal_nan=True
                ):
                    failures.append(f"{ext}: v_pec values differ from the Parquet output")
    for f in failures:
        print("FAIL", f)
    if failures:
        return 1
    print("astropy reads the units of flowsift's Parquet, VOTable, ECSV and FITS outputs")
    return 0


if __name__ == "__main__":
    sys.exit(main())
