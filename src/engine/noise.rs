//! The noise budget of one exposure of one star through one telescope: photons from the star and the sky, dark
//! current and read noise by the CCD equation, scintillation, and the time-correlated (red) noise factor, in parts
//! per thousand; and the longest exposure that keeps the star's peak pixel below a fraction of full well.
//!
//! Sources, beside each formula: Bessell (1979) zero-magnitude flux densities and band widths, with the photon
//! identity 1 Jy = 1.51e7 photons s^-1 m^-2 (dlambda/lambda)^-1 (as tabulated in J. Huchra's magnitude notes,
//! CfA); the CCD equation (Merline & Howell 1995; Howell, Handbook of CCD Astronomy); Osborn et al. (2015) eq. 7 for
//! scintillation (Young 1967 as a cross-check); Winn et al. (2008) for the time-averaging red-noise factor beta;
//! Krisciunas & Schaefer (1991) for the sky brightness added by the Moon and the dark sky's rise with airmass.

pub use crate::astro::bands::{band, Band, BANDS};

/// The peak pixel's largest fraction of full well for a suggested exposure: room below saturation and the
/// detector's non-linear top (common practice, no source).
pub const WELL_FRACTION_LIMIT: f64 = 0.7;

/// Shortest and longest suggested exposure, s.
pub const EXPOSURE_RANGE_S: (f64, f64) = (1.0, 300.0);

/// Photons per Jy per second per square metre per unit dlambda/lambda (Huchra's notes: 1.51e7; it is 1e-26 W
/// m^-2 Hz^-1 over h, since dnu/nu = dlambda/lambda and a photon of frequency nu carries h nu).
pub const PHOTONS_PER_JY: f64 = 1.51e7;

/// 10^y as exp(y ln 10): the same value to a few units in the last place, several times cheaper than the
/// general power function, for the magnitude conversions done for every listed event.
fn pow10(y: f64) -> f64 {
    (y * std::f64::consts::LN_10).exp()
}

/// Photons per second per square metre in `band` from a star of magnitude `mag` above the atmosphere.
pub fn photon_rate_m2(band: &Band, mag: f64) -> f64 {
    band.zero_jy * pow10(-0.4 * mag) * PHOTONS_PER_JY * band.width_frac
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
    /// Gain, electrons per ADU, if known: a 16-bit converter then saturates at 65535 ADU x gain.
    pub gain_e_per_adu: Option<f64>,
}

/// Largest count of a 16-bit analogue-to-digital converter, ADU.
pub const ADC_MAX_ADU: f64 = 65_535.0;

impl Camera {
    /// Collecting area, m^2: pi D^2 / 4 (1 - obstruction^2).
    pub fn area_m2(&self) -> f64 {
        std::f64::consts::PI * self.aperture_m.powi(2) / 4.0 * (1.0 - self.obstruction.powi(2))
    }

    /// The level at which a pixel saturates, e: the full well, or the 16-bit converter's top (65535 ADU x gain)
    /// when the gain is known and that is lower.
    pub fn saturation_e(&self) -> f64 {
        self.gain_e_per_adu
            .map_or(self.full_well_e, |g| self.full_well_e.min(ADC_MAX_ADU * g))
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
    /// The peak pixel (star plus sky plus dark) as a fraction of the saturation level
    /// ([`Camera::saturation_e`]).
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
    // D^-4/3 as 1 / (D cbrt D): a cube root instead of a general power.
    (1e-5 * cy * cy / (aperture_m * aperture_m.cbrt()) / exposure_s
        * airmass.powi(3)
        * (-2.0 * altitude_m / 8000.0).exp())
    .sqrt()
}

/// Scintillation noise of one exposure, relative rms, by Young (1967) in the form Osborn et al. (2015) compare
/// with (from memory):
/// sigma = 0.09 D_cm^(-2/3) X^1.75 exp(-h / H) (2 t)^(-1/2), D in cm, H = 8000 m. Osborn et al. found it
/// underestimates measured scintillation (their median C_Y 1.5 in eq. 7); kept as a cross-check of eq. 7.
pub fn scintillation_young_rel(
    aperture_m: f64,
    exposure_s: f64,
    airmass: f64,
    altitude_m: f64,
) -> f64 {
    0.09 * (aperture_m * 100.0).powf(-2.0 / 3.0) * airmass.powf(1.75) * (-altitude_m / 8000.0).exp()
        / (2.0 * exposure_s).sqrt()
}

/// The Moon's place and phase as the sky brightness model needs them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MoonSky {
    /// Illuminated fraction, 0-1.
    pub illum: f64,
    /// Angular distance from the target, deg.
    pub sep_deg: f64,
    /// Altitude, deg (no moonlight below the horizon).
    pub alt_deg: f64,
}

