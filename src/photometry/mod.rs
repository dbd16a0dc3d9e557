//! Photometry: the band library and conversions between magnitudes and flux densities.
//!
//! A short tour:
//!
//! - [`bands`]: [`Band`] (system, wavelength, zero point, source) and
//!   [`BandLibrary`], the built-in `schemas/bands.toml` plus user band files.
//! - [`magnitude`]: [`ValueUnit`] says what a catalog column holds; a
//!   [`Conversion`] turns a value and its error into a [`FluxJy`] with first-order
//!   and exact 1-sigma errors.
//! - [`asinh`]: asinh magnitudes, including negative fluxes.
//! - [`flux`]: unit constants, νF_ν, and flux density back to magnitudes.
//! - [`limits`]: upper-limit rules ([`LimitRule`]) and the detection test.
//! - [`stromgren`]: Strömgren colour indices ([`StromgrenIndices`]).
//!
//! ```
//! use fluxloom::photometry::{BandLibrary, ValueUnit, flux};
//!
//! let bands = BandLibrary::builtin();
//! let ks = bands.get("tmass_ks").unwrap();
//! let conversion = ks.conversion(ValueUnit::VegaMag).unwrap();
//! let f = conversion.to_flux_jy(10.0, Some(0.03));
//! // 66.67 mJy (zero point 666.7 Jy, Cohen, Wheaton & Megeath 2003).
//! assert!((f.flux_jy - 0.06667).abs() < 1e-12);
//! let nu_fnu_cgs = flux::nu_fnu_cgs(f.flux_jy, ks.wavelength_um);
//! assert!((nu_fnu_cgs / 9.2576e-11 - 1.0).abs() < 1e-4);
//! ```
//!
//! References, as cited in this module:
//!
//! - Oke & Gunn 1983, ApJ 266, 713 — the AB system, 3631 Jy.
//! - Pogson 1856, MNRAS 17, 12 — magnitudes (from memory).
//! - Lupton, Gunn & Szalay 1999, AJ 118, 1406 — asinh magnitudes.
//! - Stoughton et al. 2002, AJ 123, 485 — SDSS asinh softening (Table 21).
//! - Bessell, Castelli & Plez 1998, A&A 333, 231 — Johnson–Cousins zero points.
//! - Fukugita et al. 1996, AJ 111, 1748 — SDSS system.
//! - Cohen, Wheaton & Megeath 2003, AJ 126, 1090 — 2MASS zero points.
//! - Jarrett et al. 2011, ApJ 735, 112 — WISE zero points; Brown, Jarrett & Cluver
//!   2014, PASA 31, e049 — W4 revision.
//! - Reach et al. 2005, PASP 117, 978 — IRAC zero points.
//! - Engelbracht et al. 2007, PASP 119, 994; Gordon et al. 2007, PASP 119, 1019;
//!   Stansberry et al. 2007, PASP 119, 1038 — MIPS 24, 70, 160 µm.
//! - Riello et al. 2021, A&A 649, A3 — Gaia zero points.
//! - Strömgren 1966, ARA&A 4, 433 — uvby indices (from memory).

pub mod asinh;
pub mod bands;
pub mod flux;
pub mod limits;
pub mod magnitude;
pub mod stromgren;

pub use bands::{Band, BandLibrary, PhotSystem};
pub use limits::LimitRule;
pub use magnitude::{AB_ZERO_POINT_JY, Conversion, FluxJy, ValueUnit};
pub use stromgren::StromgrenIndices;
