//! The true objects of the demo field and their model spectral energy distributions.
//!
//! [`generate`] places 654 objects in the field and gives each a true flux density in
//! every band of [`DEMO_BANDS`] and a [`Population`] (field objects, high-proper-motion
//! stars with catalog motions, faint fast movers without, dusty galaxies, companions)
//! and, for pairs, a [`PairKind`]. The models are deliberately simple and are meant for
//! demo data only:
//!
//! - **Photospheres** ([`Kind::Star`], [`Kind::ClassIII`], and under the disks of
//!   young stars): a blackbody, F_ν = π (R/d)² B_ν(T) (Planck law), with a crude
//!   main-sequence radius R = R_☉ (T / 5772 K)^1.5 (an approximation for demo data;
//!   pre-main-sequence stars get twice that radius), reddened by [`extinction_ratio`].
//! - **Disks** ([`Kind::ClassII`], [`Kind::ClassI`]): an excess
//!   λF_λ ∝ λ^β exp(−(1.2 µm / λ)²), a power law that switches off below about 1 µm,
//!   scaled so that the spectral index α of the total, fitted by least squares over
//!   [`ALPHA_BANDS`] (2–24 µm), equals a target drawn inside the class range of
//!   Greene et al. 1994 (Class II −1.6 ≤ α < −0.3, Class I α ≥ 0.3).
//! - **Galaxies** ([`Kind::Galaxy`]): a cool (3500 K) blackbody stellar bump with
//!   internal reddening plus a dust power law νF_ν ∝ λ^β (β in 0…0.8, so νF_ν is flat or
//!   rising into the mid-infrared), scaled to a faint Ks, with a half-light radius of
//!   0.4–2.5″ (log-uniform). Dusty galaxies: the dust term alone with β = 2–2.6 and a
//!   3 µm cut-off, scaled to a 22 µm (W4-like) magnitude of 6.6–7.6.
//! - **Fast movers**: cool photospheres (3200–4500 K) moving 20–300 mas/yr
//!   (log-uniform), placed at the distance that makes G 19.1–21.5.
//! - **Companions**: copies of a star's spectrum scaled by 0.02–0.07 (faint neighbours)
//!   or 0.5–1.0 (equal companions), 2–4.5″ away.
//!
//! α follows Lada 1987 (IAU Symp. 115, from memory): α = d log(λF_λ) / d log λ, with λF_λ ∝ F_ν / λ.

use crate::photometry::BandLibrary;
use crate::sky::propagation::propagate_deg;

use super::{FIELD_DEC_DEG, FIELD_HALF_SIZE_DEG, FIELD_RA_DEG, Rng};

/// Every band the demo surveys observe, in the order of [`TruthObject::flux_jy`].
pub const DEMO_BANDS: [&str; 20] = [
    "gaia_bp", "gaia_g", "gaia_rp", "sdss_u", "sdss_g", "sdss_r", "sdss_i", "sdss_z", "tmass_j",
    "tmass_h", "tmass_ks", "wise_w1", "wise_w2", "wise_w3", "wise_w4", "irac_36", "irac_45",
    "irac_58", "irac_80", "mips_24",
];

/// The bands of the 2–24 µm spectral-index fit: Ks, the four IRAC-like channels and
/// MIPS-like 24 µm (the 2–24 µm window of the c2d legacy work, Evans et al. 2009, from memory).
pub const ALPHA_BANDS: [&str; 6] = [
    "tmass_ks", "irac_36", "irac_45", "irac_58", "irac_80", "mips_24",
];

/// Planck constant h in J s (exact, 2019 SI definition).
const PLANCK_J_S: f64 = 6.626_070_15e-34;
/// Boltzmann constant k in J/K (exact, 2019 SI definition).
const BOLTZMANN_J_PER_K: f64 = 1.380_649e-23;
/// Speed of light c in m/s (exact, SI).
const LIGHT_M_PER_S: f64 = 299_792_458.0;
/// Nominal solar radius in m (IAU 2015 Resolution B3).
const SOLAR_RADIUS_M: f64 = 6.957e8;
/// One parsec in m (IAU 2015 Resolution B2).
const PARSEC_M: f64 = 3.085_677_581_491_367e16;
/// 1 Jy = 1e-26 W m⁻² Hz⁻¹ (SI definition).
const JY_PER_W_M2_HZ: f64 = 1e26;
/// Solar effective temperature in K (IAU 2015 Resolution B3 nominal value).
const SOLAR_TEFF_K: f64 = 5772.0;

/// What a true object is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// A field star: a reddened photosphere.
    Star,
    /// A protostar with a rising infrared spectrum (α ≥ 0.3).
    ClassI,
    /// A young star with a disk (−1.6 ≤ α < −0.3).
    ClassII,
    /// A young star without a disk: photosphere only.
    ClassIII,
    /// A background galaxy, extended.
    Galaxy,
}

