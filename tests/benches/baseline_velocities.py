#!/usr/bin/env python3
"""The numpy + astropy script a working cosmologist would write for the job that
`flowsift velocities` does, used as the baseline by tests/benches/speed_ratio.sh.

It is not a test and cargo never runs it: speed_ratio.sh makes its own virtual environment
(outside the repository, under target/) with the versions pinned there.

    baseline_velocities.py velocities IN.csv OUT.csv
        Read a catalogue with columns ra, dec (ICRS, deg), z_helio, mu (mag), mu_err, then
        1. heliocentric -> CMB frame with the exact boost
           1 + z_cmb = (1 + z_helio) / [gamma (1 - beta cos theta)],
           theta the angle between the source and the CMB dipole apex (astropy SkyCoord);
           the apex is the one of src/physics/restframe/apex.rs, default_apex("cmb"): Planck 2018
           (Planck Collaboration I 2020, A&A 641, A1, Table 2), 369.82 km/s towards
           l = 264.021 deg, b = 48.253 deg;
        2. z_cos from mu by inverting D_L(z) = (1 + z) D_M(z) of astropy's
           FlatLambdaCDM(H0=70, Om0=0.3) (Tcmb0 = 0, as flowsift's default Omega_r = 0):
           the careful user's fast version, a linear interpolation of ln z against ln D_L
           on a grid of 40 000 redshifts, log-spaced over 1e-6 <= z <= 3 (distances computed
           once by astropy; rows beyond the grid get NaN) -- not z_at_value per row, which
           is a scalar root-finder and far too slow for 10^6 rows;
        3. z_pec = (1 + z_cmb)/(1 + z_cos) - 1 and v_pec = c z_pec (km/s);
        4. write every input column plus z_cmb, z_cos, z_pec, v_pec as CSV (pandas).
        This D_L(z) = (1 + z_cos) D_M(z_cos) is flowsift's `--dl-convention cosmological`
        (README "Conventions"), which speed_ratio.sh therefore passes to flowsift.

    baseline_velocities.py montecarlo IN.csv OUT.csv --rows K --draws N --seed S
        The first K rows; N Gaussian draws of mu per row (mu_err), each inverted as above,
        and the 16th, 50th and 84th percentiles of v_pec per row, in blocks of rows so that
        memory stays bounded. Written as row, v_mc_p16, v_mc_median, v_mc_p84.

    baseline_velocities.py compare FLOWSIFT.csv BASELINE.csv [--mc-flowsift F --mc-baseline B]
        Not timed. Prints how far the two outputs are apart on the same rows.

    baseline_velocities.py summary TIMES ROWS PY_MC_ROWS BIG.fits BIG.csv
        Not timed. The ratio tables of speed_ratio.sh from its file of times.
"""

import argparse
import sys

import numpy as np

APEX_SPEED_KM_S = 369.82  # src/physics/restframe/apex.rs, default_apex("cmb"): Planck 2018
APEX_L_DEG = 264.021
APEX_B_DEG = 48.253
H0 = 70.0  # flowsift's default cosmology ("common" preset): flat LCDM, H0 = 70, Om0 = 0.3
OM0 = 0.3
GRID_N = 40_000
GRID_Z_MIN = 1e-6
GRID_Z_MAX = 3.0


def cmb_redshift(ra_deg, dec_deg, z_helio):
    import astropy.units as u
    from astropy.constants import c
    from astropy.coordinates import SkyCoord

    c_km_s = c.to_value(u.km / u.s)
    sources = SkyCoord(ra=ra_deg * u.deg, dec=dec_deg * u.deg, frame="icrs")
    apex = SkyCoord(l=APEX_L_DEG * u.deg, b=APEX_B_DEG * u.deg, frame="galactic")
    cos_theta = np.cos(sources.separation(apex).rad)
    beta = APEX_SPEED_KM_S / c_km_s
    gamma = 1.0 / np.sqrt(1.0 - beta * beta)
    return (1.0 + z_helio) / (gamma * (1.0 - beta * cos_theta)) - 1.0


