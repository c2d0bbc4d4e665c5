//! Catalogues whose positions are Galactic or supergalactic and whose redshifts are in the
//! CMB or Local-Group frame give the same results as the same objects given as ICRS RA/Dec
//! and heliocentric z. The objects are the astropy fixture `galaxy_pv.csv` (astropy 8.0.2,
//! `make_fixtures.py`: RA/Dec, z_helio, μ, and astropy's z_cmb by the exact boost with the
//! Planck 2018 apex).

mod common;

use assert_cmd::Command;
use common::fixture;
use flowsift::catalogue::{read_table, ReadOptions};
use flowsift::physics::redshift::{Heliocentric, LocalGroup, Redshift};
use flowsift::physics::restframe::{default_apex, Boost};
use flowsift::physics::sky::{Direction, Icrs, SkyRotations};

const C: f64 = 299_792.458; // km/s, exact (SI)

fn column(path: &std::path::Path, name: &str) -> Vec<f64> {
    read_table(path, &ReadOptions::default())
        .unwrap()
        .frame
        .column(name)
        .unwrap()
        .f64()
        .unwrap()
        .into_no_null_iter()
        .collect()
}

fn run(input: &std::path::Path, convention: &str) -> std::path::PathBuf {
    let out = input.with_extension("out.csv");
    Command::cargo_bin("flowsift")
        .unwrap()
        .args(["velocities", input.to_str().unwrap(), "-o"])
        .arg(&out)
        .args(["--dl-convention", convention])
        .assert()
        .success();
    out
}

#[test]
fn galactic_positions_and_cmb_frame_cz_match_icrs_and_heliocentric_input() {
    let rows = fixture("galaxy_pv.csv").records();
    let rot = SkyRotations::default();
    let dir = tempfile::tempdir().unwrap();
    let mut icrs = String::from("ra,dec,z_helio,mu\n");
    let mut positions = vec![];
    let mut supergalactic = String::from("sgl,sgb,z_lg,mu\n");
    let lg = Boost::<LocalGroup>::new(&default_apex("local-group")).unwrap();
    for r in &rows {
        let (ra, dec, z_helio, mu) = (r.f("ra"), r.f("dec"), r.f("z_helio"), r.f("mu"));
        let d = Direction::<Icrs>::from_lon_lat_deg(ra, dec).unwrap();
        let gal = rot.icrs_to_galactic.apply(&d);
        let (l, b) = gal.lon_lat_deg();
        let (sgl, sgb) = rot.galactic_to_supergalactic.apply(&gal).lon_lat_deg();
        let z_lg = lg
            .from_heliocentric(Redshift::<Heliocentric>::new(z_helio).unwrap(), &gal)
            .value();
        icrs.push_str(&format!("{ra},{dec},{z_helio},{mu}\n"));
        supergalactic.push_str(&format!("{sgl},{sgb},{z_lg},{mu}\n"));
        positions.push((l, b, mu));
    }
    // The CMB-frame redshifts of the ICRS run, as c·z, so that both catalogues hold the
    // same objects to rounding (astropy's own z_cmb is checked below).
    let icrs_path = dir.path().join("icrs.csv");
    std::fs::write(&icrs_path, &icrs).unwrap();
    let z_cmb = column(&run(&icrs_path, "cosmological"), "z_cmb");
    let mut galactic = String::from("glon,glat,cz_cmb,mu\n");
    for ((l, b, mu), z) in positions.iter().zip(&z_cmb) {
        galactic.push_str(&format!("{l},{b},{},{mu}\n", C * z));
    }
    for convention in ["cosmological", "full"] {
        let write = |name: &str, text: &str| {
            let p = dir.path().join(format!("{name}_{convention}.csv"));
            std::fs::write(&p, text).unwrap();
            p
        };
        let a = run(&write("icrs", &icrs), convention);
        for b in [
            run(&write("galactic", &galactic), convention),
            run(&write("supergalactic", &supergalactic), convention),
        ] {
            let label = format!("{} ({convention})", b.display());
            let z_helio_in: Vec<f64> = rows.iter().map(|r| r.f("z_helio")).collect();
            for (i, (x, y)) in column(&b, "z_helio").iter().zip(&z_helio_in).enumerate() {
                assert!((x - y).abs() < 1e-9, "{label} row {i}: z_helio {x} vs {y}");
            }
            for (name, tol) in [("z_cmb", 1e-9), ("z_cos", 1e-9), ("v_pec", 0.01)] {
                for (i, (x, y)) in column(&b, name).iter().zip(column(&a, name)).enumerate() {
                    assert!((x - y).abs() < tol, "{label} row {i}: {name} {x} vs {y}");
                }
            }
        }
        // And against astropy's own z_cmb, to 1e-9: astropy's Galactic frame goes through
        // FK5 with its frame bias, flowsift's through the Hipparcos ICRS definition (README,
        // "Sky frames"), tens of mas apart, which moves z_cmb by a few 1e-11.
        for (i, (x, r)) in column(&a, "z_cmb").iter().zip(&rows).enumerate() {
            assert!((x - r.f("z_cmb")).abs() < 1e-9, "row {i}: z_cmb {x}");
        }
    }
}

