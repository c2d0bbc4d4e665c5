//! A mock catalogue as a table with the default input column names of `velocities` plus
//! truth columns.

use polars::prelude::*;

use crate::catalogue::{ColumnMeta, Table};

use super::MockCatalogue;

fn meta(unit: &str, ucd: &str) -> ColumnMeta {
    ColumnMeta {
        unit: (!unit.is_empty()).then(|| unit.to_string()),
        ucd: (!ucd.is_empty()).then(|| ucd.to_string()),
        description: None,
    }
}

impl MockCatalogue {
    /// Columns: ra, dec, z_helio, z_err, mu, mu_err, population, then the truth:
    /// true_z_cos, true_v_pec, true_z_cmb, true_z_helio, true_d_c, true_mu, true_outlier.
    pub fn to_table(&self) -> Table {
        let f = |name: &str, v: &[f64]| Column::new(name.into(), v);
        let columns = vec![
            f("ra", &self.ra),
            f("dec", &self.dec),
            f("z_helio", &self.z_helio),
            f("z_err", &self.z_err),
            f("mu", &self.mu),
            f("mu_err", &self.mu_err),
            Column::new("population".into(), &self.population),
            f("true_z_cos", &self.true_z_cos),
            f("true_v_pec", &self.true_v_pec),
            f("true_z_cmb", &self.true_z_cmb),
            f("true_z_helio", &self.true_z_helio),
            f("true_d_c", &self.true_d_c),
            f("true_mu", &self.true_mu),
            Column::new("true_outlier".into(), &self.true_outlier),
        ];
        let frame = DataFrame::new(self.len(), columns).expect("columns of equal length");
        let mut m = std::collections::BTreeMap::new();
        for (name, unit, ucd) in [
            ("ra", "deg", "pos.eq.ra;meta.main"),
            ("dec", "deg", "pos.eq.dec;meta.main"),
            ("z_helio", "", "src.redshift"),
            ("z_err", "", "stat.error;src.redshift"),
            ("mu", "mag", "phot.mag.distMod"),
            ("mu_err", "mag", "stat.error;phot.mag.distMod"),
            ("population", "", "meta.code.class"),
            ("true_z_cos", "", "src.redshift"),
            ("true_v_pec", "km/s", "phys.veloc"),
            ("true_z_cmb", "", "src.redshift"),
            ("true_z_helio", "", "src.redshift"),
            ("true_d_c", "Mpc", "pos.distance"),
            ("true_mu", "mag", "phot.mag.distMod"),
            ("true_outlier", "", "meta.code.qual"),
        ] {
            m.insert(name.to_string(), meta(unit, ucd));
        }
        Table::new(frame, m)
    }
}
