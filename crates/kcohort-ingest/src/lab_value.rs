//! Lab values as laboratories report them: a decimal number, optionally preceded by a comparator
//! (`>9.0`, `<1.5`, `>=10`, `<=0.2`) when the true value lies beyond the assay's range. The
//! comparator is kept in its own column; the number is used as the value.

/// A parsed lab value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LabValue {
    pub comparator: Option<&'static str>,
    pub number: f64,
}

/// Parse a reported lab value; `None` if it is not a number with an optional comparator.
pub fn parse_lab_value(text: &str) -> Option<LabValue> {
    let t = text.trim();
    let (comparator, rest) = if let Some(r) = t.strip_prefix(">=") {
        (Some(">="), r)
    } else if let Some(r) = t.strip_prefix("<=") {
        (Some("<="), r)
    } else if let Some(r) = t.strip_prefix('>') {
        (Some(">"), r)
    } else if let Some(r) = t.strip_prefix('<') {
        (Some("<"), r)
    } else {
        (None, t)
    };
    let number = parse_decimal(rest.trim_start())?;
    Some(LabValue { comparator, number })
}

/// A plain decimal number: optional sign, digits with an optional `.` fraction, optional exponent.
/// Rejects what Rust's float parser would also accept but no laboratory writes (`inf`, `NaN`,
/// hexadecimal) and decimal commas (`5,8`), which are ambiguous in CSV.
pub fn parse_decimal(text: &str) -> Option<f64> {
    let t = text.trim();
    let body = t.strip_prefix(['+', '-']).unwrap_or(t);
    let mantissa = match body.find(['e', 'E']) {
        Some(i) => {
            let exp = &body[i + 1..];
            let exp = exp.strip_prefix(['+', '-']).unwrap_or(exp);
            if exp.is_empty() || !exp.bytes().all(|b| b.is_ascii_digit()) {
                return None;
            }
            &body[..i]
        }
        None => body,
    };
    let mut seen_digit = false;
    let mut seen_dot = false;
    for b in mantissa.bytes() {
        match b {
            b'0'..=b'9' => seen_digit = true,
            b'.' if !seen_dot => seen_dot = true,
            _ => return None,
        }
    }
    if !seen_digit {
        return None;
    }
    t.parse::<f64>().ok().filter(|v| v.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn values_with_and_without_comparator() {
        let check = |text: &str, comparator: Option<&str>, number: f64| {
            let v = parse_lab_value(text).unwrap_or_else(|| panic!("{text} should parse"));
            assert_eq!(v.comparator, comparator, "{text}");
            assert_eq!(v.number, number, "{text}");
        };
        check("5.8", None, 5.8);
        check(" 5.8 ", None, 5.8);
        check(">9.0", Some(">"), 9.0);
        check("<1.5", Some("<"), 1.5);
        check(">=10", Some(">="), 10.0);
        check("<= 0.2", Some("<="), 0.2);
        check(".5", None, 0.5);
        check("4.", None, 4.0);
        check("1e2", None, 100.0);
        check("-0.5", None, -0.5);
    }

    #[test]
    fn not_numbers() {
        for bad in [
            "", ">", "5,8", "five", "NaN", "inf", "0x10", "5.8.1", "5.8 mmol", "--1", "1e", "1e+",
            ".",
        ] {
            assert_eq!(parse_lab_value(bad), None, "{bad}");
        }
    }
}