/// The run says which frames it was given and that it trusts the catalogue's frame change.
#[test]
fn the_summary_names_the_given_frames() {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("cmb.csv");
    std::fs::write(&p, "glon,glat,z_cmb,mu\n120,30,0.02,35.0\n").unwrap();
    let done = Command::cargo_bin("flowsift")
        .unwrap()
        .args(["velocities", p.to_str().unwrap(), "-o"])
        .arg(dir.path().join("out.csv"))
        .output()
        .unwrap();
    let text =
        String::from_utf8_lossy(&done.stdout).to_string() + &String::from_utf8_lossy(&done.stderr);
    assert!(done.status.success(), "{text}");
    assert!(text.contains("given in the galactic frame"), "{text}");
    assert!(text.contains("given in the cmb frame ('z_cmb')"), "{text}");
    assert!(
        text.contains("trusts the catalogue's own frame change"),
        "{text}"
    );
}

/// B1950 (FK4) and J2000 (FK5) positions give the CMB-frame redshifts of the same objects
/// given in ICRS. The three position columns are astropy 8.0.2's own transformations of each
/// other (`sky_frames_fk.csv`, `make_fixtures.py`), so this checks the run reads the flag and
/// converts; the conversion's accuracy is checked in tests/sky_frames_fk.rs. Reading the
/// B1950 positions as ICRS instead moves z_cmb by the precession of 50 years (~0.7°):
/// visible at 1e-7.
#[test]
fn fk4_and_fk5_positions_match_icrs_input() {
    let rows: Vec<_> = fixture("sky_frames_fk.csv")
        .records()
        .into_iter()
        .filter(|r| r.s("origin") == "icrs" && r.f("dec").abs() < 89.0)
        .collect();
    let dir = tempfile::tempdir().unwrap();
    let mut texts = [
        String::from("ra,dec,z_helio,mu\n"),
        String::from("ra,dec,z_helio,mu\n"),
        String::from("ra,dec,z_helio,mu\n"),
    ];
    for (i, r) in rows.iter().enumerate() {
        let z = 0.01 + 0.0003 * i as f64;
        let mu = 34.0 + 0.01 * i as f64;
        for (t, (a, d)) in
            texts
                .iter_mut()
                .zip([("ra", "dec"), ("fk5_ra", "fk5_dec"), ("fk4_ra", "fk4_dec")])
        {
            t.push_str(&format!("{},{},{z},{mu}\n", r.f(a), r.f(d)));
        }
    }
    let mut out = vec![];
    for (name, text, frame) in [
        ("icrs", &texts[0], "icrs"),
        ("fk5", &texts[1], "fk5"),
        ("fk4", &texts[2], "fk4"),
        ("fk4_as_icrs", &texts[2], "icrs"),
    ] {
        let p = dir.path().join(format!("{name}.csv"));
        std::fs::write(&p, text).unwrap();
        let o = dir.path().join(format!("{name}.out.csv"));
        Command::cargo_bin("flowsift")
            .unwrap()
            .args(["velocities", p.to_str().unwrap(), "-o"])
            .arg(&o)
            .args(["--sky-frame", frame])
            .assert()
            .success();
        out.push(column(&o, "z_cmb"));
    }
    for (k, name) in [(1, "fk5"), (2, "fk4")] {
        for (i, (x, y)) in out[k].iter().zip(&out[0]).enumerate() {
            assert!((x - y).abs() < 1e-10, "{name} row {i}: z_cmb {x} vs {y}");
        }
    }
    let worst = out[3]
        .iter()
        .zip(&out[0])
        .map(|(x, y)| (x - y).abs())
        .fold(0.0, f64::max);
    assert!(worst > 1e-7, "B1950 read as ICRS should differ: {worst}");
}

