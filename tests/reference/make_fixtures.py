#!/usr/bin/env python3
"""Generate flowsift's reference fixtures with astropy.

The CSV files next to this script are produced by it and are COMMITTED to the
repository.  The Rust test-suite reads them; no Python runs at test time.  Run
this script again only when a fixture has to change, and commit the result.

How to run (the virtual environment lives outside the repository and is never
committed):

    python3 -m venv /tmp/fixenv
    /tmp/fixenv/bin/pip install astropy==8.0.2 numpy==2.4.6 scipy==1.17.1 pyerfa==2.0.1.5
    /tmp/fixenv/bin/python tests/reference/make_fixtures.py

To write only some fixtures, name them (file names as listed below):

    /tmp/fixenv/bin/python tests/reference/make_fixtures.py sky_frames_fk.csv

The script refuses to run (exit status 2, with a message) when the installed
versions differ from the pinned ones below, because the fixtures are only
reproducible bit-for-bit with the same library versions.  It is deterministic:
every random draw comes from numpy Generators seeded from SEED.

Output files (all in tests/reference/, comment lines start with '#', then one
header line, then comma-separated rows; floats are written with '%.17g' so they
round-trip exactly to IEEE doubles):

    sky_frames.csv       ICRS -> Galactic and Supergalactic (astropy SkyCoord)
    sky_frames_fk.csv    ICRS <-> FK5 (J2000) and FK4 (B1950, E-terms,
                         obstime B1950) both ways (astropy SkyCoord)
    sky_separations.csv  great-circle separations (astropy SkyCoord.separation)
    sexagesimal.csv      sexagesimal strings parsed by astropy Angle
    distances.csv        FLRW distances for 7 models (astropy.cosmology)
    cmb_frame.csv        heliocentric -> CMB-frame redshift (exact boost)
    galaxy_pv.csv        one-object peculiar velocities, forward model and
                         inversion with astropy.cosmology.z_at_value

Heliocentric -> CMB-frame redshift: derivation
----------------------------------------------
Let S be the CMB rest frame and S' the heliocentric frame, which moves with
velocity v = beta*c*a relative to S (a = unit vector to the apex, beta = v/c,
gamma = 1/sqrt(1-beta^2)).  A source is seen in direction n (unit vector from
the observer to the source); its photon travels along k = -n.

A photon with energy E and momentum p = (E/c) k transforms between the frames
as E_S = gamma (E_S' + v . p_S').  With k' = -n' (n' = direction measured in
S', i.e. the catalogued, heliocentric direction) this is

    nu_cmb = gamma nu_helio (1 - beta cos(theta'))         (theta' measured in S')

and, doing the same boost from S to S',

    nu_helio = gamma nu_cmb (1 + beta cos(theta))          (theta measured in S)

Since 1+z = nu_emitted / nu_received, (1+z_cmb)/(1+z_helio) = nu_helio/nu_cmb:

    1+z_cmb = (1+z_helio) / (gamma (1 - beta cos(theta')))   [heliocentric angle]
            = (1+z_helio) * gamma (1 + beta cos(theta))      [CMB-frame angle]

The two lines are the same number, because aberration relates the angles by
cos(theta) = (cos(theta') - beta) / (1 - beta cos(theta')); they are NOT the
same function of one given angle: they differ by beta^2 sin^2(theta) (about
1.5e-6 in 1+z for 370 km/s) at second order.  A catalogue position (ra, dec)
is a heliocentric (S') direction, so the exact formula for the angle we compute
from the catalogue is the first line; that is what column z_cmb uses.  The
second expression evaluated with the heliocentric angle is written as the extra
last column z_cmb_if_cmb_frame_angle so both conventions can be tested.

Sign check: a source towards the apex has cos(theta') = 1, and
1/(gamma(1-beta)) = sqrt((1+beta)/(1-beta)) > 1, so z_cmb > z_helio.  We move
towards that source, so its light is blueshifted in our frame, and removing our
motion makes its CMB-frame redshift larger.  The script asserts this.  The
inverse is 1+z_helio = (1+z_cmb) gamma (1 - beta cos(theta')).  To first order
both give 1+z_cmb = (1+z_helio)(1 + beta cos(theta)), so
cz_cmb ~ cz_helio + v cos(theta) (the additive form in column z_cmb_additive).

Distance integrals
------------------
astropy 8.0.2 evaluates the comoving distance with a closed form (hyp2f1) for
flat LambdaCDM without radiation, with incomplete elliptic integrals for
non-flat LambdaCDM without radiation, and otherwise with scipy.integrate.quad at
its DEFAULT tolerances (epsabs = epsrel = 1.49e-8).  This script recomputes
every distance independently with its own E(z) and scipy.integrate.quad at
epsabs=0, epsrel=1e-12, asserts agreement to 1e-9 relative, and WRITES THE
ASTROPY VALUES.  The largest relative differences seen are written as comment
lines in distances.csv.
"""

import importlib.metadata
import sys

# Pinned library versions: the newest that installed from PyPI with pip when the
# fixtures were generated (2026-12).
PINNED = {
    "astropy": "8.0.2",
    "numpy": "2.4.6",
    "scipy": "1.17.1",
    "pyerfa": "2.0.1.5",
}


def _check_versions():
    bad = []
    for pkg, want in PINNED.items():
        try:
            have = importlib.metadata.version(pkg)
        except importlib.metadata.PackageNotFoundError:
            have = "not installed"
        if have != want:
            bad.append(f"  {pkg}: pinned {want}, found {have}")
    if bad:
        msg = "\n".join(bad)
        pins = " ".join(f"{k}=={v}" for k, v in PINNED.items())
        sys.stderr.write(
            "make_fixtures.py: installed versions differ from the pinned ones:\n"
            f"{msg}\n"
            f"Install exactly: pip install {pins}\n"
            "(see the docstring of this script). Fixtures NOT regenerated.\n"
        )
        sys.exit(2)


