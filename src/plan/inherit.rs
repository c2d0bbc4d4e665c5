//! Settings that travel with the data: a step run on a flowsift output starts from the
//! settings recorded with it (cosmology, rest frames, conventions, column roles); a flag or
//! run-file key that contradicts the record stops the run, unless the user overrides the
//! record on purpose, and then the output says so.

use crate::catalogue::RunRecord;

use super::PlanError;
use crate::settings::{CosmologyChoice, FrameChoice, RunConfig};

/// The user's settings settled against the input's record.
#[derive(Debug, Clone)]
pub struct Settled {
    /// The settings to run with.
    pub config: RunConfig,
    /// What the user changed against the record (with `--override-input-settings`).
    pub overridden: Vec<String>,
    /// The record whose settings were taken (the nearest analysis step of the input's chain).
    pub inherited_from: Option<String>,
}

/// Settle `user` (run file and flags, merged) against the input's `record`.
pub fn settle(
    record: Option<&RunRecord>,
    user: &RunConfig,
    allow_override: bool,
    input_name: &str,
) -> Result<Settled, PlanError> {
    let Some(rec) = record.and_then(RunRecord::binding) else {
        return Ok(Settled {
            config: user.clone(),
            overridden: vec![],
            inherited_from: None,
        });
    };
    let base = &rec.settings;
    let mut conflicts: Vec<String> = vec![];
    let mut config = user.clone();

    // Cosmology: a named preset starts afresh from that preset; otherwise the user's numbers
    // go on top of the recorded ones. Compared as resolved parameters.
    config.cosmology = if user.cosmology == CosmologyChoice::default() {
        base.cosmology.clone()
    } else if user.cosmology.preset.is_some() {
        user.cosmology.clone()
    } else {
        base.cosmology.overlay(&user.cosmology)
    };
    if user.cosmology != CosmologyChoice::default() {
        let was = base.cosmology.resolve().map(|c| c.params).ok();
        let now = config.cosmology.resolve().map(|c| c.params).ok();
        if was != now {
            conflicts.push(format!(
                "cosmology: the input was made with {}; given {}",
                describe_cosmology(&base.cosmology),
                describe_cosmology(&config.cosmology)
            ));
        }
    }

    // Frames: a named dipole replaces a recorded apex and the reverse.
    config.frame = if user.frame == FrameChoice::default() {
        base.frame.clone()
    } else {
        let mut b = base.frame.clone();
        if user.frame.dipole.is_some() {
            b.apex = None;
        }
        if user.frame.apex.is_some() {
            b.dipole = None;
        }
        b.overlay(&user.frame)
    };
    if user.frame != FrameChoice::default() {
        let key = |f: &FrameChoice| f.resolve().ok().map(|r| r.signature());
        if key(&base.frame) != key(&config.frame) {
            conflicts.push(format!(
                "rest frame: the input was made with {}; given {}",
                describe_frame(&base.frame),
                describe_frame(&config.frame)
            ));
        }
    }

    // Conventions and columns: field by field.
    config.conventions = base.conventions.overlay(&user.conventions);
    let c = &user.conventions;
    let b = &base.conventions;
    let mut differs = |name: &str, was: Option<String>, now: Option<String>| {
        if let (Some(w), Some(n)) = (was, now) {
            if w != n {
                conflicts.push(format!("{name}: the input was made with {w}; given {n}"));
            }
        }
    };
    differs(
        "dl_convention",
        b.dl_convention.map(|x| x.name().to_string()),
        c.dl_convention.map(|x| x.name().to_string()),
    );
    differs(
        "length_unit",
        b.length_unit.map(|x| x.label().to_string()),
        c.length_unit.map(|x| x.label().to_string()),
    );
    differs(
        "sigma_star",
        b.sigma_star.map(|x| format!("{x} km/s")),
        c.sigma_star.map(|x| format!("{x} km/s")),
    );
    config.columns = base.columns.overlay(&user.columns);
    let (bc, uc) = (&base.columns, &user.columns);
    let name = |x: &Option<String>| x.as_ref().map(|s| s.to_ascii_lowercase());
    for (role, was, now) in [
        ("ra column", name(&bc.ra), name(&uc.ra)),
        ("dec column", name(&bc.dec), name(&uc.dec)),
        ("redshift column", name(&bc.z), name(&uc.z)),
        ("redshift-error column", name(&bc.z_err), name(&uc.z_err)),
        ("distance column", name(&bc.distance), name(&uc.distance)),
        (
            "distance-error column",
            name(&bc.distance_err),
            name(&uc.distance_err),
        ),
        ("group column", name(&bc.group_id), name(&uc.group_id)),
        (
            "z_unit",
            bc.z_unit.map(|u| format!("{u:?}")),
            uc.z_unit.map(|u| format!("{u:?}")),
        ),
        (
            "distance_kind",
            bc.distance_kind.map(|k| k.name().to_string()),
            uc.distance_kind.map(|k| k.name().to_string()),
        ),
        (
            "angle_unit",
            bc.angle_unit.map(|u| format!("{u:?}")),
            uc.angle_unit.map(|u| format!("{u:?}")),
        ),
    ] {
        differs(role, was, now);
    }
    if user.input.hdu.is_none() {
        config.input.hdu = None;
    }
    if conflicts.is_empty() {
        return Ok(Settled {
            config,
            overridden: vec![],
            inherited_from: Some(rec.step.clone()),
        });
    }
    if !allow_override {
        return Err(PlanError::ContradictsInput {
            input: input_name.to_string(),
            step: rec.step.clone(),
            conflicts,
        });
    }
    Ok(Settled {
        config,
        overridden: conflicts,
        inherited_from: Some(rec.step.clone()),
    })
}

