//! Real-gas check of the isentropic compression of air (the requirement).
//!
//! `tests/data/real_gas_air_isentropic.csv` was written by `tests/data/make_real_gas_air.py` with
//! CoolProp 8.0.0 (PyPI package `CoolProp`; HEOS backend, 'Air' pseudo-pure fluid = the Lemmon,
//! Jacobsen, Penoncello & Friend 2000 reference equation of state): isentropic compression by r = 17
//! from 101.325 kPa and −40…+20 °C. `tests/data/air_second_virial.csv` holds the same equation of
//! state's second virial coefficient B(T), to which `air`'s B fit was made.
//!
//! Findings (printed by the tests, bounds asserted):
//! - the ideal-gas path (`air::isentropic_compression_ideal_gas`) ends 7.4–8.3 K colder and 2.6–3.3 %
//!   lower in pressure than the real gas: larger than the ~2 K that matters, so `air` corrects for it;
//! - the corrected path (`air::isentropic_compression`, second-virial equation of state) is within
//!   0.5 K and 0.5 % of the reference equation of state (seen: −0.32 to −0.36 K, −0.11 to −0.15 %).

use startmargin_model::air;

/// One row of the isentropic-compression CSV.
struct Row {
    t1_c: f64,
    rho1_kg_per_m3: f64,
    rho2_kg_per_m3: f64,
    t2_real_k: f64,
    p2_real_pa: f64,
    coolprop_version: String,
    t2_dilute_k: f64,
    p1_pa: f64,
}