_check_versions()

import math  # noqa: E402
import warnings  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402
import astropy.units as u  # noqa: E402
from astropy import constants as const  # noqa: E402
from astropy.coordinates import FK4, FK5, Angle, CartesianRepresentation, SkyCoord  # noqa: E402
from astropy.cosmology import (  # noqa: E402
    FlatLambdaCDM,
    Flatw0waCDM,
    LambdaCDM,
    w0waCDM,
    z_at_value,
)
from scipy.integrate import quad  # noqa: E402

OUT = Path(__file__).resolve().parent

# Seed: an arbitrary project choice (the date the fixtures were first made).
SEED = 20261201

# Speed of light in km/s: exact by the SI definition of the metre; asserted
# equal to astropy.constants.c below.
C_KMS = 299792.458

# CMB dipole apex, Planck 2018: Planck Collaboration 2020, A&A 641, A1
# (Planck 2018 results I).  Values as given in the project brief; they match
# what I recall of that paper (from memory, not re-read here).
PLANCK2018_APEX = dict(v_kms=369.82, l_deg=264.021, b_deg=48.253)
# Second, arbitrary test apex specified in the project brief (not a measurement
# claimed by this script).
USER_APEX = dict(v_kms=627.0, l_deg=276.0, b_deg=30.0)

VERSIONS_LINE = "# versions: " + ", ".join(f"{k} {v}" for k, v in PINNED.items())


def rng_for(stream):
    """Independent, reproducible Generator per fixture file."""
    return np.random.default_rng([SEED, stream])


def fmt(v):
    if isinstance(v, str):
        assert "," not in v and "\n" not in v
        return v
    if isinstance(v, (int, np.integer)) and not isinstance(v, bool):
        return str(int(v))
    f = float(v)
    assert math.isfinite(f), f"non-finite value {v!r}"
    return "%.17g" % f


def write_csv(name, comments, columns, rows):
    path = OUT / name
    with open(path, "w", newline="\n") as fh:
        fh.write(f"# {name}: generated by tests/reference/make_fixtures.py; do not edit by hand\n")
        fh.write(VERSIONS_LINE + f"; seed {SEED}\n")
        for line in comments:
            fh.write("# " + line + "\n" if line else "#\n")
        fh.write(",".join(columns) + "\n")
        for r in rows:
            assert len(r) == len(columns), (name, r)
            fh.write(",".join(fmt(v) for v in r) + "\n")
    print(f"wrote {path.relative_to(OUT.parent.parent)}: {len(rows)} rows")


def random_sky(rng, n):
    """n positions uniform on the sphere (degrees)."""
    ra = rng.uniform(0.0, 360.0, n)
    dec = np.degrees(np.arcsin(rng.uniform(-1.0, 1.0, n)))
    return ra, dec


def log_uniform(rng, lo, hi, n):
    return np.exp(rng.uniform(math.log(lo), math.log(hi), n))


def icrs(ra, dec):
    return SkyCoord(ra=np.atleast_1d(ra) * u.deg, dec=np.atleast_1d(dec) * u.deg, frame="icrs")


def effective_matrix(frame_from, frame_to):
    """Rotation matrix astropy applies, read off by transforming basis vectors."""
    m = np.zeros((3, 3))
    for j in range(3):
        e = np.zeros(3)
        e[j] = 1.0
        c = SkyCoord(CartesianRepresentation(*e), frame=frame_from)
        v = c.transform_to(frame_to).cartesian.xyz.value
        m[:, j] = v
    return m


# ---------------------------------------------------------------------------
# 1. sky frames, separations, sexagesimal
# ---------------------------------------------------------------------------


