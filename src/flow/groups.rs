//! Group averaging: members sharing a group identifier become one object.
//!
//! Distances combine as the error-weighted mean of the quantity with near-Gaussian errors —
//! μ for distance moduli, ln D for D_L and D_C, η for log-distance ratios — with error
//! (Σ 1/σ²)^−½; when a member has no usable error, all members weigh equally and the group
//! error is left empty. The group redshift is the mean CMB-frame redshift of the members
//! (or that of a named central member), the position the direction of the mean unit vector.
//! Only members with status `ok` take part; rows without a group identifier pass through as
//! groups of one.

use std::collections::HashMap;

use crate::physics::estimators::DistanceKind;
use crate::physics::sky::{Direction, Icrs};

/// Per-member inputs (all slices of the same length).
#[derive(Debug, Clone, Copy)]
pub struct Members<'a> {
    pub key: &'a [Option<String>],
    pub ra_deg: &'a [f64],
    pub dec_deg: &'a [f64],
    pub z_helio: &'a [f64],
    pub z_err: &'a [f64],
    pub z_cmb: &'a [f64],
    pub distance: &'a [f64],
    pub distance_err: &'a [f64],
    pub kind: DistanceKind,
    pub ok: &'a [bool],
    pub central: Option<&'a [bool]>,
}

/// The groups, one entry per group, in order of first appearance.
#[derive(Debug, Clone, Default)]
pub struct Groups {
    pub key: Vec<Option<String>>,
    /// Member rows of each group.
    pub members: Vec<Vec<usize>>,
    /// Members that took part (status ok).
    pub n_members: Vec<usize>,
    pub ra_deg: Vec<f64>,
    pub dec_deg: Vec<f64>,
    pub z_helio: Vec<f64>,
    pub z_err: Vec<f64>,
    pub z_cmb: Vec<f64>,
    pub distance: Vec<f64>,
    /// NaN when the members' errors do not allow a weighted mean.
    pub distance_err: Vec<f64>,
    /// Group index of each member row.
    pub group_of: Vec<usize>,
}

