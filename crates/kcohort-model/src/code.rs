//! Shape checks for the coding systems an extract uses. They check form only (and the LOINC check
//! digit), not that a code exists in a given release of the code system.

/// LOINC code: 1–5 digits, a hyphen, one check digit computed by the Mod 10 algorithm that LOINC
/// publishes in its users' guide (double every other digit from the right, starting with the
/// rightmost, sum the digits, check = (10 − sum mod 10) mod 10).
pub fn is_valid_loinc(code: &str) -> bool {
    let Some((body, check)) = code.split_once('-') else {
        return false;
    };
    if body.is_empty()
        || body.len() > 7
        || check.len() != 1
        || !body.bytes().all(|b| b.is_ascii_digit())
    {
        return false;
    }
    let Some(check) = check.bytes().next().filter(u8::is_ascii_digit) else {
        return false;
    };
    loinc_check_digit(body) == check - b'0'
}

fn loinc_check_digit(body: &str) -> u8 {
    let mut sum = 0u32;
    for (i, b) in body.bytes().rev().enumerate() {
        let d = u32::from(b - b'0');
        if i % 2 == 0 {
            let doubled = d * 2;
            sum += doubled / 10 + doubled % 10;
        } else {
            sum += d;
        }
    }
    ((10 - sum % 10) % 10) as u8
}

/// WHO ATC code or prefix at one of its five levels: `C`, `C09`, `C09A`, `C09AA`, `C09AA02`.
pub fn is_valid_atc(code: &str) -> bool {
    let b = code.as_bytes();
    let letter = |i: usize| b[i].is_ascii_uppercase();
    let digit = |i: usize| b[i].is_ascii_digit();
    match b.len() {
        1 => letter(0),
        3 => letter(0) && digit(1) && digit(2),
        4 => letter(0) && digit(1) && digit(2) && letter(3),
        5 => letter(0) && digit(1) && digit(2) && letter(3) && letter(4),
        7 => letter(0) && digit(1) && digit(2) && letter(3) && letter(4) && digit(5) && digit(6),
        _ => false,
    }
}

/// ICD-10 (WHO or -CM) code: a letter, two characters (digits, or a digit and a letter as in
/// some -CM codes), then optionally a dot and up to four more letters or digits.
pub fn is_valid_icd10(code: &str) -> bool {
    let b = code.as_bytes();
    if b.len() < 3
        || !b[0].is_ascii_uppercase()
        || !b[1].is_ascii_digit()
        || !b[2].is_ascii_alphanumeric()
    {
        return false;
    }
    let rest = &code[3..];
    let rest = rest.strip_prefix('.').unwrap_or(rest);
    rest.len() <= 4
        && rest
            .bytes()
            .all(|c| c.is_ascii_uppercase() || c.is_ascii_digit())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn loinc_check_digits_of_published_codes() {
        // Codes as published by LOINC (potassium 2823-3, 6298-4; creatinine 2160-0; glucose
        // 2345-7; eGFR CKD-EPI 2021 98979-8; CK 2157-6).
        for code in [
            "2823-3", "6298-4", "2160-0", "2345-7", "98979-8", "2157-6", "14682-9",
        ] {
            assert!(is_valid_loinc(code), "{code}");
        }
        for bad in [
            "2823-4", "2823", "28233", "-3", "2823-33", "abcd-3", "2823-x", "",
        ] {
            assert!(!is_valid_loinc(bad), "{bad}");
        }
    }

    #[test]
    fn atc_levels() {
        for ok in ["C", "C09", "C09A", "C09AA", "C09AA02", "J01EE01", "B05XA01"] {
            assert!(is_valid_atc(ok), "{ok}");
        }
        for bad in ["c09aa02", "C9", "C09AA2", "C09AA023", "0C9", ""] {
            assert!(!is_valid_atc(bad), "{bad}");
        }
    }

    #[test]
    fn icd10_shapes() {
        for ok in ["E87.5", "E875", "N18.32", "E27.40", "T79.6XXA", "N17"] {
            assert!(is_valid_icd10(ok), "{ok}");
        }
        for bad in ["e87.5", "E8", "87.5", "E87.55555", "E87-5"] {
            assert!(!is_valid_icd10(bad), "{bad}");
        }
    }
}