def make_sky_frames():
    rng = rng_for(1)
    # Special points.  Galactic / supergalactic poles expressed in ICRS by
    # astropy itself, then nudged by 1e-3 deg so the longitude is defined.
    ngp = SkyCoord(l=0 * u.deg, b=90 * u.deg, frame="galactic").icrs
    sgp = SkyCoord(sgl=0 * u.deg, sgb=90 * u.deg, frame="supergalactic").icrs
    special = [
        (0.0, 90.0),
        (0.0, -90.0),
        (0.0, 0.0),
        (90.0, 0.0),
        (180.0, 0.0),
        (270.0, 0.0),
        (359.9999999, 0.0),
        (ngp.ra.deg, ngp.dec.deg - 1e-3),
        ((ngp.ra.deg + 180.0) % 360.0, -(ngp.dec.deg - 1e-3)),  # near Galactic south pole
        (sgp.ra.deg, sgp.dec.deg - 1e-3),
        ((sgp.ra.deg + 180.0) % 360.0, -(sgp.dec.deg - 1e-3)),  # near supergalactic south pole
    ]
    ra_r, dec_r = random_sky(rng, 300)
    ra = np.concatenate([[p[0] for p in special], ra_r])
    dec = np.concatenate([[p[1] for p in special], dec_r])
    c = icrs(ra, dec)
    g = c.galactic
    s = c.supergalactic
    rows = list(zip(ra, dec, g.l.deg, g.b.deg, s.sgl.deg, s.sgb.deg))

    m_ig = effective_matrix("icrs", "galactic")
    m_gs = effective_matrix("galactic", "supergalactic")
    comments = [
        "ICRS (ra, dec) -> Galactic (glon, glat) and Supergalactic (sgl, sgb) by astropy",
        "SkyCoord(frame='icrs').galactic / .supergalactic. All angles in degrees; longitudes in [0, 360).",
        "ra, dec: input ICRS position. glon, glat: Galactic. sgl, sgb: Supergalactic.",
        f"Rows 1-{len(special)} are special points (celestial poles, equator points, ra just below 360,",
        "points 1e-3 deg from the Galactic and supergalactic north/south poles); the remaining 300",
        "are uniform on the sphere. Near a pole the longitude is ill-conditioned: compare unit vectors.",
        "astropy's chain is ICRS -> FK5(J2000) (frame-bias matrix of USNO Circular 179) -> Galactic",
        "(FK5 NGP ra=192.8594812065348, dec=27.12825118085622, l of NCP 122.9319185680026 deg; read",
        "from astropy 8.0.2 source) -> Supergalactic (pole at l=47.37, b=6.32 deg; astropy source).",
        "Effective ICRS->Galactic matrix (rows; v_gal = M v_icrs), read off astropy by transforming basis vectors:",
    ]
    comments += ["  " + " ".join("%.17g" % x for x in row) for row in m_ig]
    comments.append("Effective Galactic->Supergalactic matrix (rows; v_sgal = M v_gal):")
    comments += ["  " + " ".join("%.17g" % x for x in row) for row in m_gs]

    # Informative: how far a plain FK5-J2000 rotation applied directly to ICRS
    # (i.e. ignoring the ~23 mas frame bias) lands from astropy.
    ngp_ra, ngp_dec, lon0 = np.radians([192.8594812065348, 27.12825118085622, 122.9319185680026])

    def rz(a):
        return np.array([[math.cos(a), math.sin(a), 0], [-math.sin(a), math.cos(a), 0], [0, 0, 1]])

    def ry(a):
        return np.array([[math.cos(a), 0, -math.sin(a)], [0, 1, 0], [math.sin(a), 0, math.cos(a)]])

    m_nobias = rz(math.pi - lon0) @ ry(math.pi / 2 - ngp_dec) @ rz(ngp_ra)
    v = c.cartesian.xyz.value
    vg_astropy = g.cartesian.xyz.value
    vg_nobias = m_nobias @ v
    d = np.linalg.norm(vg_astropy - vg_nobias, axis=0)
    max_mas = np.degrees(d.max()) * 3.6e6
    comments.append(
        f"Note: the same Galactic rotation applied to ICRS WITHOUT the frame bias differs from astropy by up to {max_mas:.1f} mas."
    )
    write_csv("sky_frames.csv", comments, ["ra", "dec", "glon", "glat", "sgl", "sgb"], rows)
    return max_mas


def make_sky_separations():
    rng = rng_for(2)
    pairs = []
    # Tiny separations (< 1 arcsec), random position angle.
    for sep_arcsec in [0.9, 0.1, 1e-2, 1e-3, 1e-4]:
        ra1, dec1 = random_sky(rng, 1)
        p1 = icrs(ra1, dec1)
        p2 = p1.directional_offset_by(rng.uniform(0, 360) * u.deg, sep_arcsec * u.arcsec)
        pairs.append((ra1[0], dec1[0], p2.ra.deg[0], p2.dec.deg[0]))
    # Identical points.
    ra1, dec1 = random_sky(rng, 1)
    pairs.append((ra1[0], dec1[0], ra1[0], dec1[0]))
    # Near-antipodal: antipode nudged by the given amount; plus the exact antipode.
    for off_deg in [1e-2, 1e-4, 1.0 / 3600, 1e-3 / 3600, 0.0]:
        ra1, dec1 = random_sky(rng, 1)
        anti = icrs((ra1 + 180.0) % 360.0, -dec1)
        if off_deg > 0:
            anti = anti.directional_offset_by(rng.uniform(0, 360) * u.deg, off_deg * u.deg)
        pairs.append((ra1[0], dec1[0], anti.ra.deg[0], anti.dec.deg[0]))
    # Across ra = 0/360, across the north pole, pole to equator.
    pairs.append((359.99995, 10.0, 0.00005, 10.0))
    pairs.append((0.0, 89.9999, 180.0, 89.9999))
    pairs.append((0.0, 90.0, 123.0, 0.0))
    pairs.append((0.0, -90.0, 0.0, 90.0))
    n_special = len(pairs)
    ra1, dec1 = random_sky(rng, 100 - n_special)
    ra2, dec2 = random_sky(rng, 100 - n_special)
    pairs += list(zip(ra1, dec1, ra2, dec2))
    arr = np.array(pairs, dtype=float)
    sep = icrs(arr[:, 0], arr[:, 1]).separation(icrs(arr[:, 2], arr[:, 3])).deg
    rows = [tuple(p) + (s,) for p, s in zip(arr, sep)]
    comments = [
        "Great-circle separations between ICRS positions (degrees), astropy SkyCoord.separation",
        "(astropy uses the Vincenty formula, accurate for tiny and near-antipodal separations).",
        "ra1, dec1, ra2, dec2: the two positions (deg). sep_deg: separation (deg).",
        f"Rows 1-{n_special}: 5 tiny (0.9, 0.1, 1e-2, 1e-3, 1e-4 arcsec), 1 identical pair, 5 near-antipodal",
        "(antipode offset by 1e-2 deg, 1e-4 deg, 1 arcsec, 1e-3 arcsec, exactly 0), a pair across ra=0/360,",
        "a pair across the north pole, pole-to-equator, pole-to-pole. The rest: random pairs.",
        "For the tiniest separations the inputs themselves only fix sep to ~1e-16 rad absolute; compare",
        "small separations with an absolute tolerance (e.g. 1e-12 deg), not a relative one.",
    ]
    write_csv("sky_separations.csv", comments, ["ra1", "dec1", "ra2", "dec2", "sep_deg"], rows)


