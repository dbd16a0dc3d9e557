//! The systematic floors measured by `fluxloom build` on the demo field, compared
//! with the scatter the demo generator injected.
//!
//! The generator (src/demo/surveys.rs, step 6) scatters every catalog position by
//! its quoted error plus an unquoted per-axis Gaussian scatter equal to the plan's
//! `systematic_arcsec` (0 for the reference `ask`). The floor of a catalog against
//! `ask` estimates all unquoted per-axis scatter of the pair, so it should equal
//! that injected value, up to the sampling error of a median and to what else the
//! stated errors leave out (mainly blend centroid shifts in the coarse surveys).
//!
//! Sampling error: the sample median of a unit Rayleigh law has relative standard
//! error 1 / (2 f(m) m √N) = 0.7214 / √N, f(m) = m e^(−m²/2) at m = √(2 ln 2)
//! (standard asymptotics of sample quantiles). The median scales with
//! σ_tot = sqrt(σ² + σ_sys²), so δσ_sys = (σ_tot² / σ_sys) · δm/m, with σ the median
//! stated error of the pairs. The check allows four such standard errors: three
//! for chance, one for the blend excess (the 6″ surveys sit highest).

use std::path::PathBuf;
use std::process::Command;

#[test]
fn demo_floors_match_the_injected_scatter() {
    let repo = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    let demo = repo.join("demo_catalogs/fl1");
    let out = tempfile::tempdir().unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args(["build", demo.join("plan.toml").to_str().unwrap(), "--out"])
        .arg(out.path())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let stdout = String::from_utf8_lossy(&o.stdout);

    let plan: toml::Value =
        toml::from_str(&std::fs::read_to_string(demo.join("plan.toml")).unwrap()).unwrap();
    let injected: Vec<f64> = plan["catalog"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["systematic_arcsec"].as_float().unwrap())
        .collect();
    let run: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.path().join("run.json")).unwrap())
            .unwrap();
    let names: Vec<&str> = run["inputs"]
        .as_array()
        .unwrap()
        .iter()
        .map(|i| i["catalog"].as_str().unwrap())
        .collect();
    let offsets = run["offsets"].as_array().unwrap();
    // Every catalog but the reference carries a floor.
    assert_eq!(offsets.len(), names.len() - 1);
    for o in offsets {
        let c = o["catalog"].as_u64().unwrap() as usize;
        let f = &o["floor"];
        let floor = f["floor_arcsec"].as_f64().unwrap();
        let n = f["n_pairs"].as_u64().unwrap() as f64;
        let stated = f["median_stated_sigma_arcsec"].as_f64().unwrap();
        let want = injected[c];
        let rel_median = 0.7214 / n.sqrt();
        let se = (stated * stated + want * want) / want * rel_median;
        println!(
            "{}: floor {floor:.3}\" vs injected {want:.3}\" (standard error {se:.3}\", {n} pairs)",
            names[c]
        );
        // ember (24 µm) and ask (point sources, no galaxies) share about 80
        // unique bright pairs; the others several hundred.
        assert!(n >= 75.0, "{}: {n} pairs", names[c]);
        assert!(
            (floor - want).abs() <= 4.0 * se,
            "{}: floor {floor} vs injected {want} (standard error {se})",
            names[c]
        );
        // The median after the floor is the Rayleigh median (the floor is > 0 here).
        assert!((f["median_d_after"].as_f64().unwrap() - 1.177_41).abs() < 1e-4);
        let line = format!(
            "floor of {} vs ask: {floor:.3}\" from {n} pairs (median d {:.2} -> 1.18)",
            names[c],
            f["median_d_before"].as_f64().unwrap()
        );
        assert!(stdout.contains(&line), "{line}\nnot in\n{stdout}");
    }
    // No demo floor is far above its stated errors.
    assert!(!stdout.contains("warning: the floor of"), "{stdout}");
}
