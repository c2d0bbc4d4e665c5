//! Monte Carlo errors: N draws per object from the distance-error distribution (Gaussian in
//! μ and η, log-normal in D) and, when given, the redshift error (Gaussian in z_helio); each
//! draw goes through the full calculation (boost, exact inversion, composition, Doppler).
//! Reported: median and 16th/84th percentiles of v_pec, and the number of draws that had
//! no solution.
//!
//! Reproducibility: object i draws from its own ChaCha8 stream (seed, stream i), so the
//! same seed gives identical output whatever the number of threads.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

use crate::physics::estimators::{cosmological_redshift, Distance, DistanceKind, Observation};
use crate::physics::object::ObjectContext;
use crate::physics::redshift::{doppler_velocity_of, Cmb, Heliocentric, Redshift};
use crate::physics::restframe::BoostMethod;
use crate::physics::sky::{Direction, Icrs};

use super::{chunked, InputColumns, RowStatus};

/// Percentile summaries per object (NaN where not computed).
#[derive(Debug, Clone)]
pub struct MonteCarlo {
    pub median: Vec<f64>,
    pub p16: Vec<f64>,
    pub p84: Vec<f64>,
    pub failed: Vec<f64>,
}

/// Linear-interpolated quantiles (the "type 7" definition of Hyndman & Fan 1996, Am. Stat.
/// 50, 361) at p in ascending order, by partial selection.
pub fn quantiles(values: &mut [f64], ps: &[f64; 3]) -> [f64; 3] {
    let n = values.len();
    if n == 0 {
        return [f64::NAN; 3];
    }
    let mut out = [0.0; 3];
    let mut lo_bound = 0;
    for (k, p) in ps.iter().enumerate() {
        let h = (n - 1) as f64 * p;
        let lo = h.floor() as usize;
        let frac = h - lo as f64;
        let (_, x_lo, rest) =
            values[lo_bound..].select_nth_unstable_by(lo - lo_bound, |a, b| a.total_cmp(b));
        let x_lo = *x_lo;
        let x_hi = if frac > 0.0 && !rest.is_empty() {
            rest.iter().copied().fold(f64::INFINITY, f64::min)
        } else {
            x_lo
        };
        out[k] = x_lo + frac * (x_hi - x_lo);
        lo_bound = lo;
    }
    out
}

/// Run `draws` draws per ok row.
pub fn run(
    ctx: &ObjectContext<'_>,
    input: &InputColumns,
    status: &[u8],
    draws: usize,
    seed: u64,
    progress: &(dyn Fn(usize) + Sync),
) -> MonteCarlo {
    let n = status.len();
    let mut cols = vec![vec![f64::NAN; n]; 4];
    let mut st = status.to_vec();
    chunked(&mut cols, &mut st)
        .into_par_iter()
        .for_each(|(start, mut out, st)| {
            let mut buf = Vec::with_capacity(draws);
            for j in 0..st.len() {
                if st[j] != RowStatus::Ok as u8 {
                    continue;
                }
                let i = start + j;
                let mut rng = ChaCha8Rng::seed_from_u64(seed);
                rng.set_stream(i as u64);
                buf.clear();
                let mut failed = 0usize;
                let Ok(icrs) =
                    Direction::<Icrs>::from_lon_lat_deg(input.ra_deg[i], input.dec_deg[i])
                else {
                    continue;
                };
                let gal = ctx.rotations.icrs_to_galactic.apply(&icrs);
                let (z0, sz) = (input.z_helio[i], input.z_err[i]);
                let (d0, sd) = (input.distance[i], input.distance_err[i]);
                let factor = ctx.length_unit.from_mpc_factor(ctx.cosmology.params());
                for _ in 0..draws {
                    let gz: f64 = StandardNormal.sample(&mut rng);
                    let gd: f64 = StandardNormal.sample(&mut rng);
                    let zh = z0 + sz * gz;
                    let value = match input.distance_kind {
                        DistanceKind::Mu | DistanceKind::Eta => d0 + sd * gd,
                        // Log-normal: σ_lnD = σ_D / D.
                        DistanceKind::Dl | DistanceKind::Dc => d0 / factor * (sd / d0 * gd).exp(),
                    };
                    let Ok(z_helio) = Redshift::<Heliocentric>::new(zh) else {
                        failed += 1;
                        continue;
                    };
                    let z_cmb: Redshift<Cmb> = match ctx.method {
                        BoostMethod::Exact => ctx.cmb.from_heliocentric(z_helio, &gal),
                        BoostMethod::LegacyAdditive => {
                            match crate::physics::restframe::legacy_additive(
                                &ctx.cmb, z_helio, &gal,
                            ) {
                                Ok(z) => z,
                                Err(_) => {
                                    failed += 1;
                                    continue;
                                }
                            }
                        }
                    };
                    if z_cmb.value() <= 0.0 {
                        failed += 1;
                        continue;
                    }
                    let obs = Observation {
                        z_helio,
                        z_cmb,
                        z_err: 0.0,
                        distance: Distance {
                            kind: input.distance_kind,
                            value,
                            error: 0.0,
                        },
                    };
                    match cosmological_redshift(ctx.cosmology, &obs, ctx.options.convention) {
                        Ok(zc) if zc > 0.0 => {
                            buf.push(doppler_velocity_of(z_cmb.one_plus() / (1.0 + zc) - 1.0))
                        }
                        _ => failed += 1,
                    }
                }
                let [p16, p50, p84] = quantiles(
                    &mut buf,
                    &[0.158_655_253_931_457, 0.5, 0.841_344_746_068_543],
                );
                out[0][j] = p50;
                out[1][j] = p16;
                out[2][j] = p84;
                out[3][j] = failed as f64;
            }
            progress(st.len());
        });
    let mut it = cols.into_iter();
    MonteCarlo {
        median: it.next().expect("4"),
        p16: it.next().expect("4"),
        p84: it.next().expect("4"),
        failed: it.next().expect("4"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Type-7 quantiles of 1..=5: median 3, p = 0.25 → 2 (Hyndman & Fan 1996 definition).
    #[test]
    fn quantiles_type7() {
        let mut v = vec![5.0, 1.0, 4.0, 2.0, 3.0];
        let q = quantiles(&mut v, &[0.25, 0.5, 0.9]);
        assert_eq!(q[0], 2.0);
        assert_eq!(q[1], 3.0);
        assert!((q[2] - 4.6).abs() < 1e-12);
    }
}