def make_sky_frames_fk():
    """ICRS <-> FK5 (J2000) and FK4 (B1950 with E-terms, obstime B1950), both ways."""
    rng = rng_for(7)
    fk5 = FK5(equinox="J2000")
    fk4 = FK4(equinox="B1950", obstime="B1950")
    special = [
        (0.0, 90.0),
        (0.0, -90.0),
        (123.0, 89.9999),
        (301.0, -89.9999),
        (0.0, 0.0),
        (0.0, 45.0),
        (0.0, -30.0),
        (1e-7, 10.0),
        (359.9999999, -10.0),
        (359.99999999, 60.0),
        (90.0, 0.0),
        (180.0, 0.0),
        (270.0, 0.0),
    ]
    n_random = 200
    blocks = []
    for origin, n_extra in [("icrs", n_random), ("fk5", 50), ("fk4", 50)]:
        ra_r, dec_r = random_sky(rng, n_extra)
        lon = np.concatenate([[p[0] for p in special], ra_r])
        lat = np.concatenate([[p[1] for p in special], dec_r])
        if origin == "icrs":
            c = icrs(lon, lat)
        elif origin == "fk5":
            c = SkyCoord(ra=lon * u.deg, dec=lat * u.deg, frame=fk5)
        else:
            c = SkyCoord(ra=lon * u.deg, dec=lat * u.deg, frame=fk4)
        i = c.transform_to("icrs")
        f5 = c.transform_to(fk5)
        f4 = c.transform_to(fk4)
        # The input columns are written as given (not as astropy re-wraps them).
        cols = {
            "icrs": (i.ra.deg, i.dec.deg),
            "fk5": (f5.ra.deg, f5.dec.deg),
            "fk4": (f4.ra.deg, f4.dec.deg),
        }
        cols[origin] = (lon, lat)
        for k in range(len(lon)):
            blocks.append(
                (origin, cols["icrs"][0][k], cols["icrs"][1][k], cols["fk5"][0][k], cols["fk5"][1][k],
                 cols["fk4"][0][k], cols["fk4"][1][k])
            )
    m_i5 = effective_matrix("icrs", fk5)
    from astropy.coordinates.builtin_frames.fk4 import fk4_e_terms
    from astropy.coordinates.builtin_frames.utils import EQUINOX_B1950

    e_terms = [float(x) for x in fk4_e_terms(EQUINOX_B1950)]
    # astropy's direct FK4 -> FK5 result against its FK4 -> ICRS -> FK5 result, same inputs.
    fk4_rows = [b for b in blocks if b[0] == "fk4"]
    c4 = SkyCoord(ra=[b[5] for b in fk4_rows] * u.deg, dec=[b[6] for b in fk4_rows] * u.deg, frame=fk4)
    path_uas = c4.transform_to(fk5).separation(c4.transform_to("icrs").transform_to(fk5)).to_value(u.uas).max()
    comments = [
        "ICRS <-> FK5 and FK4 by astropy SkyCoord.transform_to. All angles in degrees.",
        "  FK5: FK5(equinox='J2000'), the mean equator and equinox of J2000.0.",
        "  FK4: FK4(equinox='B1950', obstime='B1950'), B1950.0 equatorial including the E-terms of",
        "  aberration, for objects without proper motion observed at B1950.",
        "origin: which pair of columns is the INPUT of the row (written exactly as given to astropy);",
        "  the other two pairs are astropy's transformation of it. Block 'icrs': "
        f"{len(special)} special points then {n_random} random;",
        f"  blocks 'fk5' and 'fk4': the same {len(special)} special points then 50 random, each as",
        "  FK5 or FK4 input. Special points: celestial poles, 1e-4 deg from them, ra = 0, ra just above",
        "  0 and just below 360, equator points. Random points are uniform on the sphere. Near a pole",
        "  the longitude is ill-conditioned: compare unit vectors.",
        "astropy 8.0.2's chain: ICRS -> FK5 J2000 by the frame-bias matrix of USNO Circular 179",
        "  (eta0 = -19.9 mas, xi0 = 9.1 mas, da0 = -22.9 mas; read from astropy source);",
        "  FK5 J2000 <-> FK4NoETerms B1950 by the matrix of Murray (1989) A&A 218, 325 eq. 28 plus the",
        "  eq. 29 correction times the obstime (Julian centuries from 1950; ~ -2.1e-6 at B1950);",
        "  FK4NoETerms <-> FK4 by the E-terms of aberration at equinox B1950.",
        "Effective ICRS->FK5 matrix (rows; v_fk5 = M v_icrs), read off astropy by transforming basis vectors:",
    ]
    comments += ["  " + " ".join("%.17g" % x for x in row) for row in m_i5]
    comments.append("E-terms vector at B1950 (astropy fk4_e_terms, radians): " + " ".join("%.17g" % x for x in e_terms))
    comments += [
        "In block 'fk4' the fk5 columns are astropy's direct FK4 -> FK5 result; it differs from",
        f"astropy's FK4 -> ICRS -> FK5 result for the same inputs by up to {path_uas:.1f} micro-arcsec",
        "(the icrs columns are the FK4 -> ICRS result).",
    ]
    cols = ["origin", "ra", "dec", "fk5_ra", "fk5_dec", "fk4_ra", "fk4_dec"]
    write_csv("sky_frames_fk.csv", comments, cols, blocks)


