//! The noise budget of one exposure of one star through one telescope: photons from the star and the sky, dark
//! current and read noise by the CCD equation, scintillation, and the time-correlated (red) noise factor, in parts
//! per thousand; and the longest exposure that keeps the star's peak pixel below a fraction of full well.
//!
//! Sources, beside each formula: Bessell (1979) zero-magnitude flux densities and band widths, with the photon
//! identity 1 Jy = 1.51e7 photons s^-1 m^-2 (dlambda/lambda)^-1 (as tabulated in J. Huchra's magnitude notes,
//! CfA); the CCD equation (Merline & Howell 1995; Howell, Handbook of CCD Astronomy); Osborn et al. (2015) eq. 7 for
//! scintillation; Winn et al. (2008) for the time-averaging red-noise factor beta.

pub use crate::astro::bands::{band, Band, BANDS};

/// The peak pixel's largest fraction of full well for a suggested exposure: room below saturation and the
/// detector's non-linear top (common practice, no source).
pub const WELL_FRACTION_LIMIT: f64 = 0.7;

/// Shortest and longest suggested exposure, s.
pub const EXPOSURE_RANGE_S: (f64, f64) = (1.0, 300.0);

/// Photons per Jy per second per square metre per unit dlambda/lambda (Huchra's notes: 1.51e7; it is 1e-26 W
/// m^-2 Hz^-1 over h, since dnu/nu = dlambda/lambda and a photon of frequency nu carries h nu).
pub const PHOTONS_PER_JY: f64 = 1.51e7;

/// Photons per second per square metre in `band` from a star of magnitude `mag` above the atmosphere.
pub fn photon_rate_m2(band: &Band, mag: f64) -> f64 {
    band.zero_jy * 10f64.powf(-0.4 * mag) * PHOTONS_PER_JY * band.width_frac
}

/// A telescope and camera.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Camera {
    /// Primary mirror diameter, m.
    pub aperture_m: f64,
    /// Secondary diameter over primary diameter.
    pub obstruction: f64,
    /// Whole-system throughput including detector quantum efficiency, 0-1.
    pub throughput: f64,
    /// Read noise, electrons rms per pixel.
    pub read_noise_e: f64,
    /// Dark current, electrons per second per pixel.
    pub dark_e_per_s: f64,
    /// Full well, electrons.
    pub full_well_e: f64,
    /// Pixel scale, arcsec per pixel.
    pub pixel_scale_arcsec: f64,
}

impl Camera {
    /// Collecting area, m^2: pi D^2 / 4 (1 - obstruction^2).
    pub fn area_m2(&self) -> f64 {
        std::f64::consts::PI * self.aperture_m.powi(2) / 4.0 * (1.0 - self.obstruction.powi(2))
    }
}

/// The conditions of one exposure.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Conditions {
    /// Star magnitude in the band.
    pub mag: f64,
    /// Airmass.
    pub airmass: f64,
    /// Exposure time, s.
    pub exposure_s: f64,
    /// Sky brightness, mag/arcsec^2 (dark sky plus any moonlight).
    pub sky_mag_arcsec2: f64,
    /// Extinction, mag per airmass.
    pub extinction_mag: f64,
    /// Seeing FWHM, arcsec.
    pub seeing_arcsec: f64,
    /// Photometric aperture radius, arcsec.
    pub aperture_radius_arcsec: f64,
    /// Site altitude, m (scintillation falls with it).
    pub site_altitude_m: f64,
    /// Osborn et al. (2015) empirical scintillation coefficient C_Y (1.5 is their median).
    pub scintillation_cy: f64,
}

/// The noise of one exposure, each term as a fraction of the star's signal in parts per thousand.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Budget {
    /// Electrons from the star inside the aperture.
    pub star_e: f64,
    /// Electrons from the sky per pixel.
    pub sky_e_per_pixel: f64,
    /// Pixels in the aperture.
    pub pixels: f64,
    /// Photon noise of the star, ppt.
    pub source_ppt: f64,
    /// Sky photon noise, ppt.
    pub sky_ppt: f64,
    /// Dark current noise, ppt.
    pub dark_ppt: f64,
    /// Read noise, ppt.
    pub read_ppt: f64,
    /// Scintillation, ppt.
    pub scintillation_ppt: f64,
    /// All of them in quadrature (white noise of one exposure), ppt.
    pub total_ppt: f64,
    /// The peak pixel as a fraction of full well (star plus sky plus dark).
    pub peak_well_fraction: f64,
}