/// Combine members into groups.
pub fn combine(m: &Members<'_>) -> Groups {
    let n = m.key.len();
    let mut index: HashMap<&str, usize> = HashMap::new();
    let mut g = Groups {
        group_of: vec![0; n],
        ..Default::default()
    };
    for i in 0..n {
        let gi = match m.key[i].as_deref() {
            Some(k) => *index.entry(k).or_insert_with(|| {
                g.key.push(Some(k.to_string()));
                g.members.push(vec![]);
                g.key.len() - 1
            }),
            None => {
                g.key.push(None);
                g.members.push(vec![]);
                g.key.len() - 1
            }
        };
        g.members[gi].push(i);
        g.group_of[i] = gi;
    }
    for members in &g.members {
        let used: Vec<usize> = members.iter().copied().filter(|&i| m.ok[i]).collect();
        g.n_members.push(used.len());
        if used.is_empty() {
            for v in [
                &mut g.ra_deg,
                &mut g.dec_deg,
                &mut g.z_helio,
                &mut g.z_err,
                &mut g.z_cmb,
                &mut g.distance,
                &mut g.distance_err,
            ] {
                v.push(f64::NAN);
            }
            continue;
        }
        let k = used.len() as f64;
        // Position: mean unit vector.
        let mut s = [0.0; 3];
        for &i in &used {
            if let Ok(d) = Direction::<Icrs>::from_lon_lat_deg(m.ra_deg[i], m.dec_deg[i]) {
                let x = d.xyz();
                for a in 0..3 {
                    s[a] += x[a];
                }
            }
        }
        let (ra, dec) = Direction::<Icrs>::from_cartesian(s[0], s[1], s[2])
            .map(|d| d.lon_lat_deg())
            .unwrap_or((f64::NAN, f64::NAN));
        g.ra_deg.push(ra);
        g.dec_deg.push(dec);
        // Redshift: a central member's, or the mean.
        let central = m.central.and_then(|c| used.iter().copied().find(|&i| c[i]));
        match central {
            Some(c) => {
                g.z_cmb.push(m.z_cmb[c]);
                g.z_helio.push(m.z_helio[c]);
                g.z_err.push(m.z_err[c]);
            }
            None => {
                g.z_cmb
                    .push(used.iter().map(|&i| m.z_cmb[i]).sum::<f64>() / k);
                g.z_helio
                    .push(used.iter().map(|&i| m.z_helio[i]).sum::<f64>() / k);
                g.z_err
                    .push(used.iter().map(|&i| m.z_err[i].powi(2)).sum::<f64>().sqrt() / k);
            }
        }
        // Distance in the near-Gaussian quantity q, with σ_q.
        let q_of = |i: usize| -> (f64, f64) {
            match m.kind {
                DistanceKind::Mu | DistanceKind::Eta => (m.distance[i], m.distance_err[i]),
                DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da => {
                    (m.distance[i].ln(), m.distance_err[i] / m.distance[i])
                }
            }
        };
        let weighted = used.iter().all(|&i| {
            let e = q_of(i).1;
            e.is_finite() && e > 0.0
        });
        let (q, eq) = if weighted {
            let (mut sw, mut swq) = (0.0, 0.0);
            for &i in &used {
                let (q, e) = q_of(i);
                sw += 1.0 / (e * e);
                swq += q / (e * e);
            }
            (swq / sw, 1.0 / sw.sqrt())
        } else {
            (used.iter().map(|&i| q_of(i).0).sum::<f64>() / k, f64::NAN)
        };
        let (d, ed) = match m.kind {
            DistanceKind::Mu | DistanceKind::Eta => (q, eq),
            DistanceKind::Dl | DistanceKind::Dc | DistanceKind::Da => (q.exp(), q.exp() * eq),
        };
        g.distance.push(d);
        g.distance_err.push(ed);
    }
    g
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Hand computation: μ = 34.0 ± 0.2 and 34.6 ± 0.4 → weights 25 and 6.25;
    /// mean = (34.0·25 + 34.6·6.25)/31.25 = 34.12, error = 31.25^−½ = 0.178885.
    #[test]
    fn weighted_mean_by_hand() {
        let key = vec![Some("A".to_string()), Some("A".to_string()), None];
        let ok = vec![true; 3];
        let m = Members {
            key: &key,
            ra_deg: &[10.0, 10.2, 50.0],
            dec_deg: &[5.0, 5.1, -5.0],
            z_helio: &[0.020, 0.022, 0.03],
            z_err: &[1e-4, 1e-4, 1e-4],
            z_cmb: &[0.021, 0.023, 0.031],
            distance: &[34.0, 34.6, 35.0],
            distance_err: &[0.2, 0.4, 0.3],
            kind: DistanceKind::Mu,
            ok: &ok,
            central: None,
        };
        let g = combine(&m);
        assert_eq!(g.key.len(), 2);
        assert_eq!(g.n_members, vec![2, 1]);
        assert!((g.distance[0] - 34.12).abs() < 1e-12);
        assert!((g.distance_err[0] - 0.178_885_438_199_983_2).abs() < 1e-12);
        assert!((g.z_cmb[0] - 0.022).abs() < 1e-15);
        assert_eq!(g.distance[1], 35.0);
        assert_eq!(g.group_of, vec![0, 0, 1]);
    }

    /// D combines in ln D: 100 ± 20 and 100 ± 10 (σ_lnD 0.2, 0.1) → ln-mean 100, error
    /// 100·(25 + 100)^−½ = 8.944.
    #[test]
    fn distances_combine_in_log() {
        let key = vec![Some("g".to_string()); 2];
        let m = Members {
            key: &key,
            ra_deg: &[1.0, 1.0],
            dec_deg: &[1.0, 1.0],
            z_helio: &[0.02, 0.02],
            z_err: &[0.0, 0.0],
            z_cmb: &[0.02, 0.02],
            distance: &[100.0, 100.0],
            distance_err: &[20.0, 10.0],
            kind: DistanceKind::Dc,
            ok: &[true, true],
            central: Some(&[false, true]),
        };
        let g = combine(&m);
        assert!((g.distance[0] - 100.0).abs() < 1e-9);
        assert!((g.distance_err[0] - 100.0 / 125f64.sqrt()).abs() < 1e-9);
    }
}
