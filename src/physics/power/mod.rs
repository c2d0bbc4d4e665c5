//! Linear matter power spectrum, its σ8 normalisation, the linear growth rate, and the
//! linear-theory covariance of a maximum-likelihood bulk flow.
//!
//! Units: wavenumbers k in h Mpc⁻¹, lengths and positions in h⁻¹ Mpc, P(k) in (h⁻¹ Mpc)³ at
//! z = 0, velocities in km/s. In these units the Hubble constant is H0 = 100 km/s per h⁻¹ Mpc
//! whatever h is ([`H0_KM_S_PER_MPC_H`]).
//!
//! Methods, each implemented once here:
//! - transfer function: Eisenstein & Hu (1998), ApJ 496, 605, astro-ph/9709112 —
//!   [`transfer_eh98`] (with baryon oscillations) and [`transfer_eh98_no_wiggle`];
//! - P(k) = A k^{n_s} T(k)², A fixed by σ(8 h⁻¹ Mpc) = σ8 with the top-hat window —
//!   [`LinearPower`];
//! - growth rate f ≈ Ω_m(z)^0.55: Linder (2005), astro-ph/0507263 (Phys. Rev. D 72, 043529 —
//!   journal reference from memory) —
//!   [`growth_rate`];
//! - radial-velocity correlation of two objects in linear theory: Górski (1988), ApJ 332,
//!   L7 — the kernel f_mn(k) inside [`bulk_flow_window`];
//! - bulk-flow window W²_ij(k) and the expected covariance of a weighted (e.g. maximum
//!   likelihood) bulk-flow estimate: Watkins, Feldman & Hudson (2009), MNRAS 392, 743,
//!   arXiv:0809.4041 — [`bulk_flow_window`], [`lcdm_bulk_flow_covariance`];
//! - rms bulk flow of a top-hat sphere — [`tophat_bulk_flow_rms`];
//! - the object-by-object covariance of radial velocities (same kernel, Górski 1988; Watkins,
//!   Feldman & Hudson 2009) — [`radial_velocity_covariance`], [`RadialVelocityCorrelation`].
//!
//! # Numerics
//! Integrals over k are done in ln k. The σ(R) and top-hat integrals use composite 8-point
//! Gauss–Legendre panels of width ≤ 0.02 in ln k over 10⁻⁷ … 10³ h Mpc⁻¹ (what lies outside
//! is below 10⁻⁹ of σ²(R) and of the top-hat velocity integral); P(k) at the nodes is
//! computed once per [`LinearPower`]. Spherical Bessel combinations use their power series
//! for x < 1, where the closed forms lose digits to cancellation. The pair sum of the window
//! is exact (every pair, no binning) and runs over symmetric pairs in parallel; its partial
//! sums are added in a fixed order, so results do not depend on the number of threads.

mod bessel;
mod fast_window;
mod quadrature;
mod spectrum;
mod velocity_covariance;
mod window;

pub use bessel::tophat_window;
pub(crate) use fast_window::fft3;
pub use fast_window::{
    lcdm_bulk_flow_covariance_auto, lcdm_bulk_flow_covariance_mesh, mesh_cells_for, WindowMethod,
    MESH_CELLS_MAX, MESH_CELLS_MIN, MESH_CROSSOVER, MESH_MAX_SPACING, MESH_TARGET_SPACING,
};
pub use spectrum::{
    growth_rate, growth_rate_of, tophat_bulk_flow_rms, transfer_eh98, transfer_eh98_no_wiggle,
    LinearPower, PowerParams,
};
pub use velocity_covariance::{
    largest_distance, power_params_for, radial_velocity_covariance, RadialVelocityCorrelation,
    LINEAR_K_MAX,
};
pub use window::{
    bulk_flow_window, lcdm_bulk_flow_covariance, lcdm_bulk_flow_covariance_by_separation,
    BULK_FLOW_K_MAX, BULK_FLOW_K_MIN, BULK_FLOW_K_POINTS,
};

/// H0 in the units of this module: 100 km/s per h⁻¹ Mpc.
pub const H0_KM_S_PER_MPC_H: f64 = 100.0;