impl Kind {
    /// The name used in `truth_objects.csv`.
    pub fn as_str(self) -> &'static str {
        match self {
            Kind::Star => "star",
            Kind::ClassI => "class_i",
            Kind::ClassII => "class_ii",
            Kind::ClassIII => "class_iii",
            Kind::Galaxy => "galaxy",
        }
    }

    /// Every kind, in the order used for counts.
    pub const ALL: [Kind; 5] = [
        Kind::Star,
        Kind::ClassI,
        Kind::ClassII,
        Kind::ClassIII,
        Kind::Galaxy,
    ];
}

/// One true object of the field.
#[derive(Debug, Clone, PartialEq)]
pub struct TruthObject {
    /// Identifier, `T0001` …
    pub truth_id: String,
    /// What the object is.
    pub kind: Kind,
    /// Right ascension at [`super::TRUTH_EPOCH_YR`], degrees.
    pub ra_deg: f64,
    /// Declination at [`super::TRUTH_EPOCH_YR`], degrees.
    pub dec_deg: f64,
    /// Proper motion in RA, including cos δ, mas/yr.
    pub pmra_cosdec_masyr: f64,
    /// Proper motion in Dec, mas/yr.
    pub pmdec_masyr: f64,
    /// The 2–24 µm spectral index of the true fluxes, for young stars (None otherwise).
    pub alpha: Option<f64>,
    /// Photospheric temperature in K (None for galaxies).
    pub teff_k: Option<f64>,
    /// Visual extinction applied, magnitudes (internal reddening for galaxies).
    pub av_mag: f64,
    /// True flux density in Jy per band of [`DEMO_BANDS`].
    pub flux_jy: Vec<f64>,
    /// Half-light radius of an extended object (galaxies), arcsec.
    pub half_light_arcsec: Option<f64>,
    /// Which population the object was made for.
    pub population: Population,
    /// The pair the object belongs to, with the index of its partner.
    pub pair: Option<(PairKind, usize)>,
}

/// The population a true object was made for (written as `population`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Population {
    /// An ordinary object of its kind.
    Field,
    /// A nearby star moving 100–600 mas/yr, bright enough for `ask` to measure its motion.
    HighPm,
    /// A star moving 20–300 mas/yr, too faint (G > 19) for `ask` to give a motion:
    /// only the positions at the survey epochs tell.
    FastMover,
    /// A dusty galaxy whose light rises steeply into the mid-infrared: among the
    /// `harrier` bands it is detected at 22 µm only.
    Dusty,
    /// A copy of a bright star's spectrum, scaled down, placed beside it (a faint
    /// neighbour or an equal companion, see [`PairKind`]).
    Companion,
}

impl Population {
    /// The name used in `truth_objects.csv`.
    pub fn as_str(self) -> &'static str {
        match self {
            Population::Field => "field",
            Population::HighPm => "high_pm",
            Population::FastMover => "fast_mover",
            Population::Dusty => "dusty",
            Population::Companion => "companion",
        }
    }
}

/// The kind of pair two true objects were placed in (written as `pair`).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PairKind {
    /// 1.5–4″ apart, independent spectra.
    Wide,
    /// 0.5–0.95″ apart, independent spectra.
    Close,
    /// A companion with 2–7 % of a bright star's flux in every band, 2–4.5″ away.
    FaintNeighbour,
    /// A companion with 50–100 % of a star's flux in every band, 2–4.5″ away.
    Equal,
}

impl PairKind {
    /// The name used in `truth_objects.csv`.
    pub fn as_str(self) -> &'static str {
        match self {
            PairKind::Wide => "wide",
            PairKind::Close => "close",
            PairKind::FaintNeighbour => "faint_neighbour",
            PairKind::Equal => "equal",
        }
    }
}

/// Wavelength (µm) and zero point (Jy) of each band of [`DEMO_BANDS`], from the
/// built-in band library.
#[derive(Debug, Clone)]
pub struct BandGrid {
    /// Band wavelengths in µm.
    pub wavelength_um: Vec<f64>,
    /// Zero-magnitude flux densities in Jy.
    pub zero_point_jy: Vec<f64>,
}

impl BandGrid {
    /// The grid from the built-in band library.
    ///
    /// # Panics
    /// If a band of [`DEMO_BANDS`] is missing from the built-in library or has no
    /// zero point (a defect of the library, checked by a test).
    pub fn builtin() -> BandGrid {
        let library = BandLibrary::builtin();
        let bands: Vec<_> = DEMO_BANDS
            .iter()
            .map(|id| {
                library
                    .get(id)
                    .unwrap_or_else(|| panic!("band {id} missing from the built-in library"))
            })
            .collect();
        BandGrid {
            wavelength_um: bands.iter().map(|b| b.wavelength_um).collect(),
            zero_point_jy: bands
                .iter()
                .map(|b| b.zero_point_jy.expect("demo bands have zero points"))
                .collect(),
        }
    }

