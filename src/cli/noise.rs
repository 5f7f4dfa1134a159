//! `dipwatch noise`: the noise budget of one telescope for one star, band, airmass and sky.

use super::*;

#[derive(Args, Debug)]
pub(super) struct NoiseArgs {
    /// Telescope aperture (primary diameter), m
    #[arg(long, value_name = "M")]
    pub(super) aperture: f64,
    /// Star magnitude in the band
    #[arg(long, value_name = "MAG", allow_negative_numbers = true)]
    pub(super) mag: f64,
    /// Band: U, B, V, R, I, g, r, i or z
    #[arg(long, value_name = "BAND", default_value = "V")]
    pub(super) band: String,
    /// Airmass
    #[arg(long, value_name = "X", default_value_t = 1.2)]
    pub(super) airmass: f64,
    /// Exposure time, s (default: the suggested exposure)
    #[arg(long, value_name = "S")]
    pub(super) exposure: Option<f64>,
    /// Dark-sky brightness at the zenith, mag/arcsec^2 (default: the band's typical dark-site value); it
    /// brightens with airmass, and the Moon's light is added (--moon-illum)
    #[arg(long, value_name = "MAG")]
    pub(super) sky: Option<f64>,
    /// The Moon's illuminated fraction 0-1 (with --moon-sep and --moon-alt: adds its scattered light by
    /// Krisciunas & Schaefer 1991)
    #[arg(long, value_name = "F", requires_all = ["moon_sep", "moon_alt"])]
    pub(super) moon_illum: Option<f64>,
    /// The Moon's distance from the star, deg
    #[arg(long, value_name = "DEG", requires = "moon_illum")]
    pub(super) moon_sep: Option<f64>,
    /// The Moon's altitude, deg (no moonlight below 0)
    #[arg(
        long,
        value_name = "DEG",
        allow_negative_numbers = true,
        requires = "moon_illum"
    )]
    pub(super) moon_alt: Option<f64>,
    /// Gain, electrons per ADU (a 16-bit converter then saturates at 65535 ADU x gain)
    #[arg(long, value_name = "E")]
    pub(super) gain: Option<f64>,
    /// Extinction, mag per airmass (default: the band's typical value)
    #[arg(long, value_name = "K")]
    pub(super) extinction: Option<f64>,
    /// Secondary over primary diameter
    #[arg(long, value_name = "F", default_value_t = 0.3)]
    pub(super) obstruction: f64,
    /// Whole-system throughput including the detector's quantum efficiency
    #[arg(long, value_name = "F", default_value_t = 0.5)]
    pub(super) throughput: f64,
    /// Read noise, electrons rms
    #[arg(long, value_name = "E", default_value_t = 8.0)]
    pub(super) read_noise: f64,
    /// Dark current, electrons per second per pixel
    #[arg(long, value_name = "E", default_value_t = 0.02)]
    pub(super) dark: f64,
    /// Full well, electrons
    #[arg(long, value_name = "E", default_value_t = 100_000.0)]
    pub(super) full_well: f64,
    /// Pixel scale, arcsec per pixel
    #[arg(long, value_name = "ARCSEC", default_value_t = 0.6)]
    pub(super) pixel_scale: f64,
    /// Seeing FWHM, arcsec
    #[arg(long, value_name = "ARCSEC", default_value_t = 2.0)]
    pub(super) seeing: f64,
    /// Photometric aperture radius, arcsec (default 1.5 x the seeing FWHM)
    #[arg(long, value_name = "ARCSEC")]
    pub(super) radius: Option<f64>,
    /// Site altitude above sea level, m
    #[arg(long, value_name = "M", default_value_t = 1000.0)]
    pub(super) site_altitude: f64,
    /// Scintillation coefficient C_Y of Osborn et al. (2015)
    #[arg(long, value_name = "CY", default_value_t = 1.5)]
    pub(super) cy: f64,
    /// Red-noise factor beta (Winn et al. 2008) applied to the binned noise
    #[arg(long, value_name = "BETA", default_value_t = 1.0)]
    pub(super) beta: f64,
    /// Systematic noise floor added in quadrature to the binned noise, ppt
    #[arg(long, value_name = "PPT", default_value_t = 0.0)]
    pub(super) floor: f64,
    /// Readout and other overhead per exposure, s
    #[arg(long, value_name = "S", default_value_t = 5.0)]
    pub(super) overhead: f64,
}

