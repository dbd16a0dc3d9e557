//! Reading positions and epochs as written in catalogs.
//!
//! Sexagesimal text (RA in hours, Dec in degrees) becomes decimal degrees, and
//! epochs given as MJD or JD become Julian years, at the boundary, so the rest of
//! fluxloom sees only `ra_deg`, `dec_deg` and `epoch_yr`.

/// Parses sexagesimal RA in hours (`hh:mm:ss.s`, `hh mm ss.s` or `12h34m56.7s`)
/// into degrees in [0, 360).
pub fn parse_ra_hours(text: &str) -> Option<f64> {
    let (sign, [h, m, s]) = split_sexagesimal(text)?;
    if sign < 0.0
        || !(0.0..24.0).contains(&h)
        || !(0.0..60.0).contains(&m)
        || !(0.0..60.0).contains(&s)
    {
        return None;
    }
    Some((h + m / 60.0 + s / 3600.0) * 15.0)
}

/// Parses sexagesimal Dec in degrees (`±dd:mm:ss.s`, `-00 30 00`, `-12d34m56s`)
/// into degrees in [-90, 90]; the sign applies to the whole value, so `-00:30:00` is -0.5.
pub fn parse_dec_degrees(text: &str) -> Option<f64> {
    let (sign, [d, m, s]) = split_sexagesimal(text)?;
    if !(0.0..60.0).contains(&m) || !(0.0..60.0).contains(&s) {
        return None;
    }
    let value = sign * (d + m / 60.0 + s / 3600.0);
    (-90.0..=90.0).contains(&value).then_some(value)
}

/// Splits into a sign and three non-negative fields; missing trailing fields are 0.
fn split_sexagesimal(text: &str) -> Option<(f64, [f64; 3])> {
    let t = text.trim();
    let (sign, body) = match t.as_bytes().first()? {
        b'-' => (-1.0, &t[1..]),
        b'+' => (1.0, &t[1..]),
        _ => (1.0, t),
    };
    let mut fields = [0.0; 3];
    let mut count = 0;
    for part in body
        .split(|c: char| {
            c == ':' || c.is_whitespace() || matches!(c, 'h' | 'd' | 'm' | 's' | '°' | '\'' | '"')
        })
        .filter(|p| !p.is_empty())
    {
        if count == 3 {
            return None;
        }
        let v: f64 = part.parse().ok()?;
        if v < 0.0 || !v.is_finite() {
            return None;
        }
        fields[count] = v;
        count += 1;
    }
    (count > 0).then_some((sign, fields))
}

/// Modified Julian Date to Julian year: 2000.0 + (MJD − 51544.5) / 365.25
/// (J2000.0 = JD 2451545.0 = MJD 51544.5; Julian year = 365.25 days; IAU 1976, common practice).
pub fn mjd_to_julian_year(mjd: f64) -> f64 {
    2000.0 + (mjd - 51_544.5) / 365.25
}

/// Julian Date to Julian year: 2000.0 + (JD − 2451545.0) / 365.25.
pub fn jd_to_julian_year(jd: f64) -> f64 {
    2000.0 + (jd - 2_451_545.0) / 365.25
}

/// Converts a per-axis error pair (RA as a true angle, Dec) into an ellipse
/// (semi-major, semi-minor, position angle east of north in degrees).
pub fn axes_to_ellipse(sigma_ra: f64, sigma_dec: f64) -> (f64, f64, f64) {
    if sigma_ra > sigma_dec {
        (sigma_ra, sigma_dec, 90.0)
    } else {
        (sigma_dec, sigma_ra, 0.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sexagesimal() {
        // 10h00m00s = 150 deg (15 deg per hour, common practice).
        assert_eq!(parse_ra_hours("10:00:00"), Some(150.0));
        assert!((parse_ra_hours("05 35 17.3").unwrap() - 83.822_083_333).abs() < 1e-9);
        assert!((parse_ra_hours("05h35m17.3s").unwrap() - 83.822_083_333).abs() < 1e-9);
        assert_eq!(parse_dec_degrees("-00:30:00"), Some(-0.5));
        assert!((parse_dec_degrees("+41 16 07.5").unwrap() - 41.268_75).abs() < 1e-12);
        assert_eq!(parse_ra_hours("24:00:00"), None);
        assert_eq!(parse_ra_hours("-01:00:00"), None);
        assert_eq!(parse_dec_degrees("+91:00:00"), None);
        assert_eq!(parse_dec_degrees("12:61:00"), None);
        assert_eq!(parse_dec_degrees("abc"), None);
        assert_eq!(parse_dec_degrees(""), None);
    }

    #[test]
    fn epochs() {
        // J2000.0 is MJD 51544.5 and JD 2451545.0 (IAU definition).
        assert_eq!(mjd_to_julian_year(51_544.5), 2000.0);
        assert_eq!(jd_to_julian_year(2_451_545.0), 2000.0);
        // J2016.0 = JD 2457389.0 (Gaia DR3 reference epoch, Lindegren et al. 2021).
        assert!((jd_to_julian_year(2_457_389.0) - 2016.0).abs() < 1e-12);
    }

    #[test]
    fn axes() {
        assert_eq!(axes_to_ellipse(0.3, 0.1), (0.3, 0.1, 90.0));
        assert_eq!(axes_to_ellipse(0.1, 0.3), (0.3, 0.1, 0.0));
    }
}
