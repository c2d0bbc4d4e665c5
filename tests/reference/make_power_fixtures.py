#!/usr/bin/env python3
"""Generate the reference fixtures of flowsift's linear power spectrum and
bulk-flow covariance module (src/physics/power.rs).

The CSV files written by this script (tests/reference/power_*.csv) are
COMMITTED to the repository.  The Rust tests (tests/power_spectrum.rs) read
them; no Python runs at test time.  Run this script again only when a fixture
has to change, and commit the result.

How to run (the virtual environment lives outside the repository and is never
committed):

    python3 -m venv /tmp/powenv
    /tmp/powenv/bin/pip install colossus==1.4.0 numpy==2.4.6 scipy==1.17.1
    /tmp/powenv/bin/python tests/reference/make_power_fixtures.py

The script refuses to run (exit status 2, with a message) when the installed
versions differ from the pinned ones below.  It is deterministic: every random
draw comes from numpy Generators seeded from SEED.

Sources of the reference values
-------------------------------
* colossus 1.4.0 (Diemer 2018, ApJS 239, 35), a general-purpose cosmology
  library: its Eisenstein & Hu (1998) transfer functions
  (colossus.cosmology.power_spectrum.modelEisenstein98 and
  modelEisenstein98ZeroBaryon), its sigma8-normalised matterPowerSpectrum and
  its top-hat sigma(R).  The Cosmology objects are made with
  interpolation=False (exact evaluation, no lookup tables) and
  accuracy_sigma=1e-10 (the relative tolerance colossus passes to
  scipy.integrate.quad for the sigma integrals; its default is 3e-3).
* scipy 1.17.1 / numpy 2.4.6 for everything this script integrates itself:
  an independent sigma8 normalisation, the exact LambdaCDM growth rate from
  the growth ODE, the bulk-flow window from scipy.special.spherical_jn, the
  top-hat bulk-flow rms and the expected bulk-flow covariance of a sample.

Physics used by the script (written out here so it can be checked):

  P(k) = A k^ns T(k)^2, A fixed by sigma(8 Mpc/h) = sigma8, with
  sigma^2(R) = (1/2 pi^2) Int dk k^2 P(k) W(kR)^2 and
  W(x) = 3 (sin x - x cos x) / x^3.

  Linear-theory radial-velocity correlation of objects at r_n, r_m
  (Gorski 1988, ApJ 332, L7):
      <v_n v_m> = (H0 f)^2 / (2 pi^2) Int dk P(k) f_mn(k),
      f_mn(k)   = Int d^2k^/(4 pi) (r^_n.k^)(r^_m.k^) exp(i k.(r_n - r_m))
                = (1/3) cos(a) [j0(kA) - 2 j2(kA)] + j2(kA) r_n r_m sin^2(a) / A^2,
  A = |r_n - r_m|, a the angle between r^_n and r^_m; f_nn = 1/3.  The script
  checks the closed form against a direct numerical angular average (1-D
  integral over mu = k^.A^ after the azimuthal average).
  Bulk-flow window and covariance (Watkins, Feldman & Hudson 2009, MNRAS 392,
  743): W2_ij(k) = sum_nm w_in w_jm f_mn(k),
  R_ij = (H0 f)^2/(2 pi^2) Int dk P(k) W2_ij(k), H0 = 100 km/s per Mpc/h.
  Top-hat sphere, one Cartesian component:
      sigma_1D^2 = (H0 f)^2 / (6 pi^2) Int dk P(k) W(kR)^2.
  Thin shell of radius R sampled densely and uniformly, maximum-likelihood
  weights w_n = 3 r^_n / N: in the continuum limit
      R_ij = delta_ij (H0 f)^2/(2 pi^2) Int dk P(k) [j0(kR) - 2 j2(kR)]^2 / 3.
  (Derivation: Int dOmega/4pi r^_i (r^.k^) exp(i kR r^.k^) = k^_i [j0 - 2 j2]/3.)

  Growth: f = dlnD/dlna from D'' + (3/a + dlnE/da) D' = (3/2) Om a^-5 E^-2 D,
  written as df/dlna = -f^2 - (2 + dlnE/dlna) f + (3/2) Om(a) and integrated
  from a = 1e-5 (f = 1, matter domination) with solve_ivp (DOP853,
  rtol 1e-12); cross-checked against the Heath (1977) integral
  D ∝ E(a) Int_0^a da' / (a' E(a'))^3, valid for matter + curvature + Lambda.

Output files (tests/reference/; '#' comment lines, one header line, then
comma-separated rows; floats written with '%.17g'):

    power_params.csv            parameter sets and sigma8 normalisations
    power_transfer.csv          EH98 T(k), full and no-wiggle
    power_spectrum.csv          colossus P(k) at z = 0
    power_sigma.csv             colossus sigma(R)
    power_growth.csv            exact LambdaCDM growth rate f(z)
    power_window_objects.csv    40 positions and weights for the window test
    power_window.csv            W2_ij(k) of those objects
    power_covariance.csv        R_ij of those objects (per-pair quadrature)
    power_tophat.csv            top-hat bulk-flow rms (one component)
    power_shell.csv             thin-shell continuum bulk-flow variance
"""

