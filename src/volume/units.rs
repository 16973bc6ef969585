//! Lengths with units, as users type them ("2.5um", "2.5 µm", "800nm", "1e-6m") and as image
//! files store them (TIFF resolution units, "unit=micron" in an image description). Everything
//! is converted to metres, the SI unit voxperm uses internally and in its result files.

use crate::{Error, Result};

/// Units [`parse_length`] accepts, for error messages.
pub const ACCEPTED_UNITS: &str = "m, cm, mm, um (also µm, μm, micron), nm";

/// Size of one unit in metres, for the unit names users and image writers use; None when
/// the name is not a length unit. Case-insensitive.
pub fn unit_to_metres(unit: &str) -> Option<f64> {
    let u = unit.trim().to_lowercase();
    // Both the micro sign (U+00B5) and the Greek mu (U+03BC) occur in the wild.
    let metres = match u.as_str() {
        "m" | "metre" | "metres" | "meter" | "meters" => 1.0,
        "cm" | "centimetre" | "centimetres" | "centimeter" | "centimeters" => 1e-2,
        "mm" | "millimetre" | "millimetres" | "millimeter" | "millimeters" => 1e-3,
        "um" | "µm" | "μm" | "micron" | "microns" | "micrometre" | "micrometres" | "micrometer"
        | "micrometers" => 1e-6,
        "nm" | "nanometre" | "nanometres" | "nanometer" | "nanometers" => 1e-9,
        _ => return None,
    };
    Some(metres)
}

/// Parses a positive length such as "2.5um", "2.5 µm", "800nm", "0.01mm", "1e-6m" into metres.
///
/// A bare number is refused: a voxel size without a unit is the classic factor-10⁶ mistake.
pub fn parse_length(s: &str) -> Result<f64> {
    let text = s.trim();
    let (number, unit) = split_number(text).ok_or_else(|| {
        Error::Usage(format!(
            "'{s}' is not a length: expected a number and a unit, e.g. 2.5um (units: {ACCEPTED_UNITS})"
        ))
    })?;
    let unit = unit.trim();
    if unit.is_empty() {
        // Suggest the reading the number most likely meant: a tiny number is metres, anything
        // else micrometres (the usual micro-CT unit). Never rewrite the number itself.
        if !(number.is_finite() && number > 0.0) {
            return Err(Error::Usage(format!(
                "length '{s}' has no unit, and a length must be positive and finite"
            )));
        }
        // Below 1e-4 metres is the only sensible reading (0.005 is more likely millimetres).
        let hint = if number > 0.0 && number < 1e-4 {
            format!("{text}m if that is metres ({})", format_length(number))
        } else {
            format!("{text}um if that is micrometres")
        };
        return Err(Error::Usage(format!(
            "length '{s}' has no unit; add one of {ACCEPTED_UNITS}, e.g. {hint}"
        )));
    }
    let Some(scale) = unit_to_metres(unit) else {
        // "2,5um" or "1,000nm": a comma, which the number stops at. Decimal or thousands?
        if unit.starts_with(',') {
            return Err(Error::Usage(format!(
                "'{s}': numbers take no comma{}",
                comma_hint(text)
            )));
        }
        return Err(Error::Usage(format!(
            "'{s}': '{unit}' is not a length unit; accepted units: {ACCEPTED_UNITS}"
        )));
    };
    let metres = number * scale;
    if !(metres.is_finite() && metres > 0.0) {
        return Err(Error::Usage(format!(
            "length '{s}' must be positive and finite"
        )));
    }
    Ok(metres)
}

/// The readings of a number written with commas that parse as lengths: one comma as a decimal
/// separator, or commas before groups of three digits as thousands separators. Each is offered
/// only if it parses, with "um" added when the text has no unit.
fn comma_hint(text: &str) -> String {
    let commas = text.matches(',').count();
    let groups_of_three = text
        .split(',')
        .skip(1)
        .all(|g| g.chars().take_while(char::is_ascii_digit).count() == 3);
    let mut readings = Vec::new();
    if commas == 1 {
        readings.push((text.replacen(',', ".", 1), "decimal separator"));
    }
    if groups_of_three {
        readings.push((text.replace(',', ""), "thousands separator"));
    }
    let usable: Vec<String> = readings
        .into_iter()
        .filter_map(|(t, why)| {
            if parse_length(&t).is_ok() {
                Some(format!("{t} (comma as {why})"))
            } else {
                let with_unit = format!("{t}um");
                parse_length(&with_unit)
                    .is_ok()
                    .then(|| format!("{with_unit} (comma as {why}; um if micrometres)"))
            }
        })
        .collect();
    if usable.is_empty() {
        String::new()
    } else {
        format!("; write {}", usable.join(", or "))
    }
}

/// Splits "1e-6m" into (1e-6, "m"): the longest prefix that parses as a number wins, so an
/// exponent is taken when it is complete and left to the unit otherwise ("2.5em" → 2.5, "em").
fn split_number(text: &str) -> Option<(f64, &str)> {
    let candidate_end = text
        .char_indices()
        .find(|&(_, c)| !(c.is_ascii_digit() || matches!(c, '.' | '+' | '-' | 'e' | 'E')))
        .map_or(text.len(), |(i, _)| i);
    // All candidate characters are ASCII, so every byte index below is a char boundary.
    (1..=candidate_end)
        .rev()
        .find_map(|end| text[..end].parse::<f64>().ok().map(|v| (v, &text[end..])))
}

