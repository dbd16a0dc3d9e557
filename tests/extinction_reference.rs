//! fluxloom's CCM89 and O'Donnell 1994 laws against the general-purpose Python
//! package `extinction` (values computed once, stored in
//! tests/fixtures/extinction/ccm89_odonnell94.csv with the script and versions).

use fluxloom::science::extinction::ccm89_a_over_av;

#[test]
fn laws_match_the_reference_library() {
    let text = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/extinction/ccm89_odonnell94.csv"
    ))
    .unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next(),
        Some("wavelength_um,ccm89_a_over_av,odonnell94_a_over_av")
    );
    let mut n = 0;
    for line in lines {
        let v: Vec<f64> = line.split(',').map(|s| s.parse().unwrap()).collect();
        let ccm = ccm89_a_over_av(v[0], 3.1, false).unwrap();
        let odo = ccm89_a_over_av(v[0], 3.1, true).unwrap();
        // The fixture has six decimals.
        assert!(
            (ccm - v[1]).abs() < 2e-6,
            "CCM89 at {} µm: {ccm} vs {}",
            v[0],
            v[1]
        );
        assert!(
            (odo - v[2]).abs() < 2e-6,
            "O'Donnell at {} µm: {odo} vs {}",
            v[0],
            v[2]
        );
        n += 1;
    }
    assert_eq!(n, 12);
}