import importlib.metadata
import sys

# Pinned library versions: the newest that installed from PyPI with pip when
# these fixtures were generated.
PINNED = {
    "colossus": "1.4.0",
    "numpy": "2.4.6",
    "scipy": "1.17.1",
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
            "make_power_fixtures.py: installed versions differ from the pinned ones:\n"
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
from scipy.integrate import IntegrationWarning, quad, solve_ivp  # noqa: E402
from scipy.special import spherical_jn  # noqa: E402
from colossus.cosmology import cosmology as col_cosmology  # noqa: E402
from colossus.cosmology import power_spectrum as col_ps  # noqa: E402

OUT = Path(__file__).resolve().parent

# Seed: an arbitrary project choice.
SEED = 20261215

VERSIONS_LINE = "# versions: " + ", ".join(f"{k} {v}" for k, v in PINNED.items())

# H0 in km/s per (Mpc/h): 100 by definition of h.
H0_H = 100.0

# Parameter sets.  "planck18": the values of PowerParams::planck2018() in
# power.rs (Planck 2018 VI, TT,TE,EE+lowE+lensing+BAO; Omega_b from
# Omega_b h^2 = 0.02242; T_cmb = 2.7255 K).  The other two are arbitrary test
# choices spanning a high baryon fraction (strong acoustic wiggles) and a
# low-h, high-Omega_m model with T_cmb = 2.7 K (Theta_2.7 = 1).
PARAM_SETS = {
    "planck18": dict(h=0.6766, omega_m=0.3111, omega_b=0.02242 / 0.6766**2,
                     t_cmb=2.7255, n_s=0.9665, sigma8=0.8102),
    "high_baryon": dict(h=0.70, omega_m=0.25, omega_b=0.08,
                        t_cmb=2.725, n_s=1.0, sigma8=0.9),
    "low_h": dict(h=0.55, omega_m=0.45, omega_b=0.03,
                  t_cmb=2.7, n_s=0.95, sigma8=0.75),
}


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
    assert name.startswith("power_")
    path = OUT / name
    with open(path, "w", newline="\n") as fh:
        fh.write(f"# {name}: generated by tests/reference/make_power_fixtures.py; "
                 "do not edit by hand\n")
        fh.write(VERSIONS_LINE + f"; seed {SEED}\n")
        for line in comments:
            fh.write("# " + line + "\n" if line else "#\n")
        fh.write(",".join(columns) + "\n")
        for r in rows:
            assert len(r) == len(columns), (name, r)
            fh.write(",".join(fmt(v) for v in r) + "\n")
    print(f"wrote {path.relative_to(OUT.parent.parent)}: {len(rows)} rows")


# ---------------------------------------------------------------------------
# colossus objects
# ---------------------------------------------------------------------------

def colossus_cosmology(name, p):
    """A colossus Cosmology for one parameter set, exact (no interpolation)."""
    params = dict(flat=True, H0=100.0 * p["h"], Om0=p["omega_m"], Ob0=p["omega_b"],
                  sigma8=p["sigma8"], ns=p["n_s"], Tcmb0=p["t_cmb"])
    c = col_cosmology.setCosmology("flowsift_" + name, params=params,
                                   interpolation=False, persistence="",
                                   print_warnings=False)
    c.accuracy_sigma = 1e-10
    return c


def transfer_full(k, p):
    return col_ps.modelEisenstein98(np.asarray(k, dtype=float), p["h"], p["omega_m"],
                                    p["omega_b"], p["t_cmb"])


def transfer_nowiggle(k, p):
    return col_ps.modelEisenstein98ZeroBaryon(np.asarray(k, dtype=float), p["h"],
                                              p["omega_m"], p["omega_b"], p["t_cmb"])


def tophat(x):
    x = np.asarray(x, dtype=float)
    out = np.empty_like(x)
    small = x < 1e-2
    xs = x[small]
    out[small] = 1.0 - xs**2 / 10.0 + xs**4 / 280.0 - xs**6 / 15120.0
    xl = x[~small]
    out[~small] = 3.0 * (np.sin(xl) - xl * np.cos(xl)) / xl**3
    return out


def quad_lnk(fun_k, k_lo, k_hi):
    """Int dk fun(k) = Int dlnk k fun(k), split into 20 pieces per decade, by quad
    on each piece at epsrel 1e-11 and an absolute tolerance of 1e-14 of a first
    rough estimate of the whole integral (pieces far in the tails are tiny)."""
    edges = np.log(np.geomspace(k_lo, k_hi, 20 * int(round(math.log10(k_hi / k_lo))) + 1))

    def g(u):
        return math.exp(u) * fun_k(math.exp(u))

    rough = sum(abs(quad(g, a, b, epsrel=1e-6, limit=500)[0])
                for a, b in zip(edges[:-1], edges[1:]))
    total = 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        val, _ = quad(g, a, b, epsabs=1e-14 * rough, epsrel=1e-11, limit=2000)
        total += val
    return total


def sigma2_unnormalised(p, r):
    """(1/2 pi^2) Int dk k^2 k^ns T^2 W^2, over 1e-7 h/Mpc .. min(1e4, 4000/R).
    Beyond kR = 4000 the integrand (~ P(k) k^-2 R^-4) adds less than 1e-12."""
    def integrand(k):
        t = float(transfer_full(k, p))
        w = float(tophat(np.array([k * r]))[0])
        return k * k * k ** p["n_s"] * t * t * w * w
    return quad_lnk(integrand, 1e-7, min(1e4, 4000.0 / r)) / (2.0 * math.pi**2)


def make_power_model(name, p):
    """Returns (colossus cosmology, P(k) vectorised with the colossus norm,
    amplitude from our own quadrature, amplitude from colossus)."""
    c = colossus_cosmology(name, p)
    amp_col = c.matterPowerSpectrumNorm("eisenstein98")
    amp_quad = p["sigma8"] ** 2 / sigma2_unnormalised(p, 8.0)
    rel = abs(amp_col / amp_quad - 1.0)
    assert rel < 1e-5, (name, amp_col, amp_quad, rel)

    def pk(k):
        k = np.asarray(k, dtype=float)
        t = transfer_full(k, p)
        return amp_col * k ** p["n_s"] * t * t

    # The vectorised P(k) is colossus's own matterPowerSpectrum (z = 0).
    for k in (1e-4, 0.02, 0.3, 5.0):
        a = c.matterPowerSpectrum(k, z=0.0, model="eisenstein98")
        b = float(pk(k))
        assert abs(a / b - 1.0) < 1e-14, (name, k, a, b)
    return c, pk, amp_quad, amp_col


# ---------------------------------------------------------------------------
# power_params.csv, power_transfer.csv, power_spectrum.csv, power_sigma.csv
# ---------------------------------------------------------------------------

def make_power_files():
    models = {}
    param_rows, tf_rows, pk_rows, sig_rows = [], [], [], []
    k_tf = np.geomspace(1e-4, 10.0, 41)
    k_pk = np.geomspace(1e-4, 10.0, 31)
    radii = [4.0, 8.0, 16.0, 50.0]
    worst_norm = 0.0
    worst_sigma = 0.0
    for name, p in PARAM_SETS.items():
        c, pk, amp_quad, amp_col = make_power_model(name, p)
        models[name] = (c, pk)
        worst_norm = max(worst_norm, abs(amp_col / amp_quad - 1.0))
        param_rows.append([name, p["h"], p["omega_m"], p["omega_b"], p["t_cmb"], p["n_s"],
                           p["sigma8"], amp_quad, amp_col])
        tf = transfer_full(k_tf, p)
        tn = transfer_nowiggle(k_tf, p)
        for k, a, b in zip(k_tf, tf, tn):
            tf_rows.append([name, k, a, b])
        for k in k_pk:
            pk_rows.append([name, k, c.matterPowerSpectrum(k, z=0.0, model="eisenstein98")])
        for r in radii:
            s = c.sigma(r, z=0.0)
            # colossus's sigma(R) against our own quadrature with its P(k).
            s_ours = math.sqrt(sigma2_unnormalised(p, r) * amp_col)
            worst_sigma = max(worst_sigma, abs(s / s_ours - 1.0))
            assert abs(s / s_ours - 1.0) < 1e-5, (name, r, s, s_ours)
            sig_rows.append([name, r, s])
        # sigma(8) reproduces sigma8 (a consistency check of the normalisation).
        assert abs(c.sigma(8.0, z=0.0) / p["sigma8"] - 1.0) < 1e-8

    write_csv("power_params.csv", [
        "Parameter sets of the power-spectrum tests. h = H0/(100 km/s/Mpc); omega_m, omega_b:",
        "matter and baryon densities today; t_cmb in K; n_s: primordial tilt; sigma8: rms",
        "linear density contrast in a top-hat sphere of 8 Mpc/h at z = 0.",
        "planck18 = PowerParams::planck2018() (Planck 2018 VI, base LCDM,",
        "TT,TE,EE+lowE+lensing+BAO; omega_b = 0.02242 / h^2); the other two are arbitrary.",
        "amplitude: A in P(k) = A k^n_s T(k)^2 ((Mpc/h)^3 with k in h/Mpc), from this script's",
        "own quadrature of sigma^2(8 Mpc/h) (scipy quad, ln k from 1e-7 to 1e4 h/Mpc in",
        "20 pieces per decade, epsrel 1e-11) with colossus's EH98 transfer function.",
        "amplitude_colossus: colossus Cosmology.matterPowerSpectrumNorm('eisenstein98') with",
        f"accuracy_sigma = 1e-10. Largest relative difference of the two: {worst_norm:.2e}.",
    ], ["set", "h", "omega_m", "omega_b", "t_cmb", "n_s", "sigma8", "amplitude",
        "amplitude_colossus"], param_rows)

    write_csv("power_transfer.csv", [
        "Eisenstein & Hu (1998, ApJ 496, 605) transfer functions from colossus 1.4.0:",
        "t_full = colossus.cosmology.power_spectrum.modelEisenstein98(k, h, Om0, Ob0, Tcmb0)",
        "(with baryon oscillations, EH98 eqs. 2-24), t_nowiggle = modelEisenstein98ZeroBaryon",
        "(EH98 eqs. 26, 28-31). k in h/Mpc, 41 log-spaced values from 1e-4 to 10 per set;",
        "parameter sets in power_params.csv.",
    ], ["set", "k", "t_full", "t_nowiggle"], tf_rows)

    write_csv("power_spectrum.csv", [
        "Linear matter power spectrum at z = 0 from colossus 1.4.0",
        "Cosmology.matterPowerSpectrum(k, z=0, model='eisenstein98'), interpolation=False,",
        "accuracy_sigma=1e-10 (normalised to sigma8). k in h/Mpc, pk in (Mpc/h)^3.",
    ], ["set", "k", "pk"], pk_rows)

    write_csv("power_sigma.csv", [
        "Top-hat sigma(R) at z = 0 from colossus 1.4.0 Cosmology.sigma(R, z=0)",
        "(interpolation=False, accuracy_sigma=1e-10), R in Mpc/h. Each value is asserted",
        "equal to this script's own quadrature with the same P(k) to 1e-5 relative; the",
        f"largest difference is {worst_sigma:.1e} (colossus stops its k range where the",
        "integrand falls below 1e-6 of its maximum).",
    ], ["set", "r", "sigma"], sig_rows)
    return models


# ---------------------------------------------------------------------------
# power_growth.csv
# ---------------------------------------------------------------------------

def growth_rate_exact(om, ode, z_values):
    ok = 1.0 - om - ode

    def e2(a):
        return om / a**3 + ok / a**2 + ode

    def dlne_dlna(a):
        return 0.5 * (-3.0 * om / a**3 - 2.0 * ok / a**2) / e2(a)

    def rhs(lna, y):
        a = math.exp(lna)
        f = y[0]
        om_a = om / a**3 / e2(a)
        return [-f * f - (2.0 + dlne_dlna(a)) * f + 1.5 * om_a]

    a_eval = 1.0 / (1.0 + np.asarray(z_values))
    order = np.argsort(a_eval)
    sol = solve_ivp(rhs, (math.log(1e-5), 0.0), [1.0], method="DOP853",
                    t_eval=np.log(a_eval[order]), rtol=1e-12, atol=1e-14)
    assert sol.success
    f_ode = np.empty(len(a_eval))
    f_ode[order] = sol.y[0]

    # Heath (1977) integral: D(a) ∝ E(a) I(a), I(a) = Int_0^a da' (a' E(a'))^-3;
    # f = dlnE/dlna + a / (a E)^3 / I(a).
    f_heath = []
    for a in a_eval:
        i_a, _ = quad(lambda x: (x * math.sqrt(e2(x))) ** -3 if x > 0 else 0.0, 0.0, a,
                      epsabs=0.0, epsrel=1e-13, limit=500)
        e = math.sqrt(e2(a))
        f_heath.append(dlne_dlna(a) + a / (a * e) ** 3 / i_a)
    f_heath = np.array(f_heath)
    assert np.max(np.abs(f_ode / f_heath - 1.0)) < 1e-9, (om, ode, f_ode, f_heath)
    return f_ode


def make_growth():
    models = [(0.3111, 0.6889), (0.25, 0.75), (0.35, 0.65), (1.0, 0.0), (0.3, 0.65),
              (0.3, 0.75)]
    zs = [0.0, 0.05, 0.1, 0.3, 0.5, 1.0, 2.0]
    rows = []
    worst_flat = 0.0
    worst_curved = 0.0
    for om, ode in models:
        f_exact = growth_rate_exact(om, ode, zs)
        ok = 1.0 - om - ode
        for z, f in zip(zs, f_exact):
            e2 = om * (1 + z) ** 3 + ok * (1 + z) ** 2 + ode
            approx = (om * (1 + z) ** 3 / e2) ** 0.55
            rel = abs(approx / f - 1.0)
            if abs(ok) < 1e-12:
                worst_flat = max(worst_flat, rel)
            else:
                worst_curved = max(worst_curved, rel)
            rows.append([om, ode, z, f])
    write_csv("power_growth.csv", [
        "Exact linear growth rate f = dlnD/dlna for matter + curvature + Lambda (no",
        "radiation), omega_k = 1 - omega_m - omega_de. From the growth ODE",
        "df/dlna = -f^2 - (2 + dlnE/dlna) f + (3/2) Omega_m(a), integrated from a = 1e-5",
        "with f = 1 by scipy solve_ivp (DOP853, rtol 1e-12, atol 1e-14); asserted equal to the",
        "Heath (1977) integral solution to 1e-9.",
        "The gamma = 0.55 approximation Omega_m(z)^0.55 (Linder 2005) differs from these",
        f"values by at most {worst_flat:.2e} (flat models) and {worst_curved:.2e} (curved ones).",
    ], ["omega_m", "omega_de", "z", "f"], rows)


# ---------------------------------------------------------------------------
# Velocity window: power_window_objects.csv, power_window.csv
# ---------------------------------------------------------------------------

def window_objects():
    rng = rng_for(1)
    n_rand = 36
    # Uniform in a ball of radius 150 Mpc/h (r = 150 u^(1/3)), at least 5 Mpc/h out.
    r = 150.0 * rng.uniform((5.0 / 150.0) ** 3, 1.0, n_rand) ** (1.0 / 3.0)
    mu = rng.uniform(-1.0, 1.0, n_rand)
    phi = rng.uniform(0.0, 2.0 * math.pi, n_rand)
    s = np.sqrt(1.0 - mu * mu)
    pos = np.stack([r * s * np.cos(phi), r * s * np.sin(phi), r * mu], axis=1)
    extra = []
    # A near-coincident pair: object 0 moved by 1e-3 Mpc/h in a random direction.
    d = rng.normal(size=3)
    extra.append(pos[0] + 1e-3 * d / np.linalg.norm(d))
    # Same direction as object 1, 1.5 times as far (alpha = 0).
    extra.append(1.5 * pos[1])
    # Opposite direction to object 2 (alpha = pi).
    extra.append(-0.8 * pos[2])
    # Very close to the observer.
    d = rng.normal(size=3)
    extra.append(0.5 * d / np.linalg.norm(d))
    pos = np.vstack([pos, np.array(extra)])
    w = 0.1 * rng.normal(size=(pos.shape[0], 3))
    return pos, w


def kernel_closed_form(rn, rm, k):
    """Gorski (1988) form of f_mn(k), as written in the module docstring."""
    a_vec = rn - rm
    a = np.linalg.norm(a_vec)
    un = rn / np.linalg.norm(rn)
    um = rm / np.linalg.norm(rm)
    if a == 0.0:
        return np.full_like(np.asarray(k, dtype=float), 1.0 / 3.0)
    cos_a = float(np.dot(un, um))
    sin2_a = float(np.dot(np.cross(un, um), np.cross(un, um)))
    x = np.asarray(k, dtype=float) * a
    j0 = spherical_jn(0, x)
    j2 = spherical_jn(2, x)
    return cos_a / 3.0 * (j0 - 2.0 * j2) + j2 * np.linalg.norm(rn) * np.linalg.norm(rm) \
        * sin2_a / a**2


def kernel_angular_average(rn, rm, k):
    """f_mn(k) as the angular average of (r^_n.k^)(r^_m.k^) exp(i k.A), done
    numerically: with mu = k^.A^ and the azimuth averaged analytically,
    <(r^_n.k^)(r^_m.k^)>_phi = mu^2 pn pm + (1 - mu^2)/2 (c - pn pm),
    pn = r^_n.A^, pm = r^_m.A^, c = r^_n.r^_m; the imaginary part is odd in mu."""
    a_vec = rn - rm
    a = np.linalg.norm(a_vec)
    ah = a_vec / a
    un = rn / np.linalg.norm(rn)
    um = rm / np.linalg.norm(rm)
    pn, pm, c = float(un @ ah), float(um @ ah), float(un @ um)
    x = k * a

    # Composite 20-point Gauss-Legendre on 400 panels of [0, 1] (x <= 600 here, so
    # each panel holds at most a quarter of an oscillation).
    t, wt = np.polynomial.legendre.leggauss(20)
    edges = np.linspace(0.0, 1.0, 401)
    mid = 0.5 * (edges[1:] + edges[:-1])
    half = 0.5 * (edges[1:] - edges[:-1])
    mu = (mid[:, None] + half[:, None] * t[None, :]).ravel()
    wmu = (half[:, None] * wt[None, :]).ravel()
    g = np.cos(x * mu) * (mu * mu * pn * pm + 0.5 * (1 - mu * mu) * (c - pn * pm))
    return float(np.sum(wmu * g))  # (1/2) Int_-1^1 = Int_0^1 for an even integrand


def check_small_x_bessel():
    # scipy's spherical_jn against the series at small argument (j2 ~ x^2/15).
    for x in (1e-7, 1e-4, 1e-2, 0.3):
        j2_series = x * x / 15.0 * (1 - x * x / 14.0 + x**4 / 504.0 - x**6 / 33264.0
                                    + x**8 / 3459456.0 - x**10 / 518918400.0)
        assert abs(spherical_jn(2, x) / j2_series - 1.0) < 1e-12, x
        j0_series = (1 - x * x / 6.0 + x**4 / 120.0 - x**6 / 5040.0 + x**8 / 362880.0
                     - x**10 / 39916800.0)
        assert abs(spherical_jn(0, x) / j0_series - 1.0) < 1e-13, x


def make_window(models):
    check_small_x_bessel()
    pos, w = window_objects()
    n = pos.shape[0]
    # Closed form against the angular average, for several pairs and k.
    worst = 0.0
    for (i, j) in [(0, 36), (1, 37), (2, 38), (3, 4), (5, 39), (10, 20)]:
        for k in (1e-3, 0.05, 0.3, 2.0):
            a = float(kernel_closed_form(pos[i], pos[j], np.array([k]))[0])
            b = kernel_angular_average(pos[i], pos[j], k)
            worst = max(worst, abs(a - b))
    assert worst < 1e-11, worst

    ks = [1e-4, 1e-3, 0.01, 0.05, 0.1, 0.3, 1.0, 3.0]
    kk = np.array(ks)
    w2 = np.zeros((len(ks), 3, 3))
    for a in range(n):
        for b in range(n):
            f = kernel_closed_form(pos[a], pos[b], kk)
            w2 += f[:, None, None] * np.outer(w[a], w[b])[None, :, :]
    obj_rows = [[i, *pos[i], *w[i]] for i in range(n)]
    write_csv("power_window_objects.csv", [
        "Positions (x, y, z in Mpc/h, observer at the origin) and weights w_i,n",
        "(i = 0, 1, 2) of 40 objects for the bulk-flow window test. Objects 0-35: uniform in",
        "a ball of radius 150 Mpc/h (r > 5); 36: object 0 moved by 1e-3 Mpc/h; 37: 1.5 x",
        "object 1 (same direction); 38: -0.8 x object 2 (opposite direction); 39: at",
        "0.5 Mpc/h. Weights: 0.1 x standard normal. All draws from numpy default_rng.",
    ], ["n", "x", "y", "z", "w0", "w1", "w2"], obj_rows)
    rows = []
    for ik, k in enumerate(ks):
        for i in range(3):
            for j in range(i, 3):
                rows.append([k, i, j, w2[ik, i, j]])
    write_csv("power_window.csv", [
        "Bulk-flow window W2_ij(k) = sum_n sum_m w_in w_jm f_mn(k) (Watkins, Feldman &",
        "Hudson 2009) of the objects in power_window_objects.csv, by a direct double loop",
        "over all ordered pairs (n, m) with the Gorski (1988) closed form",
        "f_mn = (1/3) cos(a) [j0(kA) - 2 j2(kA)] + j2(kA) r_n r_m sin^2(a) / A^2, f_nn = 1/3,",
        "j_l from scipy.special.spherical_jn, sin^2(a) from the cross product of the unit",
        "vectors. The closed form was asserted equal to a direct numerical angular average",
        f"of (r_n.k)(r_m.k) exp(i k.A) to {worst:.1e} (absolute) for six pairs at four k.",
        "k in h/Mpc; W2 dimensionless (weights squared).",
    ], ["k", "i", "j", "w2"], rows)
    return pos, w


# ---------------------------------------------------------------------------
# power_covariance.csv: R_ij of the window objects, per pair
# ---------------------------------------------------------------------------

def pair_integral(pk, a, cos_a, pn, pm, tol):
    """Int_0^inf dk P(k) f(k) with f = cos_a j1(x)/x - pn pm k^2 j2(x)/x^2, x = kA,
    pn = r^_n.A and pm = r^_m.A (A = r_n - r_m, not normalised).
    (This is the same kernel as the Gorski form: (j0 + j2)/3 = j1/x and
    (r^_n.A)(r^_m.A) = A^2 cos_a - r_n r_m sin^2 a.)
    Split: [1e-8, K1] with K1 = 30/A by quad in ln k (at most ~5 oscillations);
    [K1, 200] by QAWO (quad weight='sin'/'cos'); [200, inf) by QAWF. Every piece
    has absolute tolerance tol (pair integrals can cancel to nearly zero)."""
    k1 = 30.0 / a

    def f_direct(k):
        x = k * a
        if x < 1.0:
            # Power series (the closed forms cancel badly at small x):
            # j1(x)/x = sum t_s, t_0 = 1/3, t_{s+1} = -t_s x^2 / (2 (s+1) (2s+5));
            # j2(x)/x^2 = sum u_s, u_0 = 1/15, u_{s+1} = -u_s x^2 / (2 (s+1) (2s+7)).
            t, u = 1.0 / 3.0, 1.0 / 15.0
            j1x, j2x2 = t, u
            for n in range(12):
                t *= -x * x / (2.0 * (n + 1) * (2 * n + 5))
                u *= -x * x / (2.0 * (n + 1) * (2 * n + 7))
                j1x += t
                j2x2 += u
        else:
            s, c = math.sin(x), math.cos(x)
            j1x = (s - x * c) / x**3
            j2x2 = ((3.0 - x * x) * s - 3.0 * x * c) / x**5
        return cos_a * j1x - pn * pm * k * k * j2x2

    def p_scalar(k):
        return float(pk(k))

    total = 0.0
    lo = 1e-8
    if k1 > lo:
        edges = np.geomspace(lo, k1, max(2, int(10 * math.log10(k1 / lo)) + 2))
        for u0, u1 in zip(np.log(edges[:-1]), np.log(edges[1:])):
            v, _ = quad(lambda u: math.exp(u) * p_scalar(math.exp(u)) * f_direct(math.exp(u)),
                        u0, u1, epsabs=tol, epsrel=1e-10, limit=2000)
            total += v

    # Oscillatory part: f = gs(k) sin(kA) + gc(k) cos(kA) with
    # j1/x = sin/x^3 - cos/x^2, j2/x^2 = (3/x^5 - 1/x^3) sin - (3/x^4) cos.
    def gs(k):
        x = k * a
        return p_scalar(k) * (cos_a / x**3 - pn * pm * k * k * (3.0 / x**5 - 1.0 / x**3))

    def gc(k):
        x = k * a
        return p_scalar(k) * (-cos_a / x**2 + pn * pm * k * k * 3.0 / x**4)

    k2 = 200.0
    if k1 < k2:
        # QAWO on sub-intervals of bounded length keeps the Chebyshev moments modest.
        edges = np.geomspace(k1, k2, max(2, int(3 * math.log10(k2 / k1)) + 2))
        for b0, b1 in zip(edges[:-1], edges[1:]):
            v1, _ = quad(gs, b0, b1, weight="sin", wvar=a, epsabs=tol, epsrel=1e-10,
                         limit=2000)
            v2, _ = quad(gc, b0, b1, weight="cos", wvar=a, epsabs=tol, epsrel=1e-10,
                         limit=2000)
            total += v1 + v2
    start = max(k1, k2)
    v1, _ = quad(gs, start, np.inf, weight="sin", wvar=a, epsabs=tol, limlst=200)
    v2, _ = quad(gc, start, np.inf, weight="cos", wvar=a, epsabs=tol, limlst=200)
    return total + v1 + v2


def pair_integral_check(pk, a, cos_a, pn, pm):
    """Second evaluation of pair_integral for a cross-check: composite 10-point
    Gauss-Legendre in k on panels no wider than a quarter period 2 pi/(4A) (and
    log-spaced below), up to K = max(100, 30/A), plus the same QAWF tail."""
    big_k = max(100.0, 30.0 / a)
    lo = 1e-8
    k_lin = min(big_k, max(lo * 10, 1.0 / a))
    edges = list(np.geomspace(lo, k_lin, 400))
    n_lin = int(math.ceil((big_k - k_lin) / (0.5 * math.pi / a)))
    if n_lin > 0:
        edges += list(np.linspace(k_lin, big_k, n_lin + 1)[1:])
    edges = np.array(edges)
    t, wt = np.polynomial.legendre.leggauss(10)
    mid = 0.5 * (edges[1:] + edges[:-1])
    half = 0.5 * (edges[1:] - edges[:-1])
    k = (mid[:, None] + half[:, None] * t[None, :]).ravel()
    wk = (half[:, None] * wt[None, :]).ravel()
    x = k * a
    small = x < 1.0
    xs = x[small]
    tt, uu = np.full_like(xs, 1.0 / 3.0), np.full_like(xs, 1.0 / 15.0)
    s1, s2 = tt.copy(), uu.copy()
    for n in range(12):
        tt = tt * (-xs * xs / (2.0 * (n + 1) * (2 * n + 5)))
        uu = uu * (-xs * xs / (2.0 * (n + 1) * (2 * n + 7)))
        s1 += tt
        s2 += uu
    j1x = np.empty_like(x)
    j2x2 = np.empty_like(x)
    j1x[small], j2x2[small] = s1, s2
    xl = x[~small]
    j1x[~small] = (np.sin(xl) - xl * np.cos(xl)) / xl**3
    j2x2[~small] = ((3.0 - xl * xl) * np.sin(xl) - 3.0 * xl * np.cos(xl)) / xl**5
    body = float(np.sum(wk * pk(k) * (cos_a * j1x - pn * pm * k * k * j2x2)))

    def gs(kk):
        xx = kk * a
        return float(pk(kk)) * (cos_a / xx**3 - pn * pm * kk * kk * (3.0 / xx**5 - 1.0 / xx**3))

    def gc(kk):
        xx = kk * a
        return float(pk(kk)) * (-cos_a / xx**2 + pn * pm * kk * kk * 3.0 / xx**4)

    v1, _ = quad(gs, big_k, np.inf, weight="sin", wvar=a, epsabs=1e-13, limlst=200)
    v2, _ = quad(gc, big_k, np.inf, weight="cos", wvar=a, epsabs=1e-13, limlst=200)
    return body + v1 + v2


CHECK_PAIRS = {(0, 36), (1, 37), (2, 38), (3, 4), (5, 39), (10, 20), (7, 33)}


def make_covariance(models, pos, w):
    _, pk = models["planck18"]
    f_growth = 0.5
    n = pos.shape[0]
    # Self terms: f_nn = 1/3 for all k, Int P dk from 1e-8 to 1e4 (the rest is < 1e-12).
    int_p = quad_lnk(lambda k: float(pk(k)), 1e-8, 1e4)
    r = np.zeros((3, 3))
    for a in range(n):
        r += np.outer(w[a], w[a]) * int_p / 3.0
    norms = np.linalg.norm(pos, axis=1)
    unit = pos / norms[:, None]
    worst_pair = 0.0
    for a in range(n):
        for b in range(a + 1, n):
            a_vec = pos[a] - pos[b]
            sep = float(np.linalg.norm(a_vec))
            cos_a = float(unit[a] @ unit[b])
            pn = float(unit[a] @ a_vec)
            pm = float(unit[b] @ a_vec)
            val = pair_integral(pk, sep, cos_a, pn, pm, 1e-12 * int_p)
            if (a, b) in CHECK_PAIRS:
                val2 = pair_integral_check(pk, sep, cos_a, pn, pm)
                worst_pair = max(worst_pair, abs(val - val2) / int_p)
            s = np.outer(w[a], w[b]) + np.outer(w[b], w[a])
            r += s * val
    assert worst_pair < 1e-9, worst_pair
    r *= (H0_H * f_growth) ** 2 / (2.0 * math.pi**2)
    rows = []
    for i in range(3):
        for j in range(i, 3):
            rows.append(["planck18", f_growth, i, j, r[i, j]])
    write_csv("power_covariance.csv", [
        "Expected covariance R_ij (km/s)^2 of the bulk flow estimated with the weights of",
        "power_window_objects.csv in linear LambdaCDM (parameter set planck18, growth rate f",
        "as given): R_ij = (H0 f)^2/(2 pi^2) Int_0^inf dk P(k) W2_ij(k), H0 = 100 km/s per",
        "Mpc/h, P(k) = colossus matterPowerSpectrum (EH98, sigma8-normalised). Computed pair",
        "by pair, without a k grid: self terms (1/3) Int P dk; each pair's Int P f_mn dk by",
        "scipy quad in ln k up to k = 30/A, then QAWO/QAWF Fourier quadrature to infinity.",
        "For the pairs (n, m) in " + " ".join(f"({p},{q})" for p, q in sorted(CHECK_PAIRS)) + " the pair",
        "integral was repeated by composite Gauss-Legendre on quarter-period panels; largest",
        f"difference {worst_pair:.1e} of Int P dk.",
    ], ["set", "f", "i", "j", "r_ij"], rows)


# ---------------------------------------------------------------------------
# power_tophat.csv, power_shell.csv
# ---------------------------------------------------------------------------

def make_bulk(models):
    _, pk = models["planck18"]
    f_growth = 0.52
    rows = []
    for radius in (20.0, 50.0, 100.0):
        integral = quad_lnk(
            lambda k: float(pk(k)) * float(tophat(np.array([k * radius]))[0]) ** 2, 1e-8,
            min(1e3, 4000.0 / radius))
        sigma_1d = math.sqrt((H0_H * f_growth) ** 2 / (6.0 * math.pi**2) * integral)
        rows.append(["planck18", radius, f_growth, sigma_1d])
    write_csv("power_tophat.csv", [
        "rms of one Cartesian component of the bulk flow of a top-hat sphere of radius R",
        "(Mpc/h) in linear theory, km/s: sigma_1D^2 = (H0 f)^2/(6 pi^2) Int dk P(k) W(kR)^2,",
        "W(x) = 3 (sin x - x cos x)/x^3, H0 = 100 km/s per Mpc/h, P(k) = colossus",
        "matterPowerSpectrum (set planck18), f as given. scipy quad in ln k from 1e-8 to",
        "min(1e3, 4000/R) h/Mpc, in 20 pieces per decade, epsrel 1e-11.",
    ], ["set", "radius", "f", "sigma_1d"], rows)

    rows = []
    for radius in (50.0,):
        def integrand(k):
            x = k * radius
            g = spherical_jn(0, x) - 2.0 * spherical_jn(2, x)
            return float(pk(k)) * g * g / 3.0
        integral = quad_lnk(integrand, 1e-8, 4000.0 / radius)
        rows.append(["planck18", radius, f_growth,
                     (H0_H * f_growth) ** 2 / (2.0 * math.pi**2) * integral])
    write_csv("power_shell.csv", [
        "Bulk-flow variance per Cartesian component, (km/s)^2, of the maximum-likelihood",
        "bulk flow of radial velocities on a thin shell of radius R (Mpc/h), sampled densely",
        "and uniformly (continuum limit, equal errors): R_ii = (H0 f)^2/(2 pi^2) Int dk P(k)",
        "[j0(kR) - 2 j2(kR)]^2 / 3 (derivation in the script's docstring). P(k) = colossus",
        "matterPowerSpectrum (set planck18), quad in ln k from 1e-8 to 4000/R h/Mpc.",
    ], ["set", "radius", "f", "r_ii"], rows)


def main():
    warnings.simplefilter("error", RuntimeWarning)
    warnings.simplefilter("error", IntegrationWarning)
    models = make_power_files()
    make_growth()
    pos, w = make_window(models)
    make_bulk(models)
    make_covariance(models, pos, w)


if __name__ == "__main__":
    main()