def mu_inverter():
    """A function mu -> z_cos, by interpolation on a grid of astropy distances."""
    import astropy.units as u
    from astropy.cosmology import FlatLambdaCDM

    cosmo = FlatLambdaCDM(H0=H0, Om0=OM0)
    z_grid = np.geomspace(GRID_Z_MIN, GRID_Z_MAX, GRID_N)
    ln_dl = np.log(cosmo.luminosity_distance(z_grid).to_value(u.Mpc))
    ln_z = np.log(z_grid)

    def z_cos(mu):
        ln_d = (mu / 5.0 - 5.0) * np.log(10.0)  # D_L in Mpc: mu = 5 log10(D_L / 10 pc)
        return np.exp(np.interp(ln_d, ln_dl, ln_z, left=np.nan, right=np.nan))

    return z_cos


def velocities(args):
    import pandas as pd
    import astropy.units as u
    from astropy.constants import c

    c_km_s = c.to_value(u.km / u.s)
    table = pd.read_csv(args.input)
    z_cmb = cmb_redshift(table["ra"].to_numpy(), table["dec"].to_numpy(),
                         table["z_helio"].to_numpy())
    z_cos = mu_inverter()(table["mu"].to_numpy())
    z_pec = (1.0 + z_cmb) / (1.0 + z_cos) - 1.0
    table["z_cmb"] = z_cmb
    table["z_cos"] = z_cos
    table["z_pec"] = z_pec
    table["v_pec"] = c_km_s * z_pec
    table.to_csv(args.output, index=False)