/// Krisciunas & Schaefer (1991) X(Z) = (1 - 0.96 sin^2 Z)^(-1/2): the airmass of their eqs. 2 and 3, kept
/// finite at the horizon (Z in deg).
fn ks_airmass(zenith_deg: f64) -> f64 {
    // x^-1/2 as 1 / sqrt(x): a square root instead of a general power (three per event).
    1.0 / (1.0 - 0.96 * zenith_deg.to_radians().sin().powi(2)).sqrt()
}

/// Surface brightness in nanolamberts from V mag/arcsec^2, and back: Krisciunas & Schaefer (1991) eqs. 1 and
/// 27, B = 34.08 exp(20.7233 - 0.92104 V).
fn nanolamberts_from_v(v: f64) -> f64 {
    34.08 * (20.7233 - 0.92104 * v).exp()
}

fn v_from_nanolamberts(b: f64) -> f64 {
    (20.7233 - (b / 34.08).ln()) / 0.92104
}

/// Scattered moonlight at a sky position, V mag/arcsec^2, by Krisciunas & Schaefer (1991): the Moon's
/// brightness from its phase angle alpha (eq. 20, I = 10^(-0.4 (3.84 + 0.026 |alpha| + 4e-9 alpha^4))), the
/// scattering function of the separation rho (eq. 21, f = 10^5.36 (1.06 + cos^2 rho) + 10^(6.15 - rho/40)),
/// and the extinction of both paths (eq. 15, B = f I 10^(-0.4 k X(Zm)) (1 - 10^(-0.4 k X(Z)))), `k` the V
/// extinction coefficient. None when the Moon is below the horizon. Their stated accuracy is 8-23% against
/// measurements; the model is for V only (see [`sky_mag_arcsec2`] for other bands).
pub fn moonlight_v_mag(moon: &MoonSky, target_alt_deg: f64, k_v: f64) -> Option<f64> {
    moonlight_v_nanolamberts(moon, target_alt_deg, k_v).map(v_from_nanolamberts)
}

/// 10^5.36, the Rayleigh term's scale in Krisciunas & Schaefer's eq. 21: computed once, as [`pow10`] gives it
/// (one exponential less per event of a photometric run).
static RAYLEIGH_SCALE: std::sync::LazyLock<f64> = std::sync::LazyLock::new(|| pow10(5.36));

/// [`moonlight_v_mag`] in nanolamberts (the unit its sum with the dark sky takes).
fn moonlight_v_nanolamberts(moon: &MoonSky, target_alt_deg: f64, k_v: f64) -> Option<f64> {
    if moon.alt_deg <= 0.0 {
        return None;
    }
    let alpha = (2.0 * moon.illum.clamp(0.0, 1.0) - 1.0).acos().to_degrees();
    let i_moon = pow10(-0.4 * (3.84 + 0.026 * alpha + 4e-9 * alpha.powi(4)));
    let rho = moon.sep_deg.clamp(0.0, 180.0);
    let f = *RAYLEIGH_SCALE * (1.06 + rho.to_radians().cos().powi(2)) + pow10(6.15 - rho / 40.0);
    let (z_moon, z) = (
        90.0 - moon.alt_deg,
        (90.0 - target_alt_deg).clamp(0.0, 90.0),
    );
    let b = f
        * i_moon
        * pow10(-0.4 * k_v * ks_airmass(z_moon))
        * (1.0 - pow10(-0.4 * k_v * ks_airmass(z)));
    Some(b)
}

