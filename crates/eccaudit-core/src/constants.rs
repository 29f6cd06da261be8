//! Physical and astronomical constants used by the orbit calculations, each with its source.
//!
//! Masses enter through mass parameters GM (known far better than G or the masses alone), so a
//! companion mass "in solar masses" means GM_companion / GM_sun with the nominal values below.

/// Nominal solar mass parameter GM_sun [m³ s⁻²]. IAU 2015 Resolution B3 (nominal solar and
/// planetary conversion constants), value (GM)^N_sun = 1.3271244 × 10²⁰ m³ s⁻².
pub const GM_SUN: f64 = 1.327_124_4e20;

/// Nominal Jupiter mass parameter GM_J [m³ s⁻²]. IAU 2015 Resolution B3,
/// (GM)^N_J = 1.2668653 × 10¹⁷ m³ s⁻².
pub const GM_JUPITER: f64 = 1.266_865_3e17;

/// Nominal Earth mass parameter GM_E [m³ s⁻²]. IAU 2015 Resolution B3,
/// (GM)^N_E = 3.986004 × 10¹⁴ m³ s⁻².
pub const GM_EARTH: f64 = 3.986_004e14;

/// Newtonian constant of gravitation G [m³ kg⁻¹ s⁻²]. CODATA 2018 recommended value
/// (Tiesinga et al. 2021, Rev. Mod. Phys. 93, 025010): 6.674 30(15) × 10⁻¹¹.
pub const GRAVITATIONAL_CONSTANT: f64 = 6.674_30e-11;

/// Astronomical unit [m]. IAU 2012 Resolution B2: exactly 149 597 870 700 m.
pub const ASTRONOMICAL_UNIT: f64 = 149_597_870_700.0;

/// Seconds in a day [s]: the SI day of 86 400 s used for Julian dates (IAU convention).
pub const SECONDS_PER_DAY: f64 = 86_400.0;

/// Days in a Julian year [d]: 365.25 (IAU convention for the Julian year).
pub const DAYS_PER_JULIAN_YEAR: f64 = 365.25;

/// Jupiter's mass in solar masses, GM_J / GM_sun from the nominal values above (≈ 9.546e-4).
pub const JUPITER_MASS_IN_SOLAR_MASSES: f64 = GM_JUPITER / GM_SUN;

/// Earth's mass in solar masses, GM_E / GM_sun from the nominal values above (≈ 3.003e-6).
pub const EARTH_MASS_IN_SOLAR_MASSES: f64 = GM_EARTH / GM_SUN;

/// Nominal solar mass [kg], GM_sun / G with the two values above (≈ 1.98841e30 kg); limited by
/// the uncertainty of G (2.2e-5 relative).
pub const SOLAR_MASS_KG: f64 = GM_SUN / GRAVITATIONAL_CONSTANT;