/// Scintillation noise of one exposure, relative rms: Osborn et al. (2015) eq. 7,
/// sigma^2 = 1e-5 C_Y^2 D^(-4/3) t^-1 X^3 exp(-2 h / H) with H = 8000 m.
pub fn scintillation_rel(
    cy: f64,
    aperture_m: f64,
    exposure_s: f64,
    airmass: f64,
    altitude_m: f64,
) -> f64 {
    (1e-5 * cy * cy * aperture_m.powf(-4.0 / 3.0) / exposure_s
        * airmass.powi(3)
        * (-2.0 * altitude_m / 8000.0).exp())
    .sqrt()
}

/// Signal-to-noise by the CCD equation (Merline & Howell 1995): S / sqrt(S + n (sky + dark + read^2)), all in
/// electrons, n the pixels in the aperture.
pub fn ccd_snr(star_e: f64, pixels: f64, sky_e: f64, dark_e: f64, read_e: f64) -> f64 {
    star_e / (star_e + pixels * (sky_e + dark_e + read_e * read_e)).sqrt()
}

/// The noise budget of one exposure.
pub fn budget(b: &Band, cam: &Camera, c: &Conditions) -> Budget {
    let t = c.exposure_s;
    let collected = cam.area_m2() * cam.throughput * t;
    let star_total = photon_rate_m2(b, c.mag + c.extinction_mag * c.airmass) * collected;
    // Fraction of a Gaussian PSF of this FWHM inside the aperture radius r: 1 - exp(-r^2 / (2 s^2)).
    let s = c.seeing_arcsec / (2.0 * (2.0 * 2f64.ln()).sqrt());
    let enclosed = 1.0 - (-(c.aperture_radius_arcsec.powi(2)) / (2.0 * s * s)).exp();
    let star_e = star_total * enclosed;
    let pixel_area = cam.pixel_scale_arcsec.powi(2);
    let pixels = std::f64::consts::PI * c.aperture_radius_arcsec.powi(2) / pixel_area;
    let sky_e = photon_rate_m2(b, c.sky_mag_arcsec2) * collected * pixel_area;
    let dark_e = cam.dark_e_per_s * t;
    let rel = |v: f64| v.sqrt() / star_e * 1000.0;
    let source_ppt = rel(star_e);
    let sky_ppt = rel(pixels * sky_e);
    let dark_ppt = rel(pixels * dark_e);
    let read_ppt = rel(pixels * cam.read_noise_e.powi(2));
    let scintillation_ppt = scintillation_rel(
        c.scintillation_cy,
        cam.aperture_m,
        t,
        c.airmass,
        c.site_altitude_m,
    ) * 1000.0;
    let total_ppt = (source_ppt.powi(2)
        + sky_ppt.powi(2)
        + dark_ppt.powi(2)
        + read_ppt.powi(2)
        + scintillation_ppt.powi(2))
    .sqrt();
    // Peak pixel of a Gaussian: total / (2 pi s^2) per arcsec^2 at the centre, times the pixel area.
    let peak = star_total / (2.0 * std::f64::consts::PI * s * s) * pixel_area + sky_e + dark_e;
    Budget {
        star_e,
        sky_e_per_pixel: sky_e,
        pixels,
        source_ppt,
        sky_ppt,
        dark_ppt,
        read_ppt,
        scintillation_ppt,
        total_ppt,
        peak_well_fraction: peak / cam.full_well_e,
    }
}

/// White noise over `bin_s` seconds of exposures of `exposure_s` plus `overhead_s` each, times the red-noise
/// factor beta (Winn et al. 2008: the binned rms exceeds the white-noise expectation by beta), and a systematic
/// floor added in quadrature, ppt.
pub fn binned_ppt(
    per_exposure_ppt: f64,
    exposure_s: f64,
    overhead_s: f64,
    bin_s: f64,
    beta: f64,
    floor_ppt: f64,
) -> f64 {
    let n = (bin_s / (exposure_s + overhead_s)).max(1.0);
    ((per_exposure_ppt / n.sqrt() * beta).powi(2) + floor_ppt.powi(2)).sqrt()
}