/// `correct` honours the frames too: Galactic positions with CMB-frame cz give the model
/// correction of the same objects given as ICRS and heliocentric z (galaxy_pv.csv, astropy
/// 8.0.2's z_cmb by the exact boost), and the output carries the derived z_helio.
#[test]
fn correct_honours_galactic_positions_and_cmb_frame_redshifts() {
    let rows = fixture("galaxy_pv.csv").records();
    let rot = SkyRotations::default();
    let dir = tempfile::tempdir().unwrap();
    let mut icrs = String::from("ra,dec,z_helio\n");
    let mut galactic = String::from("glon,glat,cz_cmb\n");
    for r in rows.iter().take(40) {
        let d = Direction::<Icrs>::from_lon_lat_deg(r.f("ra"), r.f("dec")).unwrap();
        let (l, b) = rot.icrs_to_galactic.apply(&d).lon_lat_deg();
        icrs.push_str(&format!(
            "{},{},{}\n",
            r.f("ra"),
            r.f("dec"),
            r.f("z_helio")
        ));
        galactic.push_str(&format!("{l},{b},{}\n", C * r.f("z_cmb")));
    }
    let mut outs = vec![];
    for (name, text) in [("icrs", &icrs), ("galactic", &galactic)] {
        let p = dir.path().join(format!("{name}.csv"));
        std::fs::write(&p, text).unwrap();
        let o = dir.path().join(format!("{name}.out.csv"));
        let done = Command::cargo_bin("flowsift")
            .unwrap()
            .args(["correct", p.to_str().unwrap(), "-o"])
            .arg(&o)
            .args(["--uniform-flow", "300,-200,100"])
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&done.stdout).to_string()
            + &String::from_utf8_lossy(&done.stderr);
        assert!(done.status.success(), "{text}");
        if name == "galactic" {
            assert!(text.contains("given in the galactic frame"), "{text}");
            assert!(text.contains("given in the cmb frame ('cz_cmb')"), "{text}");
        }
        outs.push(o);
    }
    // astropy's z_cmb and flowsift's differ by a few 1e-11 (frame bias; see above).
    for name in ["z_cos_model", "v_model"] {
        let tol = if name == "v_model" { 1e-4 } else { 1e-9 };
        for (i, (x, y)) in column(&outs[1], name)
            .iter()
            .zip(column(&outs[0], name))
            .enumerate()
        {
            assert!((x - y).abs() < tol, "row {i}: {name} {x} vs {y}");
        }
    }
    for (i, (x, r)) in column(&outs[1], "z_helio").iter().zip(&rows).enumerate() {
        assert!((x - r.f("z_helio")).abs() < 1e-9, "row {i}: z_helio {x}");
    }
    // Both outputs carry the CMB-frame redshift the correction started from: astropy's.
    for out in &outs {
        for (i, (x, r)) in column(out, "z_cmb").iter().zip(&rows).enumerate() {
            assert!((x - r.f("z_cmb")).abs() < 1e-9, "row {i}: z_cmb {x}");
        }
    }
}

/// Galactic longitudes given as sexagesimal text are degrees, not hours of right ascension.
#[test]
fn sexagesimal_galactic_longitude_is_read_in_degrees() {
    let dir = tempfile::tempdir().unwrap();
    let text_path = dir.path().join("text.csv");
    std::fs::write(
        &text_path,
        "glon,glat,z_helio,mu\n\"120:30:00\",\"+30:15:00\",0.02,35.0\n",
    )
    .unwrap();
    let number_path = dir.path().join("number.csv");
    std::fs::write(
        &number_path,
        "glon,glat,z_helio,mu\n120.5,30.25,0.02,35.0\n",
    )
    .unwrap();
    let mut z = vec![];
    for p in [&text_path, &number_path] {
        let o = p.with_extension("out.csv");
        Command::cargo_bin("flowsift")
            .unwrap()
            .args(["velocities", p.to_str().unwrap(), "-o"])
            .arg(&o)
            .assert()
            .success();
        z.push(column(&o, "z_cmb")[0]);
    }
    assert!((z[0] - z[1]).abs() < 1e-14, "{z:?}");
}