/// The sky at a target: the dark sky's zenith brightness `dark_zenith_mag` brightened towards the horizon
/// (Krisciunas & Schaefer 1991 eq. 2, B = B_zen 10^(-0.4 k (X - 1)) X, with the band's extinction `k`), plus
/// any moonlight, mag/arcsec^2 in `band`. Moonlight is computed in V and carried to other bands with the Sun's
/// colours (reflected sunlight; from memory: V-U -0.82, V-B -0.65, V-R 0.36, V-I 0.70, V-g -0.30, V-r 0.16,
/// V-i 0.28, V-z 0.31). The moonlit sky is bluer than sunlight (Rayleigh scattering), so the red-band moonlight
/// this gives errs bright: the noise it implies errs high, never optimistic.
pub fn sky_mag_arcsec2(
    band: &Band,
    dark_zenith_mag: f64,
    k: f64,
    target_alt_deg: f64,
    moon: Option<&MoonSky>,
    k_v: f64,
) -> f64 {
    SkyBrightness::new(band, dark_zenith_mag, k, k_v).mag_arcsec2(target_alt_deg, moon)
}

/// The parts of [`sky_mag_arcsec2`] fixed by the set-up (band, dark sky, extinction), computed once for all its
/// events.
#[derive(Debug, Clone, Copy)]
struct SkyBrightness {
    /// The dark sky at the zenith, nanolamberts.
    dark_zenith_nl: f64,
    /// The band's extinction coefficient, mag per airmass.
    k: f64,
    /// V's extinction coefficient (the moonlight model's).
    k_v: f64,
    /// V moonlight to the band's: exp(0.92104 (V - band)) with the Sun's colour.
    moon_colour: f64,
}

impl SkyBrightness {
    fn new(band: &Band, dark_zenith_mag: f64, k: f64, k_v: f64) -> SkyBrightness {
        SkyBrightness {
            dark_zenith_nl: nanolamberts_from_v(dark_zenith_mag),
            k,
            k_v,
            // V - (V - band) in mag is V's nanolamberts times exp(0.92104 (V - band)) (eq. 27's slope), without
            // the round trip through magnitudes.
            moon_colour: (0.92104 * band.sun_v_minus_band).exp(),
        }
    }

    /// [`sky_mag_arcsec2`] at a target's altitude with the Moon.
    fn mag_arcsec2(&self, target_alt_deg: f64, moon: Option<&MoonSky>) -> f64 {
        let x = ks_airmass((90.0 - target_alt_deg).clamp(0.0, 90.0));
        let dark_nl = self.dark_zenith_nl * pow10(-0.4 * self.k * (x - 1.0)) * x;
        let moon_nl = moon
            .and_then(|m| moonlight_v_nanolamberts(m, target_alt_deg, self.k_v))
            .map_or(0.0, |nl| nl * self.moon_colour);
        v_from_nanolamberts(dark_nl + moon_nl)
    }
}

/// Signal-to-noise by the CCD equation (Merline & Howell 1995): S / sqrt(S + n (sky + dark + read^2)), all in
/// electrons, n the pixels in the aperture.
pub fn ccd_snr(star_e: f64, pixels: f64, sky_e: f64, dark_e: f64, read_e: f64) -> f64 {
    star_e / (star_e + pixels * (sky_e + dark_e + read_e * read_e)).sqrt()
}

/// The counts of one exposure that both its noise budget and its peak pixel need.
struct Counts {
    /// Photoelectrons from the star in all, e-.
    star_total: f64,
    /// Gaussian sigma of the seeing disc, arcsec.
    sigma_arcsec: f64,
    /// Pixel area, arcsec^2.
    pixel_area: f64,
    /// Sky photoelectrons per pixel, e-.
    sky_e: f64,
    /// Dark electrons per pixel, e-.
    dark_e: f64,
}

/// The photon rates of the star and the sky in `c` (per m^2 above the atmosphere, the star's through
/// `c.airmass`): what the counts of every exposure length scale.
#[derive(Debug, Clone, Copy)]
struct Rates {
    star: f64,
    sky: f64,
}

impl Rates {
    fn of(b: &Band, c: &Conditions) -> Rates {
        Rates {
            star: photon_rate_m2(b, c.mag + c.extinction_mag * c.airmass),
            sky: photon_rate_m2(b, c.sky_mag_arcsec2),
        }
    }
}

impl Counts {
    /// The counts of an exposure of `c.exposure_s` seconds of the star in `c` through `cam`, from the photon
    /// rates.
    fn from_rates(rates: Rates, cam: &Camera, c: &Conditions) -> Counts {
        let t = c.exposure_s;
        let collected = cam.area_m2() * cam.throughput * t;
        let pixel_area = cam.pixel_scale_arcsec.powi(2);
        Counts {
            star_total: rates.star * collected,
            sigma_arcsec: c.seeing_arcsec / (2.0 * (2.0 * 2f64.ln()).sqrt()),
            pixel_area,
            sky_e: rates.sky * collected * pixel_area,
            dark_e: cam.dark_e_per_s * t,
        }
    }

