//! Sky geometry: positions as unit vectors, separations, epoch propagation, HEALPix
//! partitioning and the zone index that finds all pairs within a radius.
//!
//! Degrees are used at the edges (every public function takes `ra_deg`, `dec_deg`), radians and
//! unit vectors inside. A tour, in the order a cross-match uses the pieces:
//!
//! - [`vector`]: [`vector::radec_deg_to_vec`] and back, the chord arithmetic
//!   (c = 2 sin(θ/2)) that lets a radius test skip trigonometry, and angle-unit constants.
//! - [`separation`]: [`separation::separation_deg`] (spherical Vincenty, accurate from µas to
//!   180°), [`separation::position_angle_deg`] and gnomonic
//!   [`separation::tangent_offsets_arcsec`].
//! - [`propagation`]: [`propagation::propagate_deg`] moves a position along its proper motion
//!   to another epoch (linear space motion, no pole singularity).
//! - [`partition`]: [`partition::partition`] splits sources into HEALPix NESTED cells with
//!   margins, so cells can be matched independently without losing pairs across borders.
//! - [`zones`]: [`zones::ZoneIndex`] sorts points into declination zones and enumerates every
//!   pair within the match radius, or every point within a radius of a query.
//!
//! ```
//! use fluxloom::sky::propagation::propagate_deg;
//! use fluxloom::sky::zones::ZoneIndex;
//!
//! // A star measured at J2016.0 with 200 mas/yr of northward motion, and a detection
//! // of it from J2000.0, 3.2″ further south.
//! let (ra_2000, dec_2000) = propagate_deg(150.0, 2.2, 0.0, 200.0, -16.0);
//! let ra_deg = [ra_2000, 150.0, 150.01];
//! let dec_deg = [dec_2000, 2.2 - 3.2 / 3600.0, 2.2];
//! let index = ZoneIndex::build(&ra_deg, &dec_deg, 1.0 / 3600.0);
//! let mut pairs = Vec::new();
//! index.for_each_pair(|i, j, sep_arcsec| pairs.push((i, j, sep_arcsec)));
//! assert_eq!(pairs.len(), 1);
//! assert_eq!((pairs[0].0, pairs[0].1), (0, 1));
//! assert!(pairs[0].2 < 1e-6);
//! ```
//!
//! References, cited by short key in the submodules:
//! - Vincenty 1975, Survey Review 23, 88 (from memory): the separation formula.
//! - Górski et al. 2005, ApJ 622, 759: HEALPix.
//! - Gray, Nieto-Santisteban & Szalay 2006, Microsoft Research MSR-TR-2006-52: zones.
//! - ESA 1997, The Hipparcos and Tycho Catalogues, Vol. 1 §1.5.5 (from memory): rigorous
//!   propagation of space motion.
//! - Calabretta & Greisen 2002, A&A 395, 1077 (from memory): the gnomonic (TAN) projection.

pub mod coverage;
pub mod partition;
pub mod propagation;
pub mod separation;
pub mod vector;
pub mod zones;
