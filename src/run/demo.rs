//! The demo's check of `correct` against the truth of the invented survey: Hubble residuals
//! of the SN Ia-like objects before and after the field correction, and how often the true
//! cosmological redshift lies within the stated error.

use std::path::Path;

use crate::catalogue::{read_table, ReadOptions, Table};
use crate::flow::sample::{float_column, text_column};
use crate::physics::cosmology::{Cosmology, CosmologyParams};
use crate::plan::{plan_correct, CorrectOrder};
use crate::settings::{ModelChoice, RunConfig};

/// What the check found.
#[derive(Debug, Clone)]
pub struct HubbleCheck {
    pub counts: Vec<(String, usize)>,
    /// SN Ia-like objects without an injected gross error.
    pub objects: usize,
    /// Hubble-residual rms at z_cmb and at z_cos_model, mag.
    pub rms_before: f64,
    pub rms_after: f64,
    /// Fraction with |z_cos_model − true z_cos| ≤ z_cos_model_err.
    pub within_fraction: f64,
}

fn flags(table: &Table, name: &str) -> Result<Vec<bool>, super::RunError> {
    Ok(text_column(table, name)?
        .iter()
        .map(|b| matches!(b.as_deref(), Some("true") | Some("1")))
        .collect())
}

fn rms(v: &[f64]) -> f64 {
    let n = v.len().max(1) as f64;
    let mean = v.iter().sum::<f64>() / n;
    (v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n).sqrt()
}

/// Correct `data` with the velocity grid `field` (σ_v = 250 km/s), write `out`, and compare
/// with the truth columns.
pub fn demo_hubble_check(
    data: &Path,
    field: &Path,
    out: &Path,
) -> Result<HubbleCheck, super::RunError> {
    let plan = plan_correct(CorrectOrder {
        input: data.to_path_buf(),
        output: out.to_path_buf(),
        flags: RunConfig::default(),
        model: ModelChoice {
            field: Some(field.display().to_string()),
            sigma_v: Some(250.0),
            ..Default::default()
        },
        force: true,
        override_input_settings: false,
        command_line: format!(
            "flowsift demo (correct {} --field {} --sigma-v 250)",
            data.display(),
            field.display()
        ),
    })?;
    let params: CosmologyParams = plan.shared.cosmology.params;
    let s = super::hubble_correction::run_correct(&plan)?;
    let t = read_table(out, &ReadOptions::default()).map_err(|e| e.to_string())?;
    let cosmology = Cosmology::new(params).map_err(|e| e.to_string())?;
    let mu = float_column(&t, "mu")?;
    let zc = float_column(&t, "true_z_cmb")?;
    let zm = float_column(&t, "z_cos_model")?;
    let zt = float_column(&t, "true_z_cos")?;
    let ze = float_column(&t, "z_cos_model_err")?;
    let zh = float_column(&t, "z_helio")?;
    let pop = text_column(&t, "population")?;
    let bad = flags(&t, "true_outlier")?;
    // Hubble residuals μ − μ_model(z) in the complete convention the survey was made in,
    // D_L = (1 + z_helio)(1 + z_pec) D_M(z) with 1 + z_pec = (1 + z_cmb)/(1 + z); at z = z_cmb
    // this is (1 + z_helio) D_M(z_cmb).
    let mu_model = |z: f64, z_helio: f64, z_cmb: f64| {
        cosmology
            .transverse_comoving_distance(z)
            .map(|dm| 5.0 * ((1.0 + z_helio) * (1.0 + z_cmb) / (1.0 + z) * dm).log10() + 25.0)
            .unwrap_or(f64::NAN)
    };
    let (mut before, mut after, mut within) = (vec![], vec![], 0usize);
    for i in 0..mu.len() {
        if bad[i] || pop[i].as_deref() != Some("sn-ia") {
            continue;
        }
        let v = [mu[i], zc[i], zm[i], zt[i], ze[i], zh[i]];
        if v.iter().all(|x| x.is_finite()) {
            before.push(mu[i] - mu_model(zc[i], zh[i], zc[i]));
            after.push(mu[i] - mu_model(zm[i], zh[i], zc[i]));
            if (zm[i] - zt[i]).abs() <= ze[i] {
                within += 1;
            }
        }
    }
    let n = before.len();
    Ok(HubbleCheck {
        counts: s.counts,
        objects: n,
        rms_before: rms(&before),
        rms_after: rms(&after),
        within_fraction: within as f64 / n.max(1) as f64,
    })
}