    /// Peak pixel over the camera's saturation level: a Gaussian's centre holds total / (2 pi s^2) per
    /// arcsec^2, times the pixel area, plus sky and dark.
    fn peak_well_fraction(&self, cam: &Camera) -> f64 {
        let s = self.sigma_arcsec;
        let peak = self.star_total / (2.0 * std::f64::consts::PI * s * s) * self.pixel_area
            + self.sky_e
            + self.dark_e;
        peak / cam.saturation_e()
    }
}

/// The noise budget of one exposure.
pub fn budget(b: &Band, cam: &Camera, c: &Conditions) -> Budget {
    budget_from(Rates::of(b, c), cam, c, &BudgetConstants::of(cam, c))
}

/// The parts of a budget fixed by the set-up and the site (not by the star, the sky or the exposure): the same
/// values [`budget`] computes, once for all of a set-up's events.
#[derive(Debug, Clone, Copy)]
struct BudgetConstants {
    /// Fraction of the star's light inside the aperture.
    enclosed: f64,
    /// Pixels in the aperture.
    pixels: f64,
    /// 1e-5 C_Y^2 D^(-4/3) of [`scintillation_rel`].
    scintillation_scale: f64,
    /// exp(-2 h / H) of [`scintillation_rel`].
    scintillation_height: f64,
}

impl BudgetConstants {
    fn of(cam: &Camera, c: &Conditions) -> BudgetConstants {
        let s = c.seeing_arcsec / (2.0 * (2.0 * 2f64.ln()).sqrt());
        let pixel_area = cam.pixel_scale_arcsec.powi(2);
        BudgetConstants {
            // Fraction of a Gaussian PSF of this FWHM inside the aperture radius r: 1 - exp(-r^2 / (2 s^2)).
            enclosed: 1.0 - (-(c.aperture_radius_arcsec.powi(2)) / (2.0 * s * s)).exp(),
            pixels: std::f64::consts::PI * c.aperture_radius_arcsec.powi(2) / pixel_area,
            scintillation_scale: 1e-5 * c.scintillation_cy * c.scintillation_cy
                / (cam.aperture_m * cam.aperture_m.cbrt()),
            scintillation_height: (-2.0 * c.site_altitude_m / 8000.0).exp(),
        }
    }
}

/// [`budget`] with the photon rates and the set-up's constants given.
fn budget_from(rates: Rates, cam: &Camera, c: &Conditions, k: &BudgetConstants) -> Budget {
    let t = c.exposure_s;
    let counts = Counts::from_rates(rates, cam, c);
    let Counts {
        star_total,
        sky_e,
        dark_e,
        ..
    } = counts;
    let (enclosed, pixels) = (k.enclosed, k.pixels);
    let star_e = star_total * enclosed;
    let rel = |v: f64| v.sqrt() / star_e * 1000.0;
    let source_ppt = rel(star_e);
    let sky_ppt = rel(pixels * sky_e);
    let dark_ppt = rel(pixels * dark_e);
    let read_ppt = rel(pixels * cam.read_noise_e.powi(2));
    // As `scintillation_rel`, with its set-up's factors computed once (the same operations in the same order).
    let scintillation_ppt =
        (k.scintillation_scale / t * c.airmass.powi(3) * k.scintillation_height).sqrt() * 1000.0;
    let total_ppt = (source_ppt.powi(2)
        + sky_ppt.powi(2)
        + dark_ppt.powi(2)
        + read_ppt.powi(2)
        + scintillation_ppt.powi(2))
    .sqrt();
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
        peak_well_fraction: counts.peak_well_fraction(cam),
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
    range_s: (f64, f64),
    well_fraction: f64,
) -> (f64, bool) {
    suggested_exposure_from(Rates::of(b, c), cam, c, range_s, well_fraction)
}