    /// The index of band `id` in [`DEMO_BANDS`].
    ///
    /// # Panics
    /// If `id` is not a demo band.
    pub fn index(id: &str) -> usize {
        DEMO_BANDS
            .iter()
            .position(|b| *b == id)
            .unwrap_or_else(|| panic!("{id} is not a demo band"))
    }
}

/// Planck's law per unit frequency, B_ν(T) = (2hν³/c²) / (exp(hν/kT) − 1), in
/// Jy per steradian, at wavelength `wavelength_um` (µm) and temperature `t_k` (K).
pub fn planck_jy_per_sr(wavelength_um: f64, t_k: f64) -> f64 {
    let nu_hz = LIGHT_M_PER_S / (wavelength_um * 1e-6);
    let x = PLANCK_J_S * nu_hz / (BOLTZMANN_J_PER_K * t_k);
    let b_si = 2.0 * PLANCK_J_S * nu_hz.powi(3) / (LIGHT_M_PER_S * LIGHT_M_PER_S) / x.exp_m1();
    b_si * JY_PER_W_M2_HZ
}

/// A_λ / A_V of the demo data: (λ / 0.55 µm)^−1.7 for λ > 0.9 µm (a near- and
/// mid-infrared power law), and 0.55 µm / λ at shorter wavelengths (the roughly 1/λ
/// behaviour of Cardelli, Clayton & Mathis 1989 in the optical). An approximation for
/// demo data only: it steps at 0.9 µm, and it is too steep beyond about 5 µm, where
/// measured curves flatten.
pub fn extinction_ratio(wavelength_um: f64) -> f64 {
    if wavelength_um > 0.9 {
        (wavelength_um / 0.55).powf(-1.7)
    } else {
        0.55 / wavelength_um
    }
}

/// The spectral index α = d log(λF_λ) / d log λ (Lada 1987, from memory), fitted by unweighted
/// least squares to (log λ, log(F_ν/λ)) over the given points; fluxes must be positive.
pub fn spectral_index(wavelength_um: &[f64], flux_jy: &[f64]) -> f64 {
    let n = wavelength_um.len() as f64;
    let xs: Vec<f64> = wavelength_um.iter().map(|l| l.log10()).collect();
    let ys: Vec<f64> = wavelength_um
        .iter()
        .zip(flux_jy)
        .map(|(l, f)| (f / l).log10())
        .collect();
    let (sx, sy) = (xs.iter().sum::<f64>(), ys.iter().sum::<f64>());
    let sxx: f64 = xs.iter().map(|x| x * x).sum();
    let sxy: f64 = xs.iter().zip(&ys).map(|(x, y)| x * y).sum();
    (n * sxy - sx * sy) / (n * sxx - sx * sx)
}

/// The 2–24 µm spectral index of `flux_jy` (indexed as [`DEMO_BANDS`]) over [`ALPHA_BANDS`].
pub fn alpha_2_24(grid: &BandGrid, flux_jy: &[f64]) -> f64 {
    let idx: Vec<usize> = ALPHA_BANDS.iter().map(|b| BandGrid::index(b)).collect();
    let l: Vec<f64> = idx.iter().map(|&i| grid.wavelength_um[i]).collect();
    let f: Vec<f64> = idx.iter().map(|&i| flux_jy[i]).collect();
    spectral_index(&l, &f)
}

/// Number of objects per kind before the companions are added: 398 stars (5 of them
/// high-proper-motion, 20 fast movers), 10 Class I, 62 Class II, 60 Class III and 100
/// galaxies (10 of them dusty): 630, and 24 companions (stars) make 654.
const COUNTS: [(Kind, usize); 5] = [
    (Kind::Star, 398),
    (Kind::ClassI, 10),
    (Kind::ClassII, 62),
    (Kind::ClassIII, 60),
    (Kind::Galaxy, 100),
];
/// How many of the stars are high-proper-motion stars (100–600 mas/yr).
const HIGH_PM_STARS: usize = 5;
/// How many of the stars are faint fast movers (20–300 mas/yr, G 19.1–21.5).
const FAST_MOVERS: usize = 20;
/// How many of the galaxies are dusty (detected by `harrier` at 22 µm only).
const DUSTY_GALAXIES: usize = 10;
/// Faint neighbours (2–7 % of a bright star's flux) and equal companions (50–100 %).
const FAINT_NEIGHBOURS: usize = 12;
/// See [`FAINT_NEIGHBOURS`].
const EQUAL_COMPANIONS: usize = 12;
/// Pairs at 1.5–4″ (blends for the 6″ surveys) and below 1″.
const WIDE_PAIRS: usize = 15;
/// Pairs closer than 1″, both stars brighter than G = 20 (so `ask` separates them).
const CLOSE_PAIRS: usize = 8;
/// Centre of the young-star group, offset from the field centre (east, north), degrees.
const YSO_GROUP_OFFSET_DEG: (f64, f64) = (0.05, 0.02);
/// Gaussian radius of the young-star group, degrees.
const YSO_GROUP_SIGMA_DEG: f64 = 0.025;