/// The longest exposure up to `max_s` whose peak pixel stays below `well_fraction` of full well, in whole
/// seconds (at least `min_s`), and whether even `min_s` saturates.
pub fn suggested_exposure(
    b: &Band,
    cam: &Camera,
    c: &Conditions,
    (min_s, max_s): (f64, f64),
    well_fraction: f64,
) -> (f64, bool) {
    let peak = |t: f64| {
        budget(
            b,
            cam,
            &Conditions {
                exposure_s: t,
                ..*c
            },
        )
        .peak_well_fraction
    };
    if peak(min_s) > well_fraction {
        return (min_s, true);
    }
    // The peak grows linearly with time: solve, then round down to whole seconds.
    let per_s = peak(1.0);
    let t = (well_fraction / per_s).floor().clamp(min_s, max_s);
    (t, false)
}

/// The expected noise and signal-to-noise of one planned event.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EventNoise {
    /// Exposure time used (fixed by the site, or suggested), s.
    pub exposure_s: f64,
    /// White noise of one exposure (photon, sky, dark, read, scintillation; no beta, no floor), ppt.
    pub noise_per_exposure_ppt: f64,
    /// Noise binned to 10 minutes with beta and the floor, ppt.
    pub noise_10min_ppt: f64,
    /// Transit signal-to-noise with the usable in- and out-of-transit time of this event (None without a depth).
    pub snr: Option<f64>,
    /// Peak pixel over full well at that exposure.
    pub peak_well_fraction: f64,
}