def montecarlo(args):
    import pandas as pd
    import astropy.units as u
    from astropy.constants import c

    c_km_s = c.to_value(u.km / u.s)
    table = pd.read_csv(args.input, nrows=args.rows)
    z_cmb = cmb_redshift(table["ra"].to_numpy(), table["dec"].to_numpy(),
                         table["z_helio"].to_numpy())
    mu = table["mu"].to_numpy()
    mu_err = table["mu_err"].to_numpy()
    invert = mu_inverter()
    rng = np.random.default_rng(args.seed)
    out = np.empty((len(table), 3))
    block = max(1, 1_000_000 // args.draws)  # about 10^6 draws (8 MB) per array
    for start in range(0, len(table), block):
        s = slice(start, start + block)
        draws = mu[s, None] + mu_err[s, None] * rng.standard_normal((len(mu[s]), args.draws))
        v = c_km_s * ((1.0 + z_cmb[s, None]) / (1.0 + invert(draws)) - 1.0)
        out[s] = np.nanpercentile(v, [16, 50, 84], axis=1).T
    pd.DataFrame({"row": np.arange(len(table)), "v_mc_p16": out[:, 0],
                  "v_mc_median": out[:, 1], "v_mc_p84": out[:, 2]}).to_csv(args.output,
                                                                           index=False)


def doppler_velocity(z_pec, c_km_s):
    """flowsift's v_pec: the relativistic Doppler law (README "Conventions")."""
    s = (1.0 + z_pec) ** 2
    return c_km_s * (s - 1.0) / (s + 1.0)


def compare(args):
    import pandas as pd

    c_km_s = 299_792.458  # as src/physics/constants.rs (and astropy.constants.c)
    cols = ["z_cmb", "z_cos", "z_pec", "v_pec", "status"]
    fs = pd.read_csv(args.flowsift, usecols=cols)
    bl = pd.read_csv(args.baseline, usecols=cols[:4])
    n = min(len(fs), len(bl))
    fs, bl = fs.iloc[:n], bl.iloc[:n]
    ok = (fs["status"] == "ok").to_numpy() & np.isfinite(bl["z_pec"].to_numpy())
    print(f"agreement on {ok.sum()} of {n} rows (flowsift status ok and baseline finite)")

    def line(label, a, b, scale=1.0, unit="km/s"):
        d = np.abs(a[ok] - b[ok]) * scale
        print(f"  {label:<44} median {np.median(d):.3g} {unit}, "
              f"99.9th percentile {np.quantile(d, 0.999):.3g}, max {d.max():.3g}")

    line("c |dz_cmb|", fs["z_cmb"].to_numpy(), bl["z_cmb"].to_numpy(), c_km_s)
    line("c |dz_cos|", fs["z_cos"].to_numpy(), bl["z_cos"].to_numpy(), c_km_s)
    line("c |dz_pec|", fs["z_pec"].to_numpy(), bl["z_pec"].to_numpy(), c_km_s)
    line("|dv_pec| (flowsift Doppler, baseline c z_pec)", fs["v_pec"].to_numpy(),
         bl["v_pec"].to_numpy())
    line("|dv_pec| (both by the Doppler law)", fs["v_pec"].to_numpy(),
         doppler_velocity(bl["z_pec"].to_numpy(), c_km_s))
    if args.mc_flowsift and args.mc_baseline:
        from astropy.io import fits

        mb = pd.read_csv(args.mc_baseline)
        k = len(mb)
        with fits.open(args.mc_flowsift, memmap=True) as hdus:
            rows = hdus[1].data[:k]
            status = np.char.strip(np.asarray(rows["status"]).astype(str))
            mf = {name: np.asarray(rows[name], dtype=float)
                  for name in ("v_pec_mc_median", "v_pec_mc_p16", "v_pec_mc_p84")}
        # percentiles commute with the monotonic Doppler law, so the baseline's percentiles
        # of c z_pec become percentiles of flowsift's v_pec exactly
        b_median = doppler_velocity(mb["v_mc_median"].to_numpy() / c_km_s, c_km_s)
        good = (status == "ok") & np.isfinite(b_median)
        d = np.abs(mf["v_pec_mc_median"] - b_median)[good]
        # the Monte Carlo error of a median: 1.2533 sigma / sqrt(N), sigma = (p84 - p16)/2,
        # and of a difference of two independent ones sqrt(2) times that
        half_width = 0.5 * (mf["v_pec_mc_p84"] - mf["v_pec_mc_p16"])[good]
        noise = np.sqrt(2.0) * 1.2533 * half_width / np.sqrt(args.draws)
        print(f"Monte Carlo medians on {good.sum()} rows (baseline's through the Doppler "
              f"law): median |dv| {np.median(d):.3g} km/s; median of |dv| / (draw noise "
              f"of the difference) {np.median(d / noise):.3g} (0.67 if they differ by "
              f"draw noise alone)")


def summary(args):
    """The ratio tables of speed_ratio.sh, from its times file (round, job, wall s, peak RSS
    kB, CPU s)."""
    import os

    rows, py_mc_rows = args.rows, args.py_mc_rows
    fits_bytes, csv_bytes = os.path.getsize(args.fits), os.path.getsize(args.csv)
    t, cpu, rss = {}, {}, {}
    for line in open(args.times):
        r, name, secs, kb, cpu_s = line.rstrip("\n").split("\t")
        t.setdefault(name, {})[r] = float(secs)
        if kb != "NA":
            rss.setdefault(name, []).append(int(kb) * 1024)
        if cpu_s != "NA":
            cpu.setdefault(name, {})[r] = float(cpu_s)
    rounds = sorted(t["fs_fits_fits"])

    def per_round(d, num, den, num_rows, den_rows):
        # num/den per row, formed within each round
        return np.array([(d[num][r] / num_rows) / (d[den][r] / den_rows) for r in rounds])

    def ratio(label, num, den, num_rows=1, den_rows=1):
        v = per_round(t, num, den, num_rows, den_rows)
        c = "—"
        # CPU time comes in hundredths of a second: not for the short floor runs
        if cpu and min(cpu[den].values()) >= 0.5:
            c = f"{np.median(per_round(cpu, num, den, num_rows, den_rows)):.3g}"
        print(f"| {label} | {np.median(v):.3g} | {v.min():.3g}–{v.max():.3g} | {c} |")

    print("\n| ratio, same round | wall time: median | wall time: range | CPU time: median |")
    print("| --- | --- | --- | --- |")
    ratio("numpy+astropy script CSV→CSV / flowsift CSV→CSV", "py_csv_csv", "fs_csv_csv")
    ratio("numpy+astropy script CSV→CSV / flowsift FITS→FITS", "py_csv_csv", "fs_fits_fits")
    ratio("script Monte Carlo / flowsift `--monte-carlo`, per row", "py_mc", "fs_fits_mc",
          py_mc_rows, rows)
    ratio("flowsift FITS→FITS / `cat` FITS", "fs_fits_fits", "floor_read_fits")
    ratio("flowsift FITS→FITS / `cp` FITS", "fs_fits_fits", "floor_copy_fits")
    ratio("flowsift CSV→CSV / `cat` CSV", "fs_csv_csv", "floor_read_csv")
    ratio("flowsift CSV→CSV / `cp` CSV", "fs_csv_csv", "floor_copy_csv")
    ratio("flowsift FITS→Parquet / FITS→FITS", "fs_fits_parquet", "fs_fits_fits")
    ratio("flowsift `--monte-carlo` / FITS→FITS", "fs_fits_mc", "fs_fits_fits")
    if cpu:
        print("\n| CPU time / wall time (cores kept busy) | median | range over rounds |")
        print("| --- | --- | --- |")
        for label, name in [("flowsift FITS→FITS", "fs_fits_fits"),
                            ("flowsift CSV→CSV", "fs_csv_csv"),
                            ("flowsift `--monte-carlo`", "fs_fits_mc"),
                            ("numpy+astropy script CSV→CSV", "py_csv_csv"),
                            ("numpy+astropy script Monte Carlo", "py_mc")]:
            v = np.array([cpu[name][r] / t[name][r] for r in rounds])
            print(f"| {label} | {np.median(v):.3g} | {v.min():.3g}–{v.max():.3g} |")
    if rss:
        print("\n| peak memory (RSS) / input file | median | range over rounds |")
        print("| --- | --- | --- |")
        for label, name, size in [
            ("flowsift FITS→FITS / FITS file", "fs_fits_fits", fits_bytes),
            ("flowsift CSV→CSV / CSV file", "fs_csv_csv", csv_bytes),
            ("flowsift FITS→Parquet / FITS file", "fs_fits_parquet", fits_bytes),
            ("flowsift `--monte-carlo` / FITS file", "fs_fits_mc", fits_bytes),
            ("numpy+astropy script CSV→CSV / CSV file", "py_csv_csv", csv_bytes),
        ]:
            v = np.array(rss[name]) / size
            print(f"| {label} | {np.median(v):.3g} | {v.min():.3g}–{v.max():.3g} |")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    sub = parser.add_subparsers(dest="what", required=True)
    p = sub.add_parser("velocities")
    p.add_argument("input")
    p.add_argument("output")
    p.set_defaults(run=velocities)
    p = sub.add_parser("montecarlo")
    p.add_argument("input")
    p.add_argument("output")
    p.add_argument("--rows", type=int, required=True)
    p.add_argument("--draws", type=int, required=True)
    p.add_argument("--seed", type=int, default=5)
    p.set_defaults(run=montecarlo)
    p = sub.add_parser("compare")
    p.add_argument("flowsift")
    p.add_argument("baseline")
    p.add_argument("--mc-flowsift")
    p.add_argument("--mc-baseline")
    p.add_argument("--draws", type=int, default=1000)
    p.set_defaults(run=compare)
    p = sub.add_parser("summary")
    p.add_argument("times")
    p.add_argument("rows", type=int)
    p.add_argument("py_mc_rows", type=int)
    p.add_argument("fits")
    p.add_argument("csv")
    p.set_defaults(run=summary)
    args = parser.parse_args()
    args.run(args)
    return 0


if __name__ == "__main__":
    sys.exit(main())