pub(super) fn run_noise(a: NoiseArgs) -> Result<()> {
    use dipwatch::engine::noise::{
        band, binned_ppt, budget, sky_mag_arcsec2, suggested_exposure, Camera, Conditions, MoonSky,
        EXPOSURE_RANGE_S, WELL_FRACTION_LIMIT,
    };
    let b = band(&a.band).ok_or_else(|| {
        anyhow::anyhow!(
            "--band: found {:?}, expected U, B, V, R, I, g, r, i or z",
            a.band
        )
    })?;
    check_args(&a)?;
    let cam = Camera {
        aperture_m: a.aperture,
        obstruction: a.obstruction,
        throughput: a.throughput,
        read_noise_e: a.read_noise,
        dark_e_per_s: a.dark,
        full_well_e: a.full_well,
        pixel_scale_arcsec: a.pixel_scale,
        gain_e_per_adu: a.gain,
    };
    let moon = match (a.moon_illum, a.moon_sep, a.moon_alt) {
        (Some(illum), Some(sep_deg), Some(alt_deg)) => Some(MoonSky {
            illum,
            sep_deg,
            alt_deg,
        }),
        _ => None,
    };
    let k = a.extinction.unwrap_or(b.extinction_mag);
    let k_v = if b.name == "V" {
        k
    } else {
        band("V").map_or(k, |v| v.extinction_mag)
    };
    // The star's altitude from the airmass (plane-parallel sec z, ample for the sky model).
    let alt_deg = 90.0 - (1.0 / a.airmass).acos().to_degrees();
    let dark = a.sky.unwrap_or(b.dark_sky_mag_arcsec2);
    let mut c = Conditions {
        mag: a.mag,
        airmass: a.airmass,
        exposure_s: 1.0,
        sky_mag_arcsec2: sky_mag_arcsec2(b, dark, k, alt_deg, moon.as_ref(), k_v),
        extinction_mag: k,
        seeing_arcsec: a.seeing,
        aperture_radius_arcsec: a.radius.unwrap_or(1.5 * a.seeing),
        site_altitude_m: a.site_altitude,
        scintillation_cy: a.cy,
    };
    let (suggested, saturates) =
        suggested_exposure(b, &cam, &c, EXPOSURE_RANGE_S, WELL_FRACTION_LIMIT);
    c.exposure_s = a.exposure.unwrap_or(suggested);
    check_finite("exposure", c.exposure_s, 0.001, 3600.0)?;
    let n = budget(b, &cam, &c);
    let ten_min = binned_ppt(
        n.total_ppt,
        c.exposure_s,
        a.overhead,
        600.0,
        a.beta,
        a.floor,
    );
    let mut out = format!(
        "Noise budget: {:.2} mag in {} through a {:.2} m telescope, airmass {:.2}\n",
        a.mag, b.name, a.aperture, a.airmass
    );
    out.push_str(&sky_line(c.sky_mag_arcsec2, dark, moon.as_ref()));
    out.push_str(&format!(
        "  exposure {:.0} s (suggested {:.0} s: peak pixel below 70% of saturation){}\n",
        c.exposure_s,
        suggested,
        if saturates {
            "; SATURATES even at 1 s: defocus or use a fainter band"
        } else {
            ""
        }
    ));
    out.push_str(&format!(
        "  star {:.3e} e in a {:.1}\" radius ({:.0} pixels); peak pixel {:.0}% of saturation ({:.0} e)\n",
        n.star_e,
        c.aperture_radius_arcsec,
        n.pixels,
        n.peak_well_fraction * 100.0,
        cam.saturation_e()
    ));
    out.push_str(&terms_text(&n));
    out.push_str(&format!(
        "  per 10 min ({:.0} s overhead per exposure, beta {:.2}, floor {:.2} ppt): {:.3} ppt\n",
        a.overhead, a.beta, a.floor, ten_min
    ));
    emit(&out, None)
}

/// The sky line of the budget: at the star, at the zenith when dark, and the Moon.
fn sky_line(at_star: f64, dark: f64, moon: Option<&dipwatch::engine::noise::MoonSky>) -> String {
    format!(
        "  sky {:.2} mag/arcsec^2 at the star ({:.2} at the zenith when dark{})\n",
        at_star,
        dark,
        match moon {
            Some(m) if m.alt_deg > 0.0 => format!(
                ", with a {:.0}% lit Moon {:.0} deg away at altitude {:.0} deg",
                m.illum * 100.0,
                m.sep_deg,
                m.alt_deg
            ),
            Some(_) => ", the Moon below the horizon".to_string(),
            None => String::new(),
        }
    )
}

/// The noise terms of one exposure, one per line.
fn terms_text(n: &dipwatch::engine::noise::Budget) -> String {
    let mut out = String::from("  per exposure, ppt of the star's flux:\n");
    for (label, v) in [
        ("source", n.source_ppt),
        ("sky", n.sky_ppt),
        ("dark", n.dark_ppt),
        ("read", n.read_ppt),
        ("scintillation", n.scintillation_ppt),
        ("total (white)", n.total_ppt),
    ] {
        out.push_str(&format!("    {label:<14} {v:>8.3}\n"));
    }
    out
}

/// Every number given, within its range.
fn check_args(a: &NoiseArgs) -> Result<()> {
    for (name, v, lo, hi) in [
        ("aperture", a.aperture, 0.01, 50.0),
        ("mag", a.mag, -5.0, 30.0),
        ("airmass", a.airmass, 1.0, 40.0),
        ("obstruction", a.obstruction, 0.0, 0.95),
        ("throughput", a.throughput, 0.001, 1.0),
        ("seeing", a.seeing, 0.1, 20.0),
        ("pixel-scale", a.pixel_scale, 0.01, 20.0),
        ("beta", a.beta, 1.0, 10.0),
        ("moon-illum", a.moon_illum.unwrap_or(0.0), 0.0, 1.0),
        ("moon-sep", a.moon_sep.unwrap_or(90.0), 0.0, 180.0),
        ("moon-alt", a.moon_alt.unwrap_or(0.0), -90.0, 90.0),
        ("gain", a.gain.unwrap_or(1.0), 0.01, 1000.0),
    ] {
        check_finite(name, v, lo, hi)?;
    }
    Ok(())
}
