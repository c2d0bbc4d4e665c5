//! `flowsift demo`: a handful of invented galaxies forward-modelled from a known flow, then
//! measured back with the one-object calculator. (The full catalogue demo replaces this
//! once the pipeline runs on the shipped survey.)

use anyhow::anyhow;
use clap::Args;

use flowsift::physics::cosmology::{Cosmology, CosmologyParams, LengthUnit};
use flowsift::physics::estimators::{Distance, DistanceKind, DlConvention, EstimatorOptions};
use flowsift::physics::object::{evaluate, ObjectContext, ObjectInput};
use flowsift::physics::redshift::{compose_cmb, doppler_redshift, Redshift};
use flowsift::physics::restframe::{default_apex, Boost, BoostMethod};
use flowsift::physics::sky::{Direction, Galactic, SkyRotations};

/// Run on the invented galaxies.
#[derive(Debug, Args)]
pub struct DemoArgs {}

/// Invented galaxies: (Galactic l, b in degrees, cosmological redshift). Their true
/// velocities are a 300 km/s bulk flow towards l = 300°, b = 20°.
const GALAXIES: &[(f64, f64, f64)] = &[
    (300.0, 25.0, 0.012),
    (120.0, -20.0, 0.020),
    (45.0, 60.0, 0.035),
    (210.0, -45.0, 0.050),
    (330.0, 5.0, 0.075),
    (90.0, 30.0, 0.095),
];

pub fn run(_a: DemoArgs) -> anyhow::Result<()> {
    let cosmology = Cosmology::new(CosmologyParams::default_common_practice()).map_err(|e| anyhow!("{e}"))?;
    let apex = default_apex("cmb");
    let cmb = Boost::new(&apex)?;
    let rotations = SkyRotations::default();
    let flow = Direction::<Galactic>::from_lon_lat_deg(300.0, 20.0)?.at_distance(300.0);
    let ctx = ObjectContext {
        cosmology: &cosmology,
        rotations,
        cmb,
        method: BoostMethod::Exact,
        options: EstimatorOptions {
            convention: DlConvention::Observed,
            sigma_star_km_s: 0.0,
        },
        length_unit: LengthUnit::Mpc,
    };
    println!("Invented galaxies in a 300 km/s bulk flow towards l = 300°, b = 20° (truth known):");
    println!("{:>8} {:>7} {:>9} {:>9} {:>9} {:>10} {:>10}", "l", "b", "z_helio", "z_cmb", "mu", "v_true", "v_pec");
    let to_icrs = rotations.icrs_to_galactic.inverse();
    for &(l, b, z_cos) in GALAXIES {
        let n = Direction::<Galactic>::from_lon_lat_deg(l, b)?;
        let [x, y, z] = n.xyz();
        let v_true = flow[0] * x + flow[1] * y + flow[2] * z;
        let z_cmb = compose_cmb(Redshift::new(z_cos)?, doppler_redshift(v_true)?);
        let z_helio = cmb.to_heliocentric(z_cmb, &n);
        let d_l = z_helio.one_plus() * cosmology.transverse_comoving_distance(z_cos)?;
        let mu = 5.0 * d_l.log10() + 25.0;
        let (ra, dec) = to_icrs.apply(&n).lon_lat_deg();
        let input = ObjectInput {
            ra_deg: ra,
            dec_deg: dec,
            z_helio: z_helio.value(),
            z_err: 0.0,
            distance: Distance { kind: DistanceKind::Mu, value: mu, error: 0.0 },
        };
        let r = evaluate(&ctx, &input)?;
        println!(
            "{l:>8.1} {b:>7.1} {:>9.6} {:>9.6} {mu:>9.4} {v_true:>10.1} {:>10.1}",
            z_helio.value(),
            r.z_cmb,
            r.v_pec
        );
    }
    println!("\nnote: flat ΛCDM H0 = 70, Ω_m = 0.3 (common practice); Planck 2018 dipole; D_L convention 'observed'.");
    Ok(())
}