/// A FITS table whose header states `RADESYS = 'FK4'`, `EQUINOX = 1950.0` and
/// `SPECSYS = 'CMBDIPOL'` is read as B1950 positions and CMB-frame redshifts without flags
/// (FITS Standard 4.0 §8.1; Greisen et al. 2006, the SPECSYS values; from memory), and a
/// RADESYS flowsift cannot convert is refused by name.
#[test]
fn fits_header_keywords_state_the_frames() {
    use fitsio::tables::{ColumnDataType, ColumnDescription};
    use fitsio::FitsFile;
    let dir = tempfile::tempdir().unwrap();
    let rows: Vec<_> = fixture("sky_frames_fk.csv")
        .records()
        .into_iter()
        .filter(|r| r.s("origin") == "icrs" && r.f("dec").abs() < 89.0)
        .take(20)
        .collect();
    let z: Vec<f64> = (0..rows.len()).map(|i| 0.01 + 0.001 * i as f64).collect();
    let mu: Vec<f64> = (0..rows.len()).map(|i| 34.0 + 0.05 * i as f64).collect();
    let write = |name: &str, keys: &[(&str, &str)], ra: &str, dec: &str| {
        let path = dir.path().join(name);
        let mut f = FitsFile::create(&path).open().unwrap();
        let cols: Vec<_> = ["ra", "dec", "z", "mu"]
            .iter()
            .map(|n| {
                ColumnDescription::new(*n)
                    .with_type(ColumnDataType::Double)
                    .create()
                    .unwrap()
            })
            .collect();
        let hdu = f.create_table("CAT", &cols).unwrap();
        for (k, v) in keys {
            match v.parse::<f64>() {
                Ok(x) => hdu.write_key(&mut f, k, x).unwrap(),
                Err(_) => hdu.write_key(&mut f, k, *v).unwrap(),
            }
        }
        let lon: Vec<f64> = rows.iter().map(|r| r.f(ra)).collect();
        let lat: Vec<f64> = rows.iter().map(|r| r.f(dec)).collect();
        hdu.write_col(&mut f, "ra", &lon).unwrap();
        hdu.write_col(&mut f, "dec", &lat).unwrap();
        hdu.write_col(&mut f, "z", &z).unwrap();
        hdu.write_col(&mut f, "mu", &mu).unwrap();
        path
    };
    let run = |p: &std::path::Path, extra: &[&str]| {
        let o = p.with_extension("out.csv");
        let done = Command::cargo_bin("flowsift")
            .unwrap()
            .args(["velocities", p.to_str().unwrap(), "-o"])
            .arg(&o)
            .args(extra)
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&done.stdout).to_string()
            + &String::from_utf8_lossy(&done.stderr);
        (done.status.success(), text, o)
    };
    let stated = write(
        "stated.fits",
        &[
            ("RADESYS", "FK4"),
            ("EQUINOX", "1950.0"),
            ("SPECSYS", "CMBDIPOL"),
        ],
        "fk4_ra",
        "fk4_dec",
    );
    let plain = write("plain.fits", &[], "ra", "dec");
    let (ok, text, a) = run(&stated, &["--z-column", "z"]);
    assert!(ok, "{text}");
    assert!(text.contains("given in the fk4 frame"), "{text}");
    assert!(text.contains("given in the cmb frame"), "{text}");
    let (ok, text, b) = run(&plain, &["--z-column", "z", "--z-frame", "cmb"]);
    assert!(ok, "{text}");
    for name in ["z_cmb", "z_helio", "v_pec"] {
        let tol = if name == "v_pec" { 0.01 } else { 1e-10 };
        for (i, (x, y)) in column(&a, name).iter().zip(column(&b, name)).enumerate() {
            assert!((x - y).abs() < tol, "row {i}: {name} {x} vs {y}");
        }
    }
    let odd = write("odd.fits", &[("RADESYS", "GAPPT")], "ra", "dec");
    let (ok, text, _) = run(&odd, &["--z-column", "z"]);
    assert!(!ok, "{text}");
    assert!(text.contains("RADESYS = 'GAPPT'"), "{text}");
    assert!(text.contains("--sky-frame"), "{text}");
    let (ok, text, _) = run(&odd, &["--z-column", "z", "--sky-frame", "icrs"]);
    assert!(ok, "{text}");
}