/// The noise of one event at a site with a photometric set-up: a star of `mag` (in the set-up's band) at
/// `airmass`, with `in_transit_s` and `out_of_transit_s` of usable time. The transit SNR is
/// depth / (beta sigma_1 sqrt(1/N_in + 1/N_out)), sigma_1 the white noise of one exposure and N the numbers of
/// exposures (cadence = exposure + overhead) in and out of transit: the depth is the difference of two means
/// (common practice, no source). None when the set-up names an unknown band.
pub fn event_noise(
    p: &crate::inputs::sites::Photometry,
    site_altitude_m: f64,
    (mag, depth_ppt): (f64, Option<f64>),
    airmass: f64,
    (in_transit_s, out_of_transit_s): (f64, f64),
) -> Option<EventNoise> {
    let b = band(&p.band)?;
    let cam = Camera {
        aperture_m: p.aperture_m,
        obstruction: p.obstruction,
        throughput: p.throughput,
        read_noise_e: p.read_noise_e,
        dark_e_per_s: p.dark_e_per_s,
        full_well_e: p.full_well_e,
        pixel_scale_arcsec: p.pixel_scale_arcsec,
    };
    let mut c = Conditions {
        mag,
        airmass: airmass.clamp(1.0, 40.0),
        exposure_s: 1.0,
        sky_mag_arcsec2: p.sky_mag.unwrap_or(b.dark_sky_mag_arcsec2),
        extinction_mag: p.extinction.unwrap_or(b.extinction_mag),
        seeing_arcsec: p.seeing_arcsec,
        aperture_radius_arcsec: p.aperture_radius_arcsec.unwrap_or(1.5 * p.seeing_arcsec),
        site_altitude_m,
        scintillation_cy: p.scintillation_cy,
    };
    c.exposure_s = p.exposure_s.unwrap_or_else(|| {
        suggested_exposure(b, &cam, &c, EXPOSURE_RANGE_S, WELL_FRACTION_LIMIT).0
    });
    let one = budget(b, &cam, &c);
    let cadence = c.exposure_s + p.overhead_s;
    let n_in = in_transit_s / cadence;
    let n_out = out_of_transit_s / cadence;
    let snr = depth_ppt.map(|d| {
        if n_in < 1.0 || n_out < 1.0 {
            0.0
        } else {
            d / (p.red_noise_beta * one.total_ppt * (1.0 / n_in + 1.0 / n_out).sqrt())
        }
    });
    Some(EventNoise {
        exposure_s: c.exposure_s,
        noise_per_exposure_ppt: one.total_ppt,
        noise_10min_ppt: binned_ppt(
            one.total_ppt,
            c.exposure_s,
            p.overhead_s,
            600.0,
            p.red_noise_beta,
            p.noise_floor_ppt,
        ),
        snr,
        peak_well_fraction: one.peak_well_fraction,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn photon_rate_matches_the_worked_example() {
        // Huchra's notes (CfA): a V = 23.90 star gives 2.42 photons per second on 1 m^2 above the atmosphere.
        let v = band("V").unwrap();
        assert!(
            (photon_rate_m2(v, 23.90) - 2.42).abs() < 0.01,
            "{}",
            photon_rate_m2(v, 23.90)
        );
    }

    #[test]
    fn scintillation_of_osborn_eq_7() {
        // Values computed from the formula (as the issue states them): C_Y = 1.5, D = 1 m, t = 60 s, h = 2400 m:
        // about 454 ppm at X = 1 and 833 ppm at X = 1.5.
        let a = scintillation_rel(1.5, 1.0, 60.0, 1.0, 2400.0) * 1e6;
        let b = scintillation_rel(1.5, 1.0, 60.0, 1.5, 2400.0) * 1e6;
        assert!((a - 454.0).abs() < 1.0, "{a}");
        assert!((b - 834.0).abs() < 1.5, "{b}");
        // D^(-2/3) scaling in the scintillation-limited regime.
        let half = scintillation_rel(1.5, 0.5, 60.0, 1.0, 2400.0);
        assert!((half / (a / 1e6) - 2f64.powf(2.0 / 3.0)).abs() < 1e-12);
    }

    #[test]
    fn ccd_equation_of_howells_example() {
        // Howell, Handbook of CCD Astronomy (from memory): t = 300 s, 24013 ADU with gain 5 e/ADU, sky 620
        // ADU/pixel, dark 22 e/pixel/h, read noise 5 e, 1 pixel in the aperture: SNR about 342. (The example's 200
        // background pixels enter only the 1 + n/n_B term for the error of the sky estimate, left out here.)
        let star = 24_013.0 * 5.0;
        let snr = ccd_snr(star, 1.0, 620.0 * 5.0, 22.0 / 3600.0 * 300.0, 5.0);
        assert!((snr - 342.0).abs() < 2.0, "{snr}");
    }

    #[test]
    fn photon_noise_falls_as_the_square_root_of_time() {
        let cam = Camera {
            aperture_m: 1.0,
            obstruction: 0.3,
            throughput: 0.5,
            read_noise_e: 0.0,
            dark_e_per_s: 0.0,
            full_well_e: 1e9,
            pixel_scale_arcsec: 0.5,
        };
        let c = Conditions {
            mag: 11.0,
            airmass: 1.2,
            exposure_s: 10.0,
            sky_mag_arcsec2: 30.0,
            extinction_mag: 0.15,
            seeing_arcsec: 2.0,
            aperture_radius_arcsec: 4.0,
            site_altitude_m: 2000.0,
            scintillation_cy: 0.0,
        };
        let v = band("V").unwrap();
        let a = budget(v, &cam, &c).source_ppt;
        let b = budget(
            v,
            &cam,
            &Conditions {
                exposure_s: 40.0,
                ..c
            },
        )
        .source_ppt;
        assert!((a / b - 2.0).abs() < 1e-9);
        // Order of magnitude (common practice): a 1 m telescope reaches about 1 ppt per minute at V about 11-12.
        let with_scint = Conditions {
            scintillation_cy: 1.5,
            exposure_s: 60.0,
            ..c
        };
        let one_minute = budget(v, &cam, &with_scint).total_ppt;
        assert!(one_minute > 0.3 && one_minute < 3.0, "{one_minute}");
    }

    #[test]
    fn snr_grows_with_depth_and_usable_time() {
        let p = crate::inputs::sites::Photometry {
            aperture_m: 0.6,
            obstruction: 0.3,
            throughput: 0.5,
            band: "R".into(),
            read_noise_e: 8.0,
            dark_e_per_s: 0.02,
            full_well_e: 100_000.0,
            pixel_scale_arcsec: 0.6,
            exposure_s: Some(60.0),
            overhead_s: 5.0,
            aperture_radius_arcsec: None,
            seeing_arcsec: 2.0,
            scintillation_cy: 1.5,
            sky_mag: None,
            extinction: None,
            red_noise_beta: 1.0,
            noise_floor_ppt: 0.0,
        };
        let snr = |depth: f64, t_in: f64, t_out: f64| {
            event_noise(&p, 1000.0, (12.0, Some(depth)), 1.3, (t_in, t_out))
                .unwrap()
                .snr
                .unwrap()
        };
        assert!(snr(10.0, 7200.0, 3600.0) > snr(5.0, 7200.0, 3600.0));
        assert!((snr(10.0, 7200.0, 3600.0) / snr(5.0, 7200.0, 3600.0) - 2.0).abs() < 1e-9);
        assert!(snr(10.0, 7200.0, 3600.0) > snr(10.0, 1800.0, 3600.0));
        assert!(snr(10.0, 7200.0, 3600.0) > snr(10.0, 7200.0, 600.0));
        assert_eq!(
            snr(10.0, 7200.0, 0.0),
            0.0,
            "no baseline, no depth measured"
        );
    }
}