def make_sexagesimal():
    rng = rng_for(3)
    fixed = [
        ("00:00:00.00", "+00:00:00.0"),
        ("23:59:59.99", "-00:30:00.0"),
        ("12:00:00.00", "-00:00:30.0"),
        ("00:00:00.01", "-00:00:00.1"),
        ("06:30:15.50", "+89:59:59.9"),
        ("18:45:00.00", "-89:59:59.9"),
        ("23:59:59.99", "+90:00:00.0"),
        ("11:59:59.99", "-90:00:00.0"),
        ("05:00:00.00", "-00:59:59.9"),
        ("17:17:17.17", "+00:00:00.1"),
    ]
    strings = list(fixed)
    while len(strings) < 30:
        h = int(rng.integers(0, 24))
        m = int(rng.integers(0, 60))
        cs = int(rng.integers(0, 6000))  # centiseconds of time
        sign = "-" if rng.random() < 0.5 else "+"
        d = int(rng.integers(0, 90))
        dm = int(rng.integers(0, 60))
        ds = int(rng.integers(0, 600))  # deciseconds of arc
        strings.append((f"{h:02d}:{m:02d}:{cs // 100:02d}.{cs % 100:02d}", f"{sign}{d:02d}:{dm:02d}:{ds // 10:02d}.{ds % 10:d}"))
    rows = []
    for ra_s, dec_s in strings:
        ra_deg = Angle(ra_s, unit=u.hourangle).degree
        dec_deg = Angle(dec_s, unit=u.deg).degree
        # independent arithmetic cross-check
        h, m, s = ra_s.split(":")
        ra_chk = 15.0 * (int(h) + int(m) / 60.0 + float(s) / 3600.0)
        sg = -1.0 if dec_s.startswith("-") else 1.0
        d, m, s = dec_s.lstrip("+-").split(":")
        dec_chk = sg * (int(d) + int(m) / 60.0 + float(s) / 3600.0)
        assert abs(ra_deg - ra_chk) < 1e-12 and abs(dec_deg - dec_chk) < 1e-12, (ra_s, dec_s)
        rows.append((ra_s, dec_s, float(ra_deg), float(dec_deg)))
    comments = [
        "Sexagesimal strings parsed by astropy Angle: ra_str with unit=hourangle, dec_str with unit=deg.",
        "ra_str: 'hh:mm:ss.ss' (hours). dec_str: '+dd:mm:ss.s' or '-dd:mm:ss.s'. ra_deg, dec_deg: degrees.",
        "The sign applies to the whole value, e.g. '-00:30:00.0' is -0.5 deg. Rows 1-10 are edge cases.",
        "Cross-checked against plain arithmetic 15*(h+m/60+s/3600) and sign*(d+m/60+s/3600) to 1e-12 deg.",
    ]
    write_csv("sexagesimal.csv", comments, ["ra_str", "dec_str", "ra_deg", "dec_deg"], rows)


# ---------------------------------------------------------------------------
# 2. distances
# ---------------------------------------------------------------------------


def own_distances(h0, om, ode, orad, ok, w0, wa, z):
    """Independent E(z), D_C, D_M with quad at epsabs=0, epsrel=1e-12."""

    def e(zz):
        a = 1.0 + zz
        de = ode * a ** (3.0 * (1.0 + w0 + wa)) * math.exp(-3.0 * wa * zz / a)
        return math.sqrt(om * a**3 + orad * a**4 + ok * a**2 + de)

    dh = C_KMS / h0
    dc = dh * quad(lambda zz: 1.0 / e(zz), 0.0, z, epsabs=0.0, epsrel=1e-12, limit=200)[0]
    if ok > 0:
        sk = math.sqrt(ok)
        dm = dh / sk * math.sinh(sk * dc / dh)
    elif ok < 0:
        sk = math.sqrt(-ok)
        dm = dh / sk * math.sin(sk * dc / dh)
    else:
        dm = dc
    return e(z), dc, dm