fn describe_cosmology(c: &CosmologyChoice) -> String {
    match c.resolve() {
        Ok(r) => format!(
            "H0 = {}, Ω_m = {}, Ω_de = {} ({})",
            r.params.h0, r.params.omega_m, r.params.omega_de, r.source
        ),
        Err(e) => format!("an invalid cosmology ({e})"),
    }
}

fn describe_frame(f: &FrameChoice) -> String {
    match f.resolve() {
        Ok(r) => format!(
            "the '{}' apex ({} km/s towards l = {}°, b = {}°), {} boost",
            r.cmb_apex.name,
            r.cmb_apex.speed_km_s,
            r.cmb_apex.glon_deg,
            r.cmb_apex.glat_deg,
            r.method.name()
        ),
        Err(e) => format!("an invalid frame choice ({e})"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn planck_velocities() -> RunRecord {
        let mut r = RunRecord::new("velocities", "", "");
        r.settings.cosmology = CosmologyChoice {
            preset: Some("planck2018".into()),
            ..Default::default()
        }
        .filled()
        .unwrap();
        r
    }

    #[test]
    fn a_contradiction_is_a_typed_error_and_an_override_is_recorded() {
        let rec = planck_velocities();
        let mut user = RunConfig::default();
        user.cosmology.h0 = Some(70.0);
        match settle(Some(&rec), &user, false, "in.fits") {
            Err(PlanError::ContradictsInput {
                step, conflicts, ..
            }) => {
                assert_eq!(step, "velocities");
                assert!(conflicts[0].starts_with("cosmology"), "{conflicts:?}");
            }
            other => panic!("expected a contradiction, got {other:?}"),
        }
        let s = settle(Some(&rec), &user, true, "in.fits").unwrap();
        assert_eq!(s.config.cosmology.h0, Some(70.0));
        assert_eq!(s.config.cosmology.omega_m, rec.settings.cosmology.omega_m);
        assert_eq!(s.overridden.len(), 1);
    }

    #[test]
    fn agreeing_or_absent_settings_inherit_the_record() {
        let rec = planck_velocities();
        let mut user = RunConfig::default();
        user.cosmology.preset = Some("planck2018".into());
        let s = settle(Some(&rec), &user, false, "in.fits").unwrap();
        assert!(s.overridden.is_empty());
        let s = settle(Some(&rec), &RunConfig::default(), false, "in.fits").unwrap();
        assert_eq!(s.config.cosmology, rec.settings.cosmology);
        assert_eq!(s.inherited_from.as_deref(), Some("velocities"));
    }
}
