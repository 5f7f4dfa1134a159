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
    /// Sky brightness, mag/arcsec^2 (default: the band's dark-sky value; give a brighter one under moonlight)
    #[arg(long, value_name = "MAG")]
    pub(super) sky: Option<f64>,
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
        band, binned_ppt, budget, suggested_exposure, Camera, Conditions, EXPOSURE_RANGE_S,
        WELL_FRACTION_LIMIT,
    };
    let b = band(&a.band).ok_or_else(|| {
        anyhow::anyhow!(
            "--band: found {:?}, expected U, B, V, R, I, g, r, i or z",
            a.band
        )
    })?;
    for (name, v, lo, hi) in [
        ("aperture", a.aperture, 0.01, 50.0),
        ("mag", a.mag, -5.0, 30.0),
        ("airmass", a.airmass, 1.0, 40.0),
        ("obstruction", a.obstruction, 0.0, 0.95),
        ("throughput", a.throughput, 0.001, 1.0),
        ("seeing", a.seeing, 0.1, 20.0),
        ("pixel-scale", a.pixel_scale, 0.01, 20.0),
        ("beta", a.beta, 1.0, 10.0),
    ] {
        check_finite(name, v, lo, hi)?;
    }
    let cam = Camera {
        aperture_m: a.aperture,
        obstruction: a.obstruction,
        throughput: a.throughput,
        read_noise_e: a.read_noise,
        dark_e_per_s: a.dark,
        full_well_e: a.full_well,
        pixel_scale_arcsec: a.pixel_scale,
    };
    let mut c = Conditions {
        mag: a.mag,
        airmass: a.airmass,
        exposure_s: 1.0,
        sky_mag_arcsec2: a.sky.unwrap_or(b.dark_sky_mag_arcsec2),
        extinction_mag: a.extinction.unwrap_or(b.extinction_mag),
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
        "Noise budget: {:.2} mag in {} through a {:.2} m telescope, airmass {:.2}, sky {:.1} mag/arcsec^2\n",
        a.mag, b.name, a.aperture, a.airmass, c.sky_mag_arcsec2
    );
    out.push_str(&format!(
        "  exposure {:.0} s (suggested {:.0} s: peak pixel below 70% of full well){}\n",
        c.exposure_s,
        suggested,
        if saturates {
            "; SATURATES even at 1 s: defocus or use a fainter band"
        } else {
            ""
        }
    ));
    out.push_str(&format!(
        "  star {:.3e} e in a {:.1}\" radius ({:.0} pixels); peak pixel {:.0}% of full well\n",
        n.star_e,
        c.aperture_radius_arcsec,
        n.pixels,
        n.peak_well_fraction * 100.0
    ));
    out.push_str("  per exposure, ppt of the star's flux:\n");
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
    out.push_str(&format!(
        "  per 10 min ({:.0} s overhead per exposure, beta {:.2}, floor {:.2} ppt): {:.3} ppt\n",
        a.overhead, a.beta, a.floor, ten_min
    ));
    emit(&out, None)
}
