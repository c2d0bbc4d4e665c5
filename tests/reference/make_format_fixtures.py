#!/usr/bin/env python3
"""Write one small table with astropy in every catalogue format flowsift reads.

The files in tests/reference/formats/ are produced by this script and are COMMITTED;
the Rust tests (tests/formats_votable_ecsv.rs) read them, so no Python runs at test
time.  Run it again only when a fixture has to change, and commit the result.

    python3 -m venv /tmp/fmtenv
    /tmp/fmtenv/bin/pip install astropy==8.0.2 numpy==2.4.6 pyerfa==2.0.1.5 \
        pyarrow==26.0.1 PyYAML==6.0.4
    /tmp/fmtenv/bin/python tests/reference/make_format_fixtures.py

It refuses to run (exit status 2) when the installed versions differ from the pinned
ones, because the files are only reproducible byte for byte with the same versions.

Output (tests/reference/formats/):

    astropy_tabledata.vot   VOTable 1.4, TABLEDATA      (astropy.io.votable)
    astropy_binary.vot      VOTable 1.4, BINARY stream  (astropy.io.votable)
    astropy_binary2.vot     VOTable 1.4, BINARY2 stream (astropy.io.votable)
    astropy.ecsv            ECSV 1.0, space-delimited   (astropy.io.ascii)
    astropy.parquet         Parquet with table_meta_yaml (astropy.io.misc.parquet)
    expected.csv            the values, one row per table row: floats '%.17g', an
                            empty field for a masked (null) cell
"""

import os
import sys

PINNED = {
    "astropy": "8.0.2",
    "numpy": "2.4.6",
    "pyarrow": "26.0.1",
    "yaml": "6.0.4",
}


def check_versions():
    import astropy
    import numpy
    import pyarrow
    import yaml

    found = {
        "astropy": astropy.__version__,
        "numpy": numpy.__version__,
        "pyarrow": pyarrow.__version__,
        "yaml": yaml.__version__,
    }
    wrong = {k: v for k, v in found.items() if v != PINNED[k]}
    if wrong:
        print(f"pinned versions {PINNED}, found {found}", file=sys.stderr)
        sys.exit(2)


def table():
    import numpy as np
    from astropy.table import MaskedColumn, Table

    t = Table()
    t["ra"] = MaskedColumn([10.5, 200.25, 359.875], unit="deg")
    t["ra"].meta["ucd"] = "pos.eq.ra"
    t["ra"].description = "right ascension (ICRS)"
    t["dec"] = MaskedColumn([-30.125, 0.0, 89.5], unit="deg")
    t["dec"].meta["ucd"] = "pos.eq.dec"
    t["z_helio"] = MaskedColumn(
        [0.01234567890123, 0.1, 0.0456], mask=[False, False, True]
    )
    t["z_helio"].meta["ucd"] = "src.redshift"
    t["z_helio"].description = "heliocentric redshift"
    t["v"] = MaskedColumn(np.array([1.5e3, -250.75, 3.0e-7]), unit="km/s")
    t["v"].meta["ucd"] = "phys.veloc"
    t["n"] = MaskedColumn(
        np.array([1, -2, 3], dtype=np.int64), mask=[False, True, False]
    )

    t["flag"] = MaskedColumn([True, False, True])
    t["name"] = MaskedColumn(["NGC 4993", "Omega-cen", "a&b <c>"])
    t.meta["survey"] = "fixture"
    return t


def main():
    check_versions()
    here = os.path.join(os.path.dirname(os.path.abspath(__file__)), "formats")
    os.makedirs(here, exist_ok=True)
    t = table()
    path = lambda n: os.path.join(here, n)
    from astropy.io.votable import from_table

    for name, form in [
        ("astropy_tabledata.vot", "tabledata"),
        ("astropy_binary.vot", "binary"),
        ("astropy_binary2.vot", "binary2"),
    ]:
        vt = from_table(t)
        # A binary stream needs a stated null for a masked integer (VALUES null=).
        vt.get_first_table().get_field_by_id("n").values.null = -9999
        vt.to_xml(path(name), tabledata_format=form)
    t.write(path("astropy.ecsv"), format="ascii.ecsv", overwrite=True)
    t.write(path("astropy.parquet"), format="parquet", overwrite=True)
    with open(path("expected.csv"), "w") as f:
        f.write("# the values of the astropy fixtures (make_format_fixtures.py)\n")
        f.write(",".join(t.colnames) + "\n")
        for row in t:
            cells = []
            for name in t.colnames:
                v = row[name]
                if t[name].mask[row.index]:
                    cells.append("")
                elif isinstance(v, (float,)) or t[name].dtype.kind == "f":
                    cells.append("%.17g" % v)
                elif t[name].dtype.kind == "b":
                    cells.append("true" if v else "false")
                else:
                    cells.append(str(v))
            f.write(",".join(cells) + "\n")


if __name__ == "__main__":
    main()
