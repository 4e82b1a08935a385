//! Conversions between the kernel's units (°C, L, kg, kg/m³) and the units
//! the trade still uses beside them (°F, US gallons, pounds, g/cm³).
//!
//! These are plain arithmetic with exact defining factors: they neither
//! validate nor round (a NaN in gives a NaN out). The calculations that take
//! the converted values validate them and name the quantity.

/// One US liquid gallon in litres, exact by definition (231 in³).
pub const US_GALLON_L: f64 = 3.785411784;

/// One avoirdupois pound in kilograms, exact by definition (international
/// yard and pound, 1959).
pub const POUND_KG: f64 = 0.45359237;

/// °F → °C: (f − 32) × 5/9.
pub fn f_to_c(f: f64) -> f64 {
    // Same operation order as `T_PROOF_C`, so f_to_c(60.0) equals it bit for bit.
    (f - 32.0) * 5.0 / 9.0
}

/// °C → °F: c × 9/5 + 32.
pub fn c_to_f(c: f64) -> f64 {
    c * 9.0 / 5.0 + 32.0
}

/// US gallons → litres (× 3.785411784).
pub fn us_gal_to_l(gallons: f64) -> f64 {
    gallons * US_GALLON_L
}

/// Litres → US gallons (÷ 3.785411784).
pub fn l_to_us_gal(litres: f64) -> f64 {
    litres / US_GALLON_L
}

/// Pounds → kilograms (× 0.45359237).
pub fn lb_to_kg(pounds: f64) -> f64 {
    pounds * POUND_KG
}

/// Kilograms → pounds (÷ 0.45359237).
pub fn kg_to_lb(kg: f64) -> f64 {
    kg / POUND_KG
}

/// g/cm³ (= kg/L) → kg/m³ (× 1000).
pub fn g_cm3_to_kg_m3(g_cm3: f64) -> f64 {
    g_cm3 * 1000.0
}

/// kg/m³ → g/cm³ (÷ 1000).
pub fn kg_m3_to_g_cm3(kg_m3: f64) -> f64 {
    kg_m3 / 1000.0
}