fn read_csv(name: &str) -> (Vec<String>, Vec<Vec<String>>) {
    let path = format!("{}/tests/data/{name}", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{path}: {e}"));
    let mut lines = text.lines().filter(|l| !l.trim().is_empty());
    let header = lines
        .next()
        .expect("header")
        .split(',')
        .map(str::to_owned)
        .collect();
    let rows = lines
        .map(|l| l.split(',').map(str::to_owned).collect())
        .collect();
    (header, rows)
}

fn column(header: &[String], name: &str) -> usize {
    header
        .iter()
        .position(|h| h == name)
        .unwrap_or_else(|| panic!("column {name} missing"))
}

fn rows() -> Vec<Row> {
    let (header, rows) = read_csv("real_gas_air_isentropic.csv");
    let col = |n: &str| column(&header, n);
    let (c_t1, c_rho1, c_rho2, c_t2, c_p2, c_ver, c_dil, c_p1) = (
        col("t1_c"),
        col("rho1"),
        col("rho2"),
        col("t2_real_k"),
        col("p2_real_pa"),
        col("coolprop_version"),
        col("t2_dilute_k"),
        col("p1_pa"),
    );
    let num = |r: &Vec<String>, c: usize| r[c].trim().parse::<f64>().expect("number");
    let out: Vec<Row> = rows
        .iter()
        .map(|r| Row {
            t1_c: num(r, c_t1),
            rho1_kg_per_m3: num(r, c_rho1),
            rho2_kg_per_m3: num(r, c_rho2),
            t2_real_k: num(r, c_t2),
            p2_real_pa: num(r, c_p2),
            coolprop_version: r[c_ver].trim().to_owned(),
            t2_dilute_k: num(r, c_dil),
            p1_pa: num(r, c_p1),
        })
        .collect();
    assert_eq!(out.len(), 6, "six intake temperatures −40…+20 °C");
    out
}

#[test]
fn ideal_path_vs_reference_equation_of_state() {
    // The size of the real-gas effect the issue asks about: ideal gas against CoolProp (Lemmon 2000).
    println!(
        "T1 °C | CoolProp T2 K | ideal T2 K (ΔK) | ideal p2 (Δ%) | dilute-limit T2 K (ΔK vs ideal)"
    );
    for row in rows() {
        assert_eq!(row.coolprop_version, "8.0.0");
        let t1_k = row.t1_c + 273.15;
        let (t2, p2) = air::isentropic_compression_ideal_gas(t1_k, row.p1_pa, 17.0).unwrap();
        let dt = t2 - row.t2_real_k;
        let dp = p2 / row.p2_real_pa - 1.0;
        println!(
            "{:6.1} | {:8.3} | {:8.3} ({:+.2}) | {:7.1} kPa ({:+.2} %) | {:8.3} ({:+.2})",
            row.t1_c,
            row.t2_real_k,
            t2,
            dt,
            p2 / 1e3,
            dp * 100.0,
            row.t2_dilute_k,
            row.t2_dilute_k - t2
        );
        // Ideal gas ends 7–8.5 K colder and 2.5–3.5 % lower: the effect is real and above 2 K.
        assert!((-8.5..=-7.0).contains(&dt), "ΔT {dt} K at {} °C", row.t1_c);
        assert!(
            (-0.035..=-0.025).contains(&dp),
            "Δp {dp} at {} °C",
            row.t1_c
        );
        // It is a density effect: in the dilute limit the reference agrees with Burcat within 0.25 K.
        assert!((row.t2_dilute_k - t2).abs() < 0.25);
        // The CSV is self-consistent: ρ2 = 17 ρ1.
        assert!((row.rho2_kg_per_m3 / row.rho1_kg_per_m3 - 17.0).abs() < 1e-5);
    }
}

#[test]
fn corrected_path_matches_reference_equation_of_state() {
    // The correction applied in air.rs (second-virial equation of state, B fitted to the same reference)
    // brings the end state within 0.5 K and 0.5 % of CoolProp.
    println!("T1 °C | CoolProp T2 K | model T2 K (ΔK) | ρ1 model vs CoolProp (Δ%) | p2 Δ%");
    for row in rows() {
        let t1_k = row.t1_c + 273.15;
        let (t2, p2) = air::isentropic_compression(t1_k, row.p1_pa, 17.0).unwrap();
        let rho1 = air::density_kg_per_m3(t1_k, row.p1_pa).unwrap();
        let dt = t2 - row.t2_real_k;
        let dp = p2 / row.p2_real_pa - 1.0;
        let drho = rho1 / row.rho1_kg_per_m3 - 1.0;
        println!(
            "{:6.1} | {:8.3} | {:8.3} ({:+.3}) | {:+.4} % | {:+.3} %",
            row.t1_c,
            row.t2_real_k,
            t2,
            dt,
            drho * 100.0,
            dp * 100.0
        );
        assert!(dt.abs() < 0.5, "ΔT {dt} K at {} °C", row.t1_c);
        assert!(dp.abs() < 0.005, "Δp {dp} at {} °C", row.t1_c);
        assert!(drho.abs() < 2e-4, "Δρ1 {drho} at {} °C", row.t1_c);
        // Consistent with the pressure path too.
        let t2p = air::isentropic_temperature_real_gas_k(t1_k, row.p1_pa, p2).unwrap();
        assert!((t2p - t2).abs() < 1e-6);
    }
}

#[test]
fn second_virial_fit_against_reference() {
    // B(T) of air.rs against the reference equation of state's B (CoolProp 8.0.0), 200–1500 K: within
    // 0.2 cm³/mol (the fit residual is 0.13 cm³/mol).
    let (header, rows) = read_csv("air_second_virial.csv");
    let (c_t, c_b) = (column(&header, "t_k"), column(&header, "b_m3_per_mol"));
    let mut checked = 0;
    for r in rows {
        let t: f64 = r[c_t].trim().parse().unwrap();
        let b: f64 = r[c_b].trim().parse().unwrap();
        if t <= 1500.0 {
            let model = air::second_virial_m3_per_mol(t);
            assert!(
                (model - b).abs() < 0.2e-6,
                "B({t} K) = {model} vs {b} m³/mol"
            );
            checked += 1;
        }
    }
    assert!(checked >= 26);
}