/// [`suggested_exposure`] with the photon rates given.
fn suggested_exposure_from(
    rates: Rates,
    cam: &Camera,
    c: &Conditions,
    (min_s, max_s): (f64, f64),
    well_fraction: f64,
) -> (f64, bool) {
    // Only the counts: the rest of the budget (scintillation, the noise terms) does not change the peak.
    let peak = |t: f64| {
        Counts::from_rates(
            rates,
            cam,
            &Conditions {
                exposure_s: t,
                ..*c
            },
        )
        .peak_well_fraction(cam)
    };
    // The peak grows linearly with time (star, sky and dark counts all do): from its rate, whether even the
    // shortest exposure saturates, else the longest that does not, rounded down to whole seconds.
    let per_s = peak(1.0);
    if per_s * min_s > well_fraction {
        return (min_s, true);
    }
    // `floor` by truncation (the same value; portable builds have no floor instruction).
    let t = crate::astro::frames::floor_fast(well_fraction / per_s).clamp(min_s, max_s);
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

/// Where an event's star sits in the sky, for its noise: airmass and altitude at mid-event and the Moon.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EventSky {
    /// Kasten-Young airmass of the target.
    pub airmass: f64,
    /// Geometric altitude of the target, deg.
    pub target_alt_deg: f64,
    /// The Moon (None: ignore moonlight).
    pub moon: Option<MoonSky>,
}

/// The noise of one event at a site with a photometric set-up: a star of `mag` (in the set-up's band) in `sky`,
/// with `in_transit_s` and `out_of_transit_s` of usable time. The sky is the dark sky (the set-up's `sky_mag`
/// or the band's typical value) at the target's airmass plus the Moon's scattered light ([`sky_mag_arcsec2`]).
/// The transit SNR is depth / (beta sigma_1 sqrt(1/N_in + 1/N_out)), sigma_1 the white noise of one exposure
/// and N the numbers of exposures (cadence = exposure + overhead) in and out of transit: the depth is the
/// difference of two means (common practice, no source). None when the set-up names an unknown band.
pub fn event_noise(
    p: &crate::inputs::sites::Photometry,
    site_altitude_m: f64,
    star: (f64, Option<f64>),
    sky: &EventSky,
    usable_s: (f64, f64),
) -> Option<EventNoise> {
    Some(NoiseSetup::new(p, site_altitude_m)?.event_noise(star, sky, usable_s))
}

/// A photometric set-up at its site, with everything [`event_noise`] computes from them alone (the band, the
/// camera, the extinction, the dark sky's brightness, the aperture's share of the seeing disc, the
/// scintillation's aperture and height factors) done once: for the many events of a planning run. The same
/// operations as [`event_noise`] in the same order, so the same numbers.
#[derive(Debug, Clone)]
pub struct NoiseSetup {
    p: crate::inputs::sites::Photometry,
    b: &'static Band,
    cam: Camera,
    k: f64,
    site_altitude_m: f64,
    sky: SkyBrightness,
    constants: BudgetConstants,
}

impl NoiseSetup {
    /// The set-up `p` at a site `site_altitude_m` above sea level; None when it names an unknown band.
    pub fn new(p: &crate::inputs::sites::Photometry, site_altitude_m: f64) -> Option<NoiseSetup> {
        let b = band(&p.band)?;
        let cam = Camera {
            aperture_m: p.aperture_m,
            obstruction: p.obstruction,
            throughput: p.throughput,
            read_noise_e: p.read_noise_e,
            dark_e_per_s: p.dark_e_per_s,
            full_well_e: p.full_well_e,
            pixel_scale_arcsec: p.pixel_scale_arcsec,
            gain_e_per_adu: p.gain_e_per_adu,
        };
        let k = p.extinction.unwrap_or(b.extinction_mag);
        // Krisciunas & Schaefer need the V extinction: the set-up's own when it is a V set-up.
        let k_v = if b.name == "V" {
            k
        } else {
            band("V").map_or(k, |v| v.extinction_mag)
        };
        let setup = NoiseSetup {
            p: p.clone(),
            b,
            cam,
            k,
            site_altitude_m,
            sky: SkyBrightness::new(b, p.sky_mag.unwrap_or(b.dark_sky_mag_arcsec2), k, k_v),
            // Filled below from the conditions every event shares.
            constants: BudgetConstants {
                enclosed: 0.0,
                pixels: 0.0,
                scintillation_scale: 0.0,
                scintillation_height: 0.0,
            },
        };
        let constants = BudgetConstants::of(&setup.cam, &setup.conditions(0.0, 1.0, 0.0));
        Some(NoiseSetup { constants, ..setup })
    }