/// Formats a length in metres with a readable unit, e.g. 2.5e-6 → "2.5 µm".
pub fn format_length(metres: f64) -> String {
    // Far outside imaging sizes (a unit slip, usually): plain scientific notation in metres.
    if metres != 0.0 && !(1e-10..1e4).contains(&metres.abs()) {
        return format!("{metres:e} m");
    }
    let (scale, unit) = match metres.abs() {
        m if m >= 1.0 => (1.0, "m"),
        m if m >= 1e-3 => (1e3, "mm"),
        m if m >= 1e-6 => (1e6, "µm"),
        _ => (1e9, "nm"),
    };
    let v = metres * scale;
    // Round to 6 significant figures so binary noise (2.4999999999 µm) does not show.
    let digits = (5 - v.abs().log10().floor() as i32).clamp(0, 12) as usize;
    let s = format!("{v:.digits$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    format!("{s} {unit}")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() <= 1e-12 * b.abs()
    }

    #[test]
    fn accepted_spellings() {
        for (s, m) in [
            ("2.5um", 2.5e-6),
            ("2.5 µm", 2.5e-6),
            ("2.5μm", 2.5e-6),
            ("3.2 um", 3.2e-6),
            ("800nm", 800e-9),
            ("0.01mm", 1e-5),
            ("1e-6m", 1e-6),
            ("1E-6 m", 1e-6),
            ("5 micron", 5e-6),
            ("0.5cm", 5e-3),
            ("  7UM ", 7e-6),
            ("+4um", 4e-6),
        ] {
            let got = parse_length(s).unwrap_or_else(|e| panic!("{s}: {e}"));
            assert!(close(got, m), "{s}: {got} vs {m}");
        }
    }

    #[test]
    fn bare_number_and_wrong_units_are_usage_errors() {
        let hint = |t: &str| match parse_length(t) {
            Err(Error::Usage(msg)) => msg,
            other => panic!("{t}: expected a usage error, got {other:?}"),
        };
        for s in ["2.5", "5kg", "5s", "5 sec", "um", "", "2.5em", "5 px"] {
            let msg = hint(s);
            assert!(msg.contains("um"), "{s}: {msg}");
        }
        let msg = hint("5kg");
        assert!(msg.contains("not a length unit"), "{msg}");
        let msg = hint("2.5");
        assert!(msg.contains("no unit"), "{msg}");
        // The hint keeps the number as typed: a metre value is not turned into a micrometre one.
        let msg = hint("2.5e-6");
        assert!(msg.contains("2.5e-6m if that is metres (2.5 µm)"), "{msg}");
        assert!(!msg.contains("0.0000025"), "{msg}");
        let msg = hint("3.2");
        assert!(msg.contains("3.2um if that is micrometres"), "{msg}");
        let msg = hint("0.005");
        assert!(msg.contains("0.005um if that is micrometres"), "{msg}");
        // A comma is named as such, with the spelling that works.
        let msg = hint("2,5um");
        assert!(
            msg.contains("write 2.5um (comma as decimal separator)"),
            "{msg}"
        );
        // Three digits after it may be thousands: both readings are named.
        let msg = hint("1,000nm");
        assert!(
            msg.contains("1.000nm (comma as decimal separator)")
                && msg.contains("1000nm (comma as thousands separator)"),
            "{msg}"
        );
        // Without a unit the suggestion carries one, so it can be used as given.
        assert!(
            hint("2,5").contains("2.5um (comma as decimal separator; um if micrometres)"),
            "{}",
            hint("2,5")
        );
        // Several commas: thousands only; mixed groups or a bad unit: no suggestion that
        // would fail again.
        let msg = hint("1,000,000nm");
        assert!(
            msg.contains("write 1000000nm (comma as thousands") && !msg.contains("1.000"),
            "{msg}"
        );
        let msg = hint("1,000.5um");
        assert!(
            msg.contains("write 1000.5um (comma as thousands") && !msg.contains("1.000.5"),
            "{msg}"
        );
        for t in ["1,250,5um", "2,5xyz"] {
            let msg = hint(t);
            assert!(
                msg.contains("no comma") && !msg.contains("write"),
                "{t}: {msg}"
            );
        }
    }

    #[test]
    fn non_positive_or_infinite_is_refused() {
        for s in ["0um", "-2um", "1e400m", "nanum"] {
            assert!(matches!(parse_length(s), Err(Error::Usage(_))), "{s}");
        }
    }

    #[test]
    fn formats_lengths() {
        assert_eq!(format_length(2.5e-6), "2.5 µm");
        assert_eq!(format_length(2.4999999999e-6), "2.5 µm");
        assert_eq!(format_length(800e-9), "800 nm");
        assert_eq!(format_length(0.0123), "12.3 mm");
        assert_eq!(format_length(1.0), "1 m");
    }
}