def make_distances():
    rng = rng_for(4)
    models = [
        ("flat_lcdm", FlatLambdaCDM(H0=70, Om0=0.3, Tcmb0=0), -1.0, 0.0),
        ("open_lcdm", LambdaCDM(H0=70, Om0=0.3, Ode0=0.5, Tcmb0=0), -1.0, 0.0),
        ("closed_lcdm", LambdaCDM(H0=70, Om0=0.3, Ode0=0.9, Tcmb0=0), -1.0, 0.0),
        ("flat_w0wa", Flatw0waCDM(H0=70, Om0=0.3, w0=-0.9, wa=0.2, Tcmb0=0), -0.9, 0.2),
        ("open_w0wa", w0waCDM(H0=67, Om0=0.31, Ode0=0.6, w0=-1.1, wa=-0.3, Tcmb0=0), -1.1, -0.3),
        (
            "flat_lcdm_radiation",
            FlatLambdaCDM(H0=67.66, Om0=0.3111, Tcmb0=2.7255, Neff=3.046, m_nu=0 * u.eV),
            -1.0,
            0.0,
        ),
        ("h_units", FlatLambdaCDM(H0=100, Om0=0.3, Tcmb0=0), -1.0, 0.0),
    ]
    fixed_z = [0.001, 0.01, 0.05, 0.1, 0.5, 1.0, 2.0, 3.0]
    rows = []
    notes = []
    for name, cosmo, w0, wa in models:
        zs = np.concatenate([fixed_z, np.sort(log_uniform(rng, 0.001, 3.0, 60))])
        h0 = cosmo.H0.to_value(u.km / u.s / u.Mpc)
        om = float(cosmo.Om0)
        ode = float(cosmo.Ode0)
        orad = float(cosmo.Ogamma0 + cosmo.Onu0)
        ok = float(cosmo.Ok0)
        dc = cosmo.comoving_distance(zs).to_value(u.Mpc)
        dm = cosmo.comoving_transverse_distance(zs).to_value(u.Mpc)
        dl = cosmo.luminosity_distance(zs).to_value(u.Mpc)
        da = cosmo.angular_diameter_distance(zs).to_value(u.Mpc)
        mu = cosmo.distmod(zs).to_value(u.mag)
        ez = cosmo.efunc(zs)
        worst = 0.0
        for i, z in enumerate(zs):
            e_o, dc_o, dm_o = own_distances(h0, om, ode, orad, ok, w0, wa, z)
            dl_o, da_o = (1 + z) * dm_o, dm_o / (1 + z)
            for a, b in [(dc[i], dc_o), (dm[i], dm_o), (dl[i], dl_o), (da[i], da_o), (ez[i], e_o)]:
                worst = max(worst, abs(a - b) / abs(b))
            mu_o = 5.0 * math.log10(dl_o) + 25.0
            assert abs(mu[i] - mu_o) < 1e-8, (name, z, mu[i], mu_o)
            rows.append((name, h0, om, ode, orad, w0, wa, z, dc[i], dm[i], dl[i], da[i], mu[i], ez[i]))
        assert worst < 1e-9, (name, worst)
        flat_resid = 1.0 - om - ode - orad
        notes.append(
            f"  {name}: Ok0={ok!r}; 1-omega_m-omega_de-omega_r in doubles = {flat_resid:.3g}; "
            f"max rel diff astropy vs own quad = {worst:.2e}"
        )
    comments = [
        "FLRW distances from astropy.cosmology. Columns:",
        "  model: name. h0: H0 (km/s/Mpc). omega_m, omega_de, omega_r: density parameters today",
        "  (omega_r = Ogamma0 + Onu0; neutrinos massless so radiation scales as (1+z)^4; curvature",
        "  omega_k = 1 - omega_m - omega_de - omega_r). w0, wa: dark energy w(a) = w0 + wa (1-a)",
        "  (LambdaCDM rows have w0=-1, wa=0). z: redshift. d_c: comoving (line-of-sight) distance,",
        "  d_m: comoving transverse distance, d_l: luminosity distance, d_a: angular diameter",
        "  distance, all in Mpc (in h^-1 Mpc for model h_units, which has H0=100). mu: distance",
        "  modulus 5 log10(d_l / 10 pc) in mag. hubble_e: E(z) = H(z)/H0.",
        "Models (parameters given in the project brief as test choices):",
        "  flat_lcdm   FlatLambdaCDM(H0=70, Om0=0.3, Tcmb0=0)",
        "  open_lcdm   LambdaCDM(H0=70, Om0=0.3, Ode0=0.5, Tcmb0=0)",
        "  closed_lcdm LambdaCDM(H0=70, Om0=0.3, Ode0=0.9, Tcmb0=0)",
        "  flat_w0wa   Flatw0waCDM(H0=70, Om0=0.3, w0=-0.9, wa=0.2, Tcmb0=0)",
        "  open_w0wa   w0waCDM(H0=67, Om0=0.31, Ode0=0.6, w0=-1.1, wa=-0.3, Tcmb0=0)",
        "  flat_lcdm_radiation FlatLambdaCDM(H0=67.66, Om0=0.3111, Tcmb0=2.7255 K, Neff=3.046, m_nu=0)",
        "    (values resemble Planck 2018 and Tcmb0/Neff the usual standard values - from memory)",
        "  h_units     FlatLambdaCDM(H0=100, Om0=0.3, Tcmb0=0)",
        "Per model: z = 0.001, 0.01, 0.05, 0.1, 0.5, 1, 2, 3, then 60 sorted log-uniform in [0.001, 3].",
        "Values written are astropy's. astropy 8.0.2 integrates with a closed form (flat LCDM, no",
        "radiation), incomplete elliptic integrals (non-flat LCDM, no radiation), else scipy quad at its",
        "default tolerances (epsabs=epsrel=1.49e-8). All were cross-checked against an independent",
        "E(z) integrated with scipy quad at epsabs=0, epsrel=1e-12; asserted agreement < 1e-9 relative:",
    ] + notes + [f"c = {C_KMS} km/s (exact SI value)."]
    cols = ["model", "h0", "omega_m", "omega_de", "omega_r", "w0", "wa", "z", "d_c", "d_m", "d_l", "d_a", "mu", "hubble_e"]
    write_csv("distances.csv", comments, cols, rows)
    return notes


# ---------------------------------------------------------------------------
# 3. CMB frame
# ---------------------------------------------------------------------------


def apex_coord(apex):
    return SkyCoord(l=apex["l_deg"] * u.deg, b=apex["b_deg"] * u.deg, frame="galactic")


def cos_to_apex(ra, dec, apex):
    return np.cos(icrs(ra, dec).separation(apex_coord(apex)).rad)


def helio_to_cmb(z_h, cos_t, beta):
    """Exact, with cos_t the angle measured in the heliocentric frame."""
    gamma = 1.0 / math.sqrt(1.0 - beta * beta)
    return (1.0 + z_h) / (gamma * (1.0 - beta * cos_t)) - 1.0


def cmb_to_helio(z_cmb, cos_t, beta):
    gamma = 1.0 / math.sqrt(1.0 - beta * beta)
    return (1.0 + z_cmb) * gamma * (1.0 - beta * cos_t) - 1.0