/// Generates the true objects of the field for `seed`.
pub fn generate(seed: u64) -> Vec<TruthObject> {
    let grid = BandGrid::builtin();
    let mut rng = Rng::new(seed, "truth");
    let mut objects = Vec::new();
    for (kind, count) in COUNTS {
        for k in 0..count {
            let population = match kind {
                Kind::Star if k < HIGH_PM_STARS => Population::HighPm,
                Kind::Star if k < HIGH_PM_STARS + FAST_MOVERS => Population::FastMover,
                Kind::Galaxy if k < DUSTY_GALAXIES => Population::Dusty,
                _ => Population::Field,
            };
            objects.push(make_object(kind, population, &grid, &mut rng));
        }
    }
    // Mix the kinds so that identifiers do not reveal them (Fisher–Yates shuffle).
    for i in (1..objects.len()).rev() {
        let j = rng.below(i + 1);
        objects.swap(i, j);
    }
    place_pairs(&mut objects, &mut rng);
    add_companions(&mut objects, &mut rng);
    // Mix the companions in too, keeping each pair's partner index right.
    let mut order: Vec<usize> = (0..objects.len()).collect();
    for i in (1..order.len()).rev() {
        let j = rng.below(i + 1);
        order.swap(i, j);
    }
    let mut new_index = vec![0; order.len()];
    for (new, &old) in order.iter().enumerate() {
        new_index[old] = new;
    }
    let mut objects: Vec<TruthObject> = order.iter().map(|&old| objects[old].clone()).collect();
    for o in &mut objects {
        if let Some((kind, partner)) = o.pair {
            o.pair = Some((kind, new_index[partner]));
        }
    }
    for (i, o) in objects.iter_mut().enumerate() {
        o.truth_id = format!("T{:04}", i + 1);
    }
    objects
}

/// A uniform position in the field.
fn uniform_position(rng: &mut Rng) -> (f64, f64) {
    let cos_dec = FIELD_DEC_DEG.to_radians().cos();
    let ra = FIELD_RA_DEG + rng.range(-FIELD_HALF_SIZE_DEG, FIELD_HALF_SIZE_DEG) / cos_dec;
    let dec = FIELD_DEC_DEG + rng.range(-FIELD_HALF_SIZE_DEG, FIELD_HALF_SIZE_DEG);
    (ra, dec)
}

/// Whether a position lies in the field (inside the square, with a 5″ margin).
pub fn in_field(ra_deg: f64, dec_deg: f64) -> bool {
    let cos_dec = FIELD_DEC_DEG.to_radians().cos();
    let margin = 5.0 / 3600.0;
    ((ra_deg - FIELD_RA_DEG) * cos_dec).abs() < FIELD_HALF_SIZE_DEG - margin
        && (dec_deg - FIELD_DEC_DEG).abs() < FIELD_HALF_SIZE_DEG - margin
}

/// A position for a young star: three in four in a Gaussian group in the eastern
/// half of the field, the rest uniform.
fn young_star_position(rng: &mut Rng) -> (f64, f64) {
    if rng.uniform() < 0.25 {
        return uniform_position(rng);
    }
    let cos_dec = FIELD_DEC_DEG.to_radians().cos();
    loop {
        let east = YSO_GROUP_OFFSET_DEG.0 + YSO_GROUP_SIGMA_DEG * rng.normal();
        let north = YSO_GROUP_OFFSET_DEG.1 + YSO_GROUP_SIGMA_DEG * rng.normal();
        let (ra, dec) = (FIELD_RA_DEG + east / cos_dec, FIELD_DEC_DEG + north);
        if in_field(ra, dec) {
            return (ra, dec);
        }
    }
}

/// Reddened blackbody photosphere: F_ν = π (R/d)² B_ν(T) · 10^(−0.4 A_V A_λ/A_V), Jy.
fn photosphere(grid: &BandGrid, t_k: f64, radius_rsun: f64, distance_pc: f64, av: f64) -> Vec<f64> {
    let omega =
        std::f64::consts::PI * (radius_rsun * SOLAR_RADIUS_M / (distance_pc * PARSEC_M)).powi(2);
    grid.wavelength_um
        .iter()
        .map(|&l| omega * planck_jy_per_sr(l, t_k) * 10f64.powf(-0.4 * av * extinction_ratio(l)))
        .collect()
}

