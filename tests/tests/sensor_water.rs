//! Water cp(T) and ρ(T) against IAPWS-95 at 0.101325 MPa.
//!
//! Sources:
//! - cp table: IAPWS-95 isobaric heat capacity at 0.101325 MPa, as quoted in
//!   shared/REFERENCES.md (reproduced by PyPI `iapws` and `CoolProp`);
//! - vectors: `tests/vectors/water_iapws95.csv`, IAPWS-95 (IAPWS R6-95(2018))
//!   computed with PyPI `iapws` 1.5.5 by `tests/tools/gen_water_iapws95.py`.
use heatbound::sensor::water::{self, WaterError};
use heatbound_verification::rel_diff;

/// IAPWS-95 cp at 0.101325 MPa, kJ/(kg·K), via REFERENCES.md.
const CP_TABLE: [(f32, f64); 8] = [
    (20.0, 4.18405),
    (25.0, 4.18131),
    (30.0, 4.17982),
    (40.0, 4.17941),
    (50.0, 4.18134),
    (60.0, 4.18495),
    (70.0, 4.19007),
    (80.0, 4.19675),
];

#[test]
fn cp_matches_iapws95_table() {
    for (t_c, cp_kj) in CP_TABLE {
        let got = f64::from(water::cp_j_per_kg_k(t_c).unwrap());
        let rel = rel_diff(got, cp_kj * 1000.0);
        // The target is 0.1 %; the fit does far better.
        assert!(
            rel < 1e-4,
            "{t_c} °C: {got} vs {} J/(kg·K), rel {rel:e}",
            cp_kj * 1000.0
        );
    }
}

fn vectors() -> Vec<(f32, f64, f64)> {
    // IAPWS-95 via PyPI iapws, by tests/tools/gen_water_iapws95.py.
    include_str!("../vectors/water_iapws95.csv")
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("t_c"))
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[0].parse().unwrap(),
                f[1].parse().unwrap(),
                f[2].parse().unwrap(),
            )
        })
        .collect()
}

#[test]
fn cp_and_density_match_iapws95_vectors() {
    let v = vectors();
    assert_eq!(v.len(), 361);
    let (mut worst_cp, mut worst_rho) = (0.0f64, 0.0f64);
    for &(t_c, cp, rho) in &v {
        let got_cp = f64::from(water::cp_j_per_kg_k(t_c).unwrap());
        let got_rho = f64::from(water::density_kg_per_m3(t_c).unwrap());
        worst_cp = worst_cp.max(rel_diff(got_cp, cp));
        worst_rho = worst_rho.max(rel_diff(got_rho, rho));
    }
    println!("max relative error vs IAPWS-95: cp {worst_cp:e}, rho {worst_rho:e}");
    assert!(worst_cp < 1e-3, "cp {worst_cp}"); // 0.1 %
    assert!(worst_rho < 5e-4, "rho {worst_rho}"); // 0.05 %
    // What the fit actually achieves, so a regression shows.
    assert!(worst_cp < 3e-5 && worst_rho < 2e-5);
}

#[test]
fn range_is_enforced() {
    assert!(water::cp_j_per_kg_k(5.0).is_ok() && water::cp_j_per_kg_k(95.0).is_ok());
    assert!(matches!(
        water::cp_j_per_kg_k(4.9),
        Err(WaterError::OutOfRange { .. })
    ));
    assert!(matches!(
        water::density_kg_per_m3(95.1),
        Err(WaterError::OutOfRange { .. })
    ));
    assert!(matches!(
        water::density_kg_per_m3(f32::NAN),
        Err(WaterError::NonFinite)
    ));
    assert_eq!(
        water::cp_j_per_kg_k(120.0).unwrap_err().to_string(),
        "water temperature 120 °C is outside the 5 to 95 °C range of the cp and density fits"
    );
}