    /// The conditions of an exposure of a star of `mag` at `airmass` under a sky of `sky_mag_arcsec2` (one
    /// second: the exposure is chosen after).
    fn conditions(&self, mag: f64, airmass: f64, sky_mag_arcsec2: f64) -> Conditions {
        let p = &self.p;
        Conditions {
            mag,
            airmass: airmass.clamp(1.0, 40.0),
            exposure_s: 1.0,
            sky_mag_arcsec2,
            extinction_mag: self.k,
            seeing_arcsec: p.seeing_arcsec,
            aperture_radius_arcsec: p.aperture_radius_arcsec.unwrap_or(1.5 * p.seeing_arcsec),
            site_altitude_m: self.site_altitude_m,
            scintillation_cy: p.scintillation_cy,
        }
    }

    /// [`event_noise`] of a star of `mag` (and transit depth, ppt) in `sky`, with `in_transit_s` and
    /// `out_of_transit_s` of usable time.
    pub fn event_noise(
        &self,
        (mag, depth_ppt): (f64, Option<f64>),
        sky: &EventSky,
        (in_transit_s, out_of_transit_s): (f64, f64),
    ) -> EventNoise {
        let (p, b, cam) = (&self.p, self.b, &self.cam);
        let sky_mag = self.sky.mag_arcsec2(sky.target_alt_deg, sky.moon.as_ref());
        let mut c = self.conditions(mag, sky.airmass, sky_mag);
        let rates = Rates::of(b, &c);
        c.exposure_s = p.exposure_s.unwrap_or_else(|| {
            suggested_exposure_from(rates, cam, &c, EXPOSURE_RANGE_S, WELL_FRACTION_LIMIT).0
        });
        let one = budget_from(rates, cam, &c, &self.constants);
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
        EventNoise {
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
        }
    }
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
            gain_e_per_adu: None,
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
            gain_e_per_adu: None,
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
            let sky = EventSky {
                airmass: 1.3,
                target_alt_deg: 50.0,
                moon: None,
            };
            event_noise(&p, 1000.0, (12.0, Some(depth)), &sky, (t_in, t_out))
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

    #[test]
    fn young_1967_against_osborn_eq_7() {
        // Osborn et al. (2015) eq. 7 with C_Y = 1 is 0.09^2 x 100^(-4/3) / 2 = 0.8725e-5 of Young's variance
        // law apart from the airmass power (X^3 against X^3.5): the ratio at X = 1 is C_Y / sqrt(0.8725), and
        // grows as X^(-1/4). Both formulas from memory (Young's as Osborn et al. quote it).
        let young = scintillation_young_rel(1.0, 60.0, 1.0, 2400.0);
        let osborn = scintillation_rel(1.5, 1.0, 60.0, 1.0, 2400.0);
        let want = 1.5 / (0.09f64.powi(2) * 100f64.powf(-4.0 / 3.0) / 2.0 / 1e-5).sqrt();
        assert!((osborn / young - want).abs() < 1e-9, "{}", osborn / young);
        assert!((want - 1.606).abs() < 0.001, "{want}");
        let at2 = scintillation_rel(1.5, 1.0, 60.0, 2.0, 2400.0)
            / scintillation_young_rel(1.0, 60.0, 2.0, 2400.0);
        assert!((at2 / want - 2f64.powf(-0.25)).abs() < 1e-9);
    }

    #[test]
    fn moonlight_of_krisciunas_schaefer() {
        // Computed from their formula (the check): full Moon 90 deg from the target, both at 45 deg zenith
        // distance, k = 0.172: about 18.6 V mag/arcsec^2 (18.674 by hand with eqs. 15, 20, 21 and 27).
        let full = MoonSky {
            illum: 1.0,
            sep_deg: 90.0,
            alt_deg: 45.0,
        };
        let v = moonlight_v_mag(&full, 45.0, 0.172).unwrap();
        assert!((v - 18.674).abs() < 0.005, "{v}");
        // specsim's documented example (specsim.atmosphere.krisciunas_schaefer, an independent implementation):
        // target at zenith distance 20 deg, Moon at 70 deg, 50 deg apart, phase 0.25 (alpha = 45 deg), k = 0.15:
        // 19.855 mag/arcsec^2.
        let quarterish = MoonSky {
            illum: 0.5 * (1.0 + (0.25 * std::f64::consts::PI).cos()),
            sep_deg: 50.0,
            alt_deg: 20.0,
        };
        let v = moonlight_v_mag(&quarterish, 70.0, 0.15).unwrap();
        assert!((v - 19.855).abs() < 0.002, "{v}");
        // Brighter (smaller magnitude) with more illumination, fainter with more separation; none below the horizon.
        let at = |illum: f64, sep_deg: f64| {
            moonlight_v_mag(
                &MoonSky {
                    illum,
                    sep_deg,
                    alt_deg: 40.0,
                },
                50.0,
                0.15,
            )
            .unwrap()
        };
        for w in [0.1, 0.3, 0.5, 0.7, 0.9, 1.0].windows(2) {
            assert!(at(w[1], 60.0) < at(w[0], 60.0));
        }
        for w in [10.0, 30.0, 60.0, 90.0].windows(2) {
            assert!(at(0.8, w[1]) > at(0.8, w[0]));
        }
        let down = MoonSky {
            alt_deg: -1.0,
            ..full
        };
        assert!(moonlight_v_mag(&down, 45.0, 0.15).is_none());
    }

