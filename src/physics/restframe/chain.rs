//! A change of rest frame presented as the chain of boosts it is: Sun → LSR → Galactic rest
//! → Local Group → CMB.
//!
//! The code holds one solar apex per frame: **v**_F, the Sun's velocity relative to frame F.
//! The step from frame A to the next frame B of the chain is the velocity of A relative to
//! B, **v**_B − **v**_A (the difference of consecutive solar-motion vectors), so the steps
//! add up to the Sun's velocity relative to the last frame. This is the Galilean sum; the
//! redshift after each step is computed by the exact boost from the Sun's frame with that
//! frame's own apex ([`super::Boost`]), not by composing the steps, which would differ by
//! terms of order β² ≈ 10⁻⁶.

use serde::Serialize;

use super::super::redshift::{Heliocentric, RedshiftKind};
use super::super::sky::{Direction, Galactic};
use super::apex::Apex;

/// One boost of the chain.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChainStep {
    /// The frame the step starts from (`heliocentric`, `lsr`, …).
    pub from: &'static str,
    /// The frame the step arrives in.
    pub to: &'static str,
    /// Velocity of `from` relative to `to` in Galactic Cartesian axes (x → l = 0,
    /// y → l = 90°, z → NGP), km/s: the apex of `to` minus the apex of `from`.
    pub velocity_km_s: [f64; 3],
    /// Its length, km/s.
    pub speed_km_s: f64,
    /// Its Galactic direction, degrees (`None` for a zero vector).
    pub l_deg: Option<f64>,
    pub b_deg: Option<f64>,
    /// The apex of `to` (the Sun's velocity relative to it), whose source is the step's.
    pub apex: Apex,
    /// The apex of `from` subtracted (`None` for the first step, from the Sun).
    pub minus: Option<String>,
}

/// The boosts from the Sun's frame to the frames of `apices`, in the order given (normally
/// LSR, Galactic rest, Local Group, CMB).
pub fn boost_chain(apices: &[&Apex]) -> Vec<ChainStep> {
    let mut steps = Vec::with_capacity(apices.len());
    let mut from = Heliocentric::NAME;
    let mut previous: Option<&Apex> = None;
    for a in apices {
        let v = a.velocity_galactic();
        let p = previous.map(|p| p.velocity_galactic()).unwrap_or([0.0; 3]);
        let d = [v[0] - p[0], v[1] - p[1], v[2] - p[2]];
        let speed = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
        let dir = Direction::<Galactic>::from_cartesian(d[0], d[1], d[2])
            .ok()
            .map(|n| n.lon_lat_deg());
        steps.push(ChainStep {
            from,
            to: a.frame,
            velocity_km_s: d,
            speed_km_s: speed,
            l_deg: dir.map(|x| x.0),
            b_deg: dir.map(|x| x.1),
            apex: (*a).clone(),
            minus: previous.map(|p| p.name.clone()),
        });
        from = a.frame;
        previous = Some(a);
    }
    steps
}

/// The sum of the steps' vectors, km/s (the Sun's velocity relative to the last frame).
pub fn chain_sum(steps: &[ChainStep]) -> [f64; 3] {
    steps.iter().fold([0.0; 3], |s, x| {
        [
            s[0] + x.velocity_km_s[0],
            s[1] + x.velocity_km_s[1],
            s[2] + x.velocity_km_s[2],
        ]
    })
}

#[cfg(test)]
mod tests {
    use super::super::apex::default_apex;
    use super::*;

    fn defaults() -> Vec<Apex> {
        ["lsr", "galactic-rest", "local-group", "cmb"]
            .into_iter()
            .map(default_apex)
            .collect()
    }

    /// The steps add up to the CMB apex (Planck Collaboration I 2020, Table 2: 369.82 km/s
    /// towards l = 264.021°, b = 48.253°), component by component.
    #[test]
    fn steps_sum_to_the_cmb_apex() {
        let a = defaults();
        let steps = boost_chain(&a.iter().collect::<Vec<_>>());
        assert_eq!(steps.len(), 4);
        let sum = chain_sum(&steps);
        let cmb = a[3].velocity_galactic();
        for k in 0..3 {
            assert!((sum[k] - cmb[k]).abs() < 1e-9, "{sum:?} vs {cmb:?}");
        }
        let speed = (sum[0] * sum[0] + sum[1] * sum[1] + sum[2] * sum[2]).sqrt();
        assert!((speed - 369.82).abs() < 1e-9);
    }

    /// The step LSR → Galactic rest is the circular speed alone, 229.0 km/s towards
    /// l = 90°, b = 0° (Eilers et al. 2019, ApJ 871, 120), since both apices share the
    /// solar motion of Schönrich, Binney & Dehnen (2010).
    #[test]
    fn the_rotation_step_is_the_circular_speed() {
        let a = defaults();
        let steps = boost_chain(&a.iter().collect::<Vec<_>>());
        let s = &steps[1];
        assert_eq!((s.from, s.to), ("lsr", "galactic-rest"));
        assert!((s.speed_km_s - 229.0).abs() < 1e-9);
        assert!((s.l_deg.unwrap() - 90.0).abs() < 1e-9);
        assert!(s.b_deg.unwrap().abs() < 1e-9);
    }

    /// The last step, the Local Group's motion relative to the CMB, agrees with the
    /// published value 627 ± 22 km/s towards l = 276° ± 3°, b = 30° ± 3° (Kogut et al. 1993,
    /// ApJ 419, 1; from memory) within twice its errors.
    #[test]
    fn the_local_group_moves_as_published_relative_to_the_cmb() {
        let a = defaults();
        let steps = boost_chain(&a.iter().collect::<Vec<_>>());
        let s = &steps[3];
        assert_eq!((s.from, s.to), ("local-group", "cmb"));
        assert!((s.speed_km_s - 627.0).abs() < 44.0, "{}", s.speed_km_s);
        let step =
            Direction::<Galactic>::from_lon_lat_deg(s.l_deg.unwrap(), s.b_deg.unwrap()).unwrap();
        let published = Direction::<Galactic>::from_lon_lat_deg(276.0, 30.0).unwrap();
        assert!(
            step.separation_deg(&published) < 8.5,
            "{:?}",
            (s.l_deg, s.b_deg)
        );
    }
}