/// Disk excess shape in F_ν (Jy per unit amplitude): λF_λ ∝ λ^β exp(−(1.2 µm/λ)²),
/// i.e. F_ν ∝ (λ / 2.2 µm)^(β+1) exp(−(1.2 µm/λ)²), reddened like the star.
fn disk_shape(grid: &BandGrid, beta: f64, av: f64) -> Vec<f64> {
    grid.wavelength_um
        .iter()
        .map(|&l| {
            (l / 2.2).powf(beta + 1.0)
                * (-(1.2 / l).powi(2)).exp()
                * 10f64.powf(-0.4 * av * extinction_ratio(l))
        })
        .collect()
}

/// Adds a disk to `phot` so that the 2–24 µm α of the sum equals `target`: the disk
/// slope β exceeds `target`, so α rises monotonically from the photosphere's value
/// towards β as the disk amplitude grows; the amplitude is found by bisection in log.
fn with_disk(grid: &BandGrid, phot: &[f64], target: f64, beta: f64, av: f64) -> Vec<f64> {
    let shape = disk_shape(grid, beta, av);
    let total = |log_amp: f64| -> Vec<f64> {
        let a = 10f64.powf(log_amp);
        phot.iter().zip(&shape).map(|(p, s)| p + a * s).collect()
    };
    let ks = phot[BandGrid::index("tmass_ks")];
    let (mut lo, mut hi) = (ks.log10() - 6.0, ks.log10() + 6.0);
    for _ in 0..100 {
        let mid = 0.5 * (lo + hi);
        if alpha_2_24(grid, &total(mid)) < target {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    total(0.5 * (lo + hi))
}

fn make_object(kind: Kind, population: Population, grid: &BandGrid, rng: &mut Rng) -> TruthObject {
    let (mut pmra, mut pmdec) = (0.0, 0.0);
    let mut half_light_arcsec = None;
    let (ra_deg, dec_deg) = match (kind, population) {
        (Kind::ClassI | Kind::ClassII | Kind::ClassIII, _) => young_star_position(rng),
        (_, Population::Dusty) => dusty_position(rng),
        _ => uniform_position(rng),
    };
    let high_pm = population == Population::HighPm;
    let (flux_jy, teff_k, av_mag, alpha) = match kind {
        Kind::Star => {
            let (t, d, av) = if population == Population::FastMover {
                // Speed log-uniform in 20–300 mas/yr; the distance is set below from G.
                let speed = rng.range(20f64.ln(), 300f64.ln()).exp();
                let pa = rng.range(0.0, std::f64::consts::TAU);
                pmra = speed * pa.sin();
                pmdec = speed * pa.cos();
                (rng.range(3200.0, 4500.0), 1.0, rng.range(0.0, 0.3))
            } else if high_pm {
                let speed = rng.range(100.0, 600.0);
                let pa = rng.range(0.0, std::f64::consts::TAU);
                pmra = speed * pa.sin();
                pmdec = speed * pa.cos();
                (
                    rng.range(3200.0, 5200.0),
                    rng.range(15.0, 80.0),
                    rng.range(0.0, 0.1),
                )
            } else {
                // Cool stars dominate: T = 3200 K + 5800 K · u².
                let u = rng.uniform();
                let d = (rng.range(250f64.ln(), 15_000f64.ln())).exp();
                (3200.0 + 5800.0 * u * u, d, rng.range(0.0, 3.0))
            };
            let r = (t / SOLAR_TEFF_K).powf(1.5);
            let mut flux = photosphere(grid, t, r, d, av);
            if population == Population::FastMover {
                // Placed at the distance that gives G = 19.1–21.5: fainter than the
                // G = 19 limit of `ask`'s proper motions (F ∝ 1/d²).
                let g = BandGrid::index("gaia_g");
                let target = grid.zero_point_jy[g] * 10f64.powf(-0.4 * rng.range(19.1, 21.5));
                let scale = target / flux[g];
                flux.iter_mut().for_each(|f| *f *= scale);
            }
            (flux, Some(t), av, None)
        }
        Kind::ClassI | Kind::ClassII | Kind::ClassIII => {
            let t = rng.range(3200.0, 5000.0);
            let r = 2.0 * (t / SOLAR_TEFF_K).powf(1.5);
            let d = 400.0 + 20.0 * rng.normal();
            let av = match kind {
                Kind::ClassI => rng.range(8.0, 25.0),
                _ => rng.range(0.5, 5.0),
            };
            let phot = photosphere(grid, t, r, d, av);
            let flux = match kind {
                Kind::ClassII => {
                    let target = rng.range(-1.5, -0.4);
                    with_disk(grid, &phot, target, target + rng.range(0.3, 0.8), av)
                }
                Kind::ClassI => {
                    let target = rng.range(0.35, 1.2);
                    with_disk(grid, &phot, target, target + rng.range(0.3, 0.8), av)
                }
                _ => phot,
            };
            let alpha = alpha_2_24(grid, &flux);
            (flux, Some(t), av, Some(alpha))
        }
        Kind::Galaxy if population == Population::Dusty => {
            // Dust alone, νF_ν ∝ λ^β exp(−(3 µm/λ)²) with β = 2–2.6, scaled to a
            // 22 µm magnitude of 6.6–7.6 (W4-like): fainter than the 3.4 and 4.6 µm
            // detection limits of `harrier`, brighter than its 22 µm one.
            half_light_arcsec = Some(rng.range(0.4f64.ln(), 2.5f64.ln()).exp());
            let av = rng.range(0.5, 2.5);
            let beta = rng.range(2.0, 2.6);
            let shape: Vec<f64> = grid
                .wavelength_um
                .iter()
                .map(|&l| (l / 22.0).powf(beta + 1.0) * (-(3.0 / l).powi(2)).exp())
                .collect();
            let w4 = BandGrid::index("wise_w4");
            let mag = rng.range(6.6, 7.6);
            let scale = grid.zero_point_jy[w4] * 10f64.powf(-0.4 * mag) / shape[w4];
            (shape.iter().map(|s| s * scale).collect(), None, av, None)
        }
        Kind::Galaxy => {
            half_light_arcsec = Some(rng.range(0.4f64.ln(), 2.5f64.ln()).exp());
            let av = rng.range(0.5, 2.5);
            let beta = rng.range(0.0, 0.8);
            let k = rng.range(0.1, 0.8);
            let norm = planck_jy_per_sr(1.6, 3500.0);
            let cut8 = (-(3.0f64 / 8.0).powi(2)).exp();
            let shape: Vec<f64> = grid
                .wavelength_um
                .iter()
                .map(|&l| {
                    let stars = planck_jy_per_sr(l, 3500.0) / norm
                        * 10f64.powf(-0.4 * av * extinction_ratio(l));
                    // νF_ν of the dust at 8 µm is k times νF_ν of the (unreddened)
                    // stars at 1.6 µm: F_ν,dust(8 µm) = 5k F_ν,stars(1.6 µm).
                    let dust =
                        5.0 * k * (l / 8.0).powf(beta + 1.0) * (-(3.0 / l).powi(2)).exp() / cut8;
                    stars + dust
                })
                .collect();
            let ks_index = BandGrid::index("tmass_ks");
            let ks_mag = rng.range(15.5, 18.5);
            let scale = grid.zero_point_jy[ks_index] * 10f64.powf(-0.4 * ks_mag) / shape[ks_index];
            (shape.iter().map(|s| s * scale).collect(), None, av, None)
        }
    };
    TruthObject {
        truth_id: String::new(),
        kind,
        ra_deg,
        dec_deg,
        pmra_cosdec_masyr: pmra,
        pmdec_masyr: pmdec,
        alpha,
        teff_k,
        av_mag,
        flux_jy,
        half_light_arcsec,
        population,
        pair: None,
    }
}

/// A position inside the part of the field where `harrier` observes 22 µm (the
/// north-east), for the dusty galaxies.
fn dusty_position(rng: &mut Rng) -> (f64, f64) {
    let cos_dec = FIELD_DEC_DEG.to_radians().cos();
    let east = rng.range(0.0, FIELD_HALF_SIZE_DEG - 0.01);
    let north = rng.range(-0.03, FIELD_HALF_SIZE_DEG - 0.01);
    (FIELD_RA_DEG + east / cos_dec, FIELD_DEC_DEG + north)
}

/// A position `sep_arcsec` from (`ra`, `dec`) along position angle `pa` (radians),
/// as one year of motion (exact on the sphere).
fn offset_position(ra: f64, dec: f64, sep_arcsec: f64, pa: f64) -> (f64, f64) {
    propagate_deg(
        ra,
        dec,
        sep_arcsec * 1000.0 * pa.sin(),
        sep_arcsec * 1000.0 * pa.cos(),
        1.0,
    )
}

/// Adds [`FAINT_NEIGHBOURS`] faint neighbours beside bright stars (G < 17) and
/// [`EQUAL_COMPANIONS`] equal companions beside stars (G < 19), each a copy of its
/// primary's spectrum scaled by 0.02–0.07 or 0.5–1.0, 2–4.5″ away: the 6″ beams
/// see them as one source, the finer surveys as two. Primaries are stationary
/// field stars in the eastern half, where `harrier` observes, not already in a pair.
fn add_companions(objects: &mut Vec<TruthObject>, rng: &mut Rng) {
    let g = BandGrid::index("gaia_g");
    let zp_g = BandGrid::builtin().zero_point_jy[g];
    let brighter = |o: &TruthObject, mag: f64| o.flux_jy[g] > zp_g * 10f64.powf(-0.4 * mag);
    let mut pool: Vec<usize> = (0..objects.len())
        .filter(|&i| {
            let o = &objects[i];
            o.kind == Kind::Star
                && o.population == Population::Field
                && o.pair.is_none()
                && o.ra_deg > FIELD_RA_DEG + 0.01
                && brighter(o, 19.0)
        })
        .collect();
    for p in 0..FAINT_NEIGHBOURS + EQUAL_COMPANIONS {
        let faint = p < FAINT_NEIGHBOURS;
        let candidates: Vec<usize> = pool
            .iter()
            .copied()
            .filter(|&i| !faint || brighter(&objects[i], 17.0))
            .collect();
        let primary = candidates[rng.below(candidates.len())];
        pool.retain(|&i| i != primary);
        let ratio = if faint {
            rng.range(0.02, 0.07)
        } else {
            rng.range(0.5, 1.0)
        };
        let sep = rng.range(2.0, 4.5);
        let pa = rng.range(0.0, std::f64::consts::TAU);
        let o = &objects[primary];
        let (ra, dec) = offset_position(o.ra_deg, o.dec_deg, sep, pa);
        let kind = if faint {
            PairKind::FaintNeighbour
        } else {
            PairKind::Equal
        };
        let companion = TruthObject {
            truth_id: String::new(),
            kind: Kind::Star,
            ra_deg: ra,
            dec_deg: dec,
            pmra_cosdec_masyr: 0.0,
            pmdec_masyr: 0.0,
            alpha: None,
            teff_k: o.teff_k,
            av_mag: o.av_mag,
            flux_jy: o.flux_jy.iter().map(|f| f * ratio).collect(),
            half_light_arcsec: None,
            population: Population::Companion,
            pair: Some((kind, primary)),
        };
        let index = objects.len();
        objects[primary].pair = Some((kind, index));
        objects.push(companion);
    }
}

/// Moves companions next to primaries: [`WIDE_PAIRS`] pairs at 1.5–4″ (the first five
/// between young stars, so that the 24 µm survey sees blends of two disks) and
/// [`CLOSE_PAIRS`] pairs of stars brighter than G = 20 (10⁻⁸ of the G zero point) at 0.5–0.95″. Only [`Population::Field`] objects take part.
fn place_pairs(objects: &mut [TruthObject], rng: &mut Rng) {
    let is_young = |o: &TruthObject| matches!(o.kind, Kind::ClassI | Kind::ClassII);
    let free: Vec<usize> = (0..objects.len())
        .filter(|&i| objects[i].population == Population::Field)
        .collect();
    let mut young: Vec<usize> = free
        .iter()
        .copied()
        .filter(|&i| is_young(&objects[i]))
        .collect();
    let mut others: Vec<usize> = free
        .iter()
        .copied()
        .filter(|&i| !is_young(&objects[i]))
        .collect();
    let g = BandGrid::index("gaia_g");
    let zp_g = BandGrid::builtin().zero_point_jy[g];
    let mut bright: Vec<usize> = others
        .iter()
        .copied()
        .filter(|&i| objects[i].kind == Kind::Star && objects[i].flux_jy[g] > zp_g * 1e-8)
        .collect();
    let take = |pool: &mut Vec<usize>, rng: &mut Rng| pool.swap_remove(rng.below(pool.len()));
    for p in 0..WIDE_PAIRS + CLOSE_PAIRS {
        let (primary, secondary) = if p < 5 {
            (take(&mut young, rng), take(&mut young, rng))
        } else if p < WIDE_PAIRS {
            let pair = (take(&mut others, rng), take(&mut others, rng));
            bright.retain(|&i| i != pair.0 && i != pair.1);
            pair
        } else {
            (take(&mut bright, rng), take(&mut bright, rng))
        };
        let sep_arcsec = if p < WIDE_PAIRS {
            rng.range(1.5, 4.0)
        } else {
            rng.range(0.5, 0.95)
        };
        let pa = rng.range(0.0, std::f64::consts::TAU);
        let (ra, dec) = (objects[primary].ra_deg, objects[primary].dec_deg);
        let (ra2, dec2) = offset_position(ra, dec, sep_arcsec, pa);
        objects[secondary].ra_deg = ra2;
        objects[secondary].dec_deg = dec2;
        let kind = if p < WIDE_PAIRS {
            PairKind::Wide
        } else {
            PairKind::Close
        };
        objects[primary].pair = Some((kind, secondary));
        objects[secondary].pair = Some((kind, primary));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn planck_peak_follows_wien() {
        // The peak of B_ν lies at hν/kT = 2.821 (Wien displacement in frequency), i.e.
        // λ = hc / (2.821 kT) = 5.100 µm at 1000 K (hc/k = 14387.77 µm K).
        let t = 1000.0;
        let peak = 14387.77 / (2.821_439 * t);
        let b0 = planck_jy_per_sr(peak, t);
        assert!(b0 > planck_jy_per_sr(peak * 1.01, t));
        assert!(b0 > planck_jy_per_sr(peak * 0.99, t));
    }

    #[test]
    fn planck_rayleigh_jeans_limit() {
        // For hν ≪ kT, B_ν → 2ν²kT/c² (Rayleigh–Jeans): at 1 mm and 10⁴ K, hν/kT = 0.0014.
        let l_um = 1000.0;
        let nu = LIGHT_M_PER_S / (l_um * 1e-6);
        let rj = 2.0 * nu * nu * BOLTZMANN_J_PER_K * 1e4 / LIGHT_M_PER_S.powi(2) * 1e26;
        let b = planck_jy_per_sr(l_um, 1e4);
        assert!((b / rj - 1.0).abs() < 1e-3, "{b} vs {rj}");
    }

    #[test]
    fn spectral_index_of_power_laws() {
        // F_ν ∝ ν² ∝ λ⁻² (Rayleigh–Jeans) gives α = −3; F_ν ∝ λ (νF_ν flat) gives α = 0 (follows from the definition).
        let l = [2.159, 3.55, 7.872, 23.675];
        let rj: Vec<f64> = l.iter().map(|x| 1.0 / (x * x)).collect();
        let flat: Vec<f64> = l.to_vec();
        assert!((spectral_index(&l, &rj) + 3.0).abs() < 1e-12);
        assert!(spectral_index(&l, &flat).abs() < 1e-12);
    }

    #[test]
    fn field_section_7_5_alpha() {
        // Worked by hand with the band zero points (Cohen et al. 2003; Reach et al. 2005;
        // Engelbracht et al. 2007): Ks 9.00, [3.6] 8.30, [8.0] 7.20, [24] 5.00 give α = −1.364 (unweighted).
        let l = [2.159, 3.55, 7.872, 23.675];
        let f = [
            666.7 * 10f64.powf(-0.4 * 9.0),
            280.9 * 10f64.powf(-0.4 * 8.3),
            64.13 * 10f64.powf(-0.4 * 7.2),
            7.17 * 10f64.powf(-0.4 * 5.0),
        ];
        assert!((spectral_index(&l, &f) + 1.364).abs() < 1e-3);
    }

    #[test]
    fn extinction_ratio_shape() {
        assert!((extinction_ratio(0.55) - 1.0).abs() < 1e-12);
        // Ks: (2.159/0.55)^−1.7 = 0.0979; Cardelli, Clayton & Mathis 1989 give 0.117, same order.
        assert!((extinction_ratio(2.159) - 0.0979).abs() < 5e-4);
        assert!(extinction_ratio(0.36) > extinction_ratio(0.8));
    }

    #[test]
    fn class_ii_disks_hit_their_target() {
        let grid = BandGrid::builtin();
        let phot = photosphere(&grid, 4000.0, 1.0, 400.0, 2.0);
        for target in [-1.5, -1.0, -0.4] {
            let flux = with_disk(&grid, &phot, target, target + 0.5, 2.0);
            assert!((alpha_2_24(&grid, &flux) - target).abs() < 1e-6);
        }
    }

    #[test]
    fn counts_and_identifiers() {
        let objects = generate(42);
        assert_eq!(objects.len(), 654);
        assert_eq!(objects[0].truth_id, "T0001");
        assert_eq!(objects[653].truth_id, "T0654");
        let count = |p: Population| objects.iter().filter(|o| o.population == p).count();
        assert_eq!(count(Population::HighPm), HIGH_PM_STARS);
        assert_eq!(count(Population::FastMover), FAST_MOVERS);
        assert_eq!(count(Population::Dusty), DUSTY_GALAXIES);
        assert_eq!(
            count(Population::Companion),
            FAINT_NEIGHBOURS + EQUAL_COMPANIONS
        );
        for o in &objects {
            let speed = o.pmra_cosdec_masyr.hypot(o.pmdec_masyr);
            match o.population {
                Population::HighPm => assert!((100.0..600.0).contains(&speed)),
                Population::FastMover => assert!((20.0..300.0).contains(&speed)),
                _ => assert_eq!(speed, 0.0),
            }
            assert_eq!(o.half_light_arcsec.is_some(), o.kind == Kind::Galaxy);
            if let Some((_, partner)) = o.pair {
                let back = objects[partner].pair.map(|p| p.1);
                assert!(back.is_some(), "{}: partner without a pair", o.truth_id);
            }
        }
        assert!(objects.iter().all(|o| o.flux_jy.iter().all(|f| *f > 0.0)));
    }
}