def make_cmb_frame():
    assert C_KMS == const.c.to_value(u.km / u.s)
    rng = rng_for(5)
    ra_r, dec_r = random_sky(rng, 300)
    zh_r = log_uniform(rng, 0.001, 3.0, 300)
    rows = []
    max_diff = 0.0
    for label, apex in [("planck2018", PLANCK2018_APEX), ("user", USER_APEX)]:
        a = apex_coord(apex).icrs
        # two special sources: exactly at the apex and at the anti-apex
        ra = np.concatenate([[a.ra.deg, (a.ra.deg + 180.0) % 360.0], ra_r])
        dec = np.concatenate([[a.dec.deg, -a.dec.deg], dec_r])
        zh = np.concatenate([[0.01, 0.01], zh_r])
        beta = apex["v_kms"] / C_KMS
        gamma = 1.0 / math.sqrt(1.0 - beta * beta)
        cos_t = cos_to_apex(ra, dec, apex)
        for i in range(len(ra)):
            zc = helio_to_cmb(zh[i], cos_t[i], beta)
            if cos_t[i] > 0:
                assert zc > zh[i]
            elif cos_t[i] < 0:
                assert zc < zh[i]
            back = cmb_to_helio(zc, cos_t[i], beta)
            assert abs(back - zh[i]) < 1e-14 * (1 + zh[i])
            z_add = zh[i] + beta * cos_t[i]
            z_alt = (1.0 + zh[i]) * gamma * (1.0 + beta * cos_t[i]) - 1.0
            max_diff = max(max_diff, abs(z_alt - zc))
            rows.append((label, ra[i], dec[i], zh[i], cos_t[i], zc, z_add, z_alt))
    comments = [
        "Heliocentric -> CMB-frame redshift by the exact special-relativistic boost (derivation in the",
        "docstring of make_fixtures.py). The Sun moves at speed v (beta = v/c) towards the apex; theta is",
        "the angle between the source direction (as catalogued, i.e. heliocentric) and the apex.",
        "  apex: which apex block. ra, dec: ICRS source position (deg). z_helio: heliocentric redshift.",
        "  cos_theta: cos(theta), from astropy SkyCoord.separation between the source and the",
        "  Galactic apex (l, b). z_cmb: exact, 1+z_cmb = (1+z_helio) / (gamma (1 - beta cos_theta)).",
        "  z_cmb_additive: legacy first-order form z_helio + beta cos_theta (cz_cmb = cz_h + v cos theta).",
        "  z_cmb_if_cmb_frame_angle: (1+z_helio) gamma (1 + beta cos_theta) - 1, the exact formula IF",
        "  theta were measured in the CMB frame; with a heliocentric angle it differs from z_cmb by",
        f"  beta^2 sin^2(theta) (1+z) at second order (max |diff| in this file {max_diff:.3g}).",
        "Inverse of z_cmb: 1+z_helio = (1+z_cmb) gamma (1 - beta cos_theta).",
        "Apex planck2018: v = 369.82 km/s towards Galactic l = 264.021, b = 48.253 deg",
        "  (Planck Collaboration 2020, A&A 641, A1; values as given in the project brief).",
        "Apex user: v = 627 km/s towards l = 276, b = 30 deg (arbitrary test apex from the project brief).",
        f"c = {C_KMS} km/s (exact SI value). Each block: row 1 source at the apex, row 2 at the anti-apex",
        "(both z_helio = 0.01), then 300 random sources (same positions and z_helio in both blocks),",
        "uniform on the sky with z_helio log-uniform in [0.001, 3].",
    ]
    cols = ["apex", "ra", "dec", "z_helio", "cos_theta", "z_cmb", "z_cmb_additive", "z_cmb_if_cmb_frame_angle"]
    write_csv("cmb_frame.csv", comments, cols, rows)
    return max_diff


# ---------------------------------------------------------------------------
# 4. galaxy peculiar velocities
# ---------------------------------------------------------------------------


def v_from_zpec(zp):
    s = (1.0 + zp) ** 2
    return C_KMS * (s - 1.0) / (s + 1.0)