    #[test]
    fn sky_brightens_with_airmass_and_moonlight() {
        let v = band("V").unwrap();
        let zenith = sky_mag_arcsec2(v, 21.8, 0.15, 90.0, None, 0.15);
        assert!((zenith - 21.8).abs() < 1e-9, "{zenith}");
        // Krisciunas & Schaefer eq. 2 at X(Z = 60 deg) = 1.890: 21.8 - 2.5 log10(X) + k (X - 1), to 1e-4 mag
        // (their nanolambert conversion uses 0.92104 for 0.4 ln 10 = 0.921034).
        let x = (1.0 - 0.96 * 60f64.to_radians().sin().powi(2)).powf(-0.5);
        let low = sky_mag_arcsec2(v, 21.8, 0.15, 30.0, None, 0.15);
        assert!(
            (low - (21.8 - 2.5 * x.log10() + 0.15 * (x - 1.0))).abs() < 1e-4,
            "{low}"
        );
        let moon = MoonSky {
            illum: 1.0,
            sep_deg: 90.0,
            alt_deg: 45.0,
        };
        let lit = sky_mag_arcsec2(v, 21.8, 0.172, 45.0, Some(&moon), 0.172);
        assert!(lit < 18.7 && lit > 18.4, "{lit}");
    }

    #[test]
    fn the_converter_can_saturate_before_the_well() {
        let mut cam = Camera {
            aperture_m: 0.4,
            obstruction: 0.3,
            throughput: 0.5,
            read_noise_e: 8.0,
            dark_e_per_s: 0.0,
            full_well_e: 200_000.0,
            pixel_scale_arcsec: 0.6,
            gain_e_per_adu: None,
        };
        assert_eq!(cam.saturation_e(), 200_000.0);
        cam.gain_e_per_adu = Some(1.5);
        assert_eq!(cam.saturation_e(), 65_535.0 * 1.5);
        cam.gain_e_per_adu = Some(5.0);
        assert_eq!(cam.saturation_e(), 200_000.0);
    }

    #[test]
    fn bright_stars_saturate_within_seconds_without_defocus() {
        // Common practice, no source: a V = 6 star through a 1 m telescope in good seeing saturates in well under
        // a second, so even the shortest exposure saturates and the set-up must defocus; a V = 12 star does not.
        let cam = Camera {
            aperture_m: 1.0,
            obstruction: 0.3,
            throughput: 0.5,
            read_noise_e: 8.0,
            dark_e_per_s: 0.02,
            full_well_e: 100_000.0,
            pixel_scale_arcsec: 0.4,
            gain_e_per_adu: None,
        };
        let c = Conditions {
            mag: 6.0,
            airmass: 1.2,
            exposure_s: 1.0,
            sky_mag_arcsec2: 21.8,
            extinction_mag: 0.15,
            seeing_arcsec: 1.2,
            aperture_radius_arcsec: 1.8,
            site_altitude_m: 2000.0,
            scintillation_cy: 1.5,
        };
        let v = band("V").unwrap();
        assert!(suggested_exposure(v, &cam, &c, EXPOSURE_RANGE_S, WELL_FRACTION_LIMIT).1);
        let faint = Conditions { mag: 12.0, ..c };
        let (t, saturates) =
            suggested_exposure(v, &cam, &faint, EXPOSURE_RANGE_S, WELL_FRACTION_LIMIT);
        assert!(!saturates && (2.0..=300.0).contains(&t), "{t}");
    }
}
