//! Photometric bands: effective wavelength, width and zero-magnitude flux density (Bessell 1979 for UBVRI,
//! Schneider, Gunn & Hoessel 1983 for griz, as tabulated in J. Huchra's magnitude notes, CfA), with typical
//! dark-sky brightness and extinction (from memory).

/// A photometric band: effective wavelength, relative width, and the flux density of a zero-magnitude star.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Band {
    /// Name (`V`, `R`, ...).
    pub name: &'static str,
    /// Effective wavelength, micrometres.
    pub lambda_um: f64,
    /// Width over wavelength, dlambda/lambda.
    pub width_frac: f64,
    /// Flux density at magnitude 0, Jy.
    pub zero_jy: f64,
    /// Typical dark-sky brightness at a good site, mag/arcsec^2 (from memory; settable per site).
    pub dark_sky_mag_arcsec2: f64,
    /// Typical extinction coefficient, mag per airmass (from memory; settable per site).
    pub extinction_mag: f64,
}

/// The bands: UBVRI from Bessell (1979), griz of Schneider, Gunn & Hoessel (1983), as tabulated in J. Huchra's
/// magnitude notes (CfA). Sky brightness and extinction are typical dark-site values, from memory.
pub const BANDS: [Band; 9] = [
    Band {
        name: "U",
        lambda_um: 0.36,
        width_frac: 0.15,
        zero_jy: 1810.0,
        dark_sky_mag_arcsec2: 22.0,
        extinction_mag: 0.55,
    },
    Band {
        name: "B",
        lambda_um: 0.44,
        width_frac: 0.22,
        zero_jy: 4260.0,
        dark_sky_mag_arcsec2: 22.7,
        extinction_mag: 0.25,
    },
    Band {
        name: "V",
        lambda_um: 0.55,
        width_frac: 0.16,
        zero_jy: 3640.0,
        dark_sky_mag_arcsec2: 21.8,
        extinction_mag: 0.15,
    },
    Band {
        name: "R",
        lambda_um: 0.64,
        width_frac: 0.23,
        zero_jy: 3080.0,
        dark_sky_mag_arcsec2: 20.9,
        extinction_mag: 0.10,
    },
    Band {
        name: "I",
        lambda_um: 0.79,
        width_frac: 0.19,
        zero_jy: 2550.0,
        dark_sky_mag_arcsec2: 19.9,
        extinction_mag: 0.07,
    },
    Band {
        name: "g",
        lambda_um: 0.52,
        width_frac: 0.14,
        zero_jy: 3730.0,
        dark_sky_mag_arcsec2: 22.0,
        extinction_mag: 0.18,
    },
    Band {
        name: "r",
        lambda_um: 0.67,
        width_frac: 0.14,
        zero_jy: 4490.0,
        dark_sky_mag_arcsec2: 21.1,
        extinction_mag: 0.10,
    },
    Band {
        name: "i",
        lambda_um: 0.79,
        width_frac: 0.16,
        zero_jy: 4760.0,
        dark_sky_mag_arcsec2: 20.3,
        extinction_mag: 0.07,
    },
    Band {
        name: "z",
        lambda_um: 0.91,
        width_frac: 0.13,
        zero_jy: 4810.0,
        dark_sky_mag_arcsec2: 19.5,
        extinction_mag: 0.06,
    },
];

/// The band of this name (case-sensitive for griz vs. GRIZ would be ambiguous; `V` and `v` both give V).
pub fn band(name: &str) -> Option<&'static Band> {
    let n = name.trim();
    BANDS.iter().find(|b| b.name == n).or_else(|| {
        BANDS
            .iter()
            .find(|b| b.name.eq_ignore_ascii_case(n) && "UBVRI".contains(b.name))
    })
}