def make_galaxy_pv():
    rng = rng_for(6)
    cosmo = FlatLambdaCDM(H0=70, Om0=0.3, Tcmb0=0)
    apex = PLANCK2018_APEX
    beta_sun = apex["v_kms"] / C_KMS
    n_low, n_high = 290, 10
    # Draw, rejecting galaxies whose CMB-frame or heliocentric redshift would be
    # <= 0 (a blueshifted nearby galaxy has no positive distance to log).
    gal = []
    rejected = 0
    while len(gal) < n_low + n_high:
        ra, dec = random_sky(rng, 1)
        if len(gal) < n_low:
            zc = log_uniform(rng, 0.002, 0.3, 1)[0]
        else:
            zc = rng.uniform(0.3, 1.5)
        v = rng.uniform(-1500.0, 1500.0)
        b = v / C_KMS
        zp = math.sqrt((1.0 + b) / (1.0 - b)) - 1.0
        z_cmb = (1.0 + zc) * (1.0 + zp) - 1.0
        cos_t = cos_to_apex(ra, dec, apex)[0]
        zh = cmb_to_helio(z_cmb, cos_t, beta_sun)
        if z_cmb <= 0.0 or zh <= 0.0:
            rejected += 1
            continue
        gal.append((ra[0], dec[0], zc, v, zh, cos_t))

    rows = []
    max_dz = 0.0
    max_dv = 0.0
    zmin, zmax = 1e-5, 5.0
    for ra, dec, zc_true, v_true, zh, cos_t in gal:
        dm_true = cosmo.comoving_transverse_distance(zc_true).to_value(u.Mpc)
        for conv in ["cosmological", "observed"]:
            if conv == "cosmological":
                mu = float(cosmo.distmod(zc_true).to_value(u.mag))
            else:
                mu = 5.0 * math.log10((1.0 + zh) * dm_true) + 25.0
            # ---- inversion, using only (z_helio, mu, direction) ----
            with warnings.catch_warnings():
                warnings.simplefilter("error")
                if conv == "cosmological":
                    zc = z_at_value(cosmo.distmod, mu * u.mag, zmin=zmin, zmax=zmax, ztol=1e-12,
                                    method="Brent", bracket=(1e-3, 1.0))
                else:
                    target = 10.0 ** (mu / 5.0 - 5.0) / (1.0 + zh) * u.Mpc
                    zc = z_at_value(cosmo.comoving_transverse_distance, target, zmin=zmin, zmax=zmax,
                                    ztol=1e-12, method="Brent", bracket=(1e-3, 1.0))
            zc = float(zc.value if hasattr(zc, "value") else zc)
            z_cmb = helio_to_cmb(zh, cos_t, beta_sun)
            zp = (1.0 + z_cmb) / (1.0 + zc) - 1.0
            v = v_from_zpec(zp)
            dc = cosmo.comoving_distance(zc).to_value(u.Mpc)
            dc_cmb = cosmo.comoving_distance(z_cmb).to_value(u.Mpc)
            eta = math.log10(dc_cmb / dc)
            max_dz = max(max_dz, abs(zc - zc_true))
            max_dv = max(max_dv, abs(v - v_true))
            assert abs(zc - zc_true) < 1e-9, (conv, zc, zc_true)
            rows.append((ra, dec, zh, mu, conv, z_cmb, zc, zp, v, dc, eta, v_true))
    comments = [
        "One-object peculiar velocities. Cosmology FlatLambdaCDM(H0=70, Om0=0.3, Tcmb0=0) (astropy);",
        "Sun's motion: Planck 2018 apex, 369.82 km/s towards l=264.021, b=48.253 deg (Planck",
        "Collaboration 2020, A&A 641, A1; values as given in the project brief). c = 299792.458 km/s.",
        "Forward model (truth): z_cos_true log-uniform in [0.002, 0.3] (290 galaxies) or uniform in",
        "[0.3, 1.5] (10 galaxies); v_pec_true uniform in [-1500, 1500] km/s; positions uniform on the sky;",
        "1+z_pec = sqrt((1+b)/(1-b)), b = v_pec_true/c; 1+z_cmb = (1+z_cos)(1+z_pec);",
        "1+z_helio = (1+z_cmb) gamma (1 - beta cos_theta) (inverse of the exact boost; see cmb_frame.csv).",
        f"Galaxies with z_cmb <= 0 or z_helio <= 0 were redrawn ({rejected} redraws).",
        "Each galaxy appears twice, once per dl_convention:",
        "  cosmological: mu = 5 log10(D_L(z_cos)/10pc), D_L = (1+z_cos) D_M(z_cos)  (astropy distmod)",
        "  observed:     mu = 5 log10((1+z_helio) D_M(z_cos)/10pc)",
        "Inversion (uses only ra, dec, z_helio, mu): z_cmb from z_helio by the exact boost; z_cos from",
        "mu with astropy.cosmology.z_at_value (method Brent, bracket (1e-3, 1), zmin 1e-5, zmax 5,",
        "ztol 1e-12) on distmod (cosmological) or on comoving_transverse_distance with target",
        "D_M = 10^(mu/5-5) Mpc / (1+z_helio) (observed). Asserted |z_cos - z_cos_true| < 1e-9;",
        f"max seen {max_dz:.2e}; max |v_pec - v_pec_true| = {max_dv:.2e} km/s.",
        "Columns: ra, dec (ICRS deg); z_helio; mu (mag); dl_convention; z_cmb; z_cos (recovered);",
        "  z_pec = (1+z_cmb)/(1+z_cos) - 1; v_pec (km/s) = c((1+z_pec)^2-1)/((1+z_pec)^2+1);",
        "  d_c = D_C(z_cos) (Mpc); eta = log10(D_C(z_cmb)/D_C(z_cos)); v_pec_true (km/s, the truth).",
    ]
    cols = ["ra", "dec", "z_helio", "mu", "dl_convention", "z_cmb", "z_cos", "z_pec", "v_pec", "d_c", "eta", "v_pec_true"]
    write_csv("galaxy_pv.csv", comments, cols, rows)
    return rejected, max_dz, max_dv


def main():
    wanted = set(sys.argv[1:])
    known = {"sky_frames.csv", "sky_frames_fk.csv", "sky_separations.csv", "sexagesimal.csv",
             "distances.csv", "cmb_frame.csv", "galaxy_pv.csv"}
    unknown = wanted - known
    if unknown:
        sys.stderr.write(f"make_fixtures.py: unknown fixture(s) {sorted(unknown)}; known: {sorted(known)}\n")
        sys.exit(2)

    def want(name):
        return not wanted or name in wanted

    if want("sky_frames.csv"):
        bias_mas = make_sky_frames()
        print(f"frame-bias effect on Galactic coordinates: up to {bias_mas:.1f} mas")
    if want("sky_frames_fk.csv"):
        make_sky_frames_fk()
    if want("sky_separations.csv"):
        make_sky_separations()
    if want("sexagesimal.csv"):
        make_sexagesimal()
    if want("distances.csv"):
        notes = make_distances()
        print("distance cross-checks:")
        for n in notes:
            print(n)
    if want("cmb_frame.csv"):
        cmb_diff = make_cmb_frame()
        print(f"cmb_frame: max |z_cmb_if_cmb_frame_angle - z_cmb| = {cmb_diff:.3g}")
    if want("galaxy_pv.csv"):
        rejected, max_dz, max_dv = make_galaxy_pv()
        print(f"galaxy_pv: {rejected} redraws; max |dz_cos| = {max_dz:.2e}; max |dv| = {max_dv:.2e} km/s")


if __name__ == "__main__":
    main()
