//! Numbers, times and text as the report prints them: significant digits,
//! SI prefixes, UTC dates, and HTML escaping. Nothing non-finite gets
//! through: it reads `n/a`.

/// What a missing or non-finite figure reads as.
pub const NA: &str = "n/a";

/// `x` with `digits` significant digits: plain between 10⁻⁴ and 10⁷ (and
/// then never fewer than its whole digits), else `1.23×10⁻⁵`; `n/a` when
/// not finite.
///
/// ```
/// use heatbound_host::report::format::sig;
/// assert_eq!(sig(0.0123456, 3), "0.0123");
/// assert_eq!(sig(1234.56, 3), "1235");
/// assert_eq!(sig(-2.5e-6, 2), "−2.5×10⁻⁶");
/// assert_eq!(sig(f64::NAN, 3), "n/a");
/// ```
pub fn sig(x: f64, digits: usize) -> String {
    if !x.is_finite() {
        return NA.to_owned();
    }
    let digits = digits.clamp(1, 15);
    if x == 0.0 {
        return "0".to_owned();
    }
    let exp = x.abs().log10().floor();
    // `exp` is within ±308 for a finite non-zero f64.
    #[allow(clippy::cast_possible_truncation)]
    let exp_i = exp as i32;
    let text = if (-4..7).contains(&exp_i) {
        let decimals = usize::try_from((digits as i32 - 1 - exp_i).max(0)).unwrap_or(0);
        let s = format!("{x:.decimals$}");
        // Rounding may carry into a new digit (9.99 → 10.0): keep the count.
        trim_to_sig(&s, digits)
    } else {
        // Rust's own scientific form rounds the mantissa and carries into
        // the exponent, subnormals included: `1.23e-5`.
        let e = format!("{:.*e}", digits.saturating_sub(1), x);
        let (m, exp) = e.split_once('e').unwrap_or((e.as_str(), "0"));
        format!("{m}×10{}", superscript(exp.parse().unwrap_or(0)))
    };
    text.replacen('-', "−", 1)
}

/// `s`, a plain decimal, with no more than `digits` significant digits
/// after a carry added one (`10.0` from `9.99` at three digits → `10.0`
/// stays: the carry only ever adds a trailing zero after the point).
fn trim_to_sig(s: &str, digits: usize) -> String {
    let significant = s
        .chars()
        .filter(char::is_ascii_digit)
        .skip_while(|&c| c == '0')
        .count();
    if significant > digits && s.contains('.') && s.ends_with('0') {
        let t = s.get(..s.len() - 1).unwrap_or(s);
        return t.trim_end_matches('.').to_owned();
    }
    s.to_owned()
}

/// `n` in superscript digits, with a superscript minus.
fn superscript(n: i32) -> String {
    n.to_string()
        .chars()
        .map(|c| match c {
            '-' => '⁻',
            '0' => '⁰',
            '1' => '¹',
            '2' => '²',
            '3' => '³',
            '4' => '⁴',
            '5' => '⁵',
            '6' => '⁶',
            '7' => '⁷',
            '8' => '⁸',
            _ => '⁹',
        })
        .collect()
}

/// [`sig`] of an optional figure.
pub fn opt_sig(x: Option<f64>, digits: usize) -> String {
    x.map_or_else(|| NA.to_owned(), |x| sig(x, digits))
}

/// `x` with a fixed number of decimals, `n/a` when missing or not finite.
pub fn fixed(x: Option<f64>, decimals: usize) -> String {
    match x {
        Some(x) if x.is_finite() => format!("{x:.decimals$}").replacen('-', "−", 1),
        _ => NA.to_owned(),
    }
}

/// The SI prefix that suits `x` in `unit`: the factor to divide by and the
/// unit with its prefix (`1.2e6 J` → `(1e6, "MJ")`).
pub fn prefixed(x: f64, unit: &str) -> (f64, String) {
    let a = x.abs();
    let (f, p) = if !a.is_finite() || a < 1e3 {
        (1.0, "")
    } else if a < 1e6 {
        (1e3, "k")
    } else if a < 1e9 {
        (1e6, "M")
    } else {
        (1e9, "G")
    };
    (f, format!("{p}{unit}"))
}

/// `x` in `unit` with an SI prefix and four significant digits:
/// `5.623 MJ`.
pub fn si(x: f64, unit: &str) -> String {
    if !x.is_finite() {
        return NA.to_owned();
    }
    let (f, u) = prefixed(x, unit);
    format!("{} {u}", sig(x / f, 4))
}

/// A temperature: `612.3 K (339.2 °C)`.
pub fn kelvin(t: Option<f64>) -> String {
    match t {
        Some(t) if t.is_finite() => format!(
            "{} K ({} °C)",
            fixed(Some(t), 1),
            fixed(Some(t - heatbound::ZERO_CELSIUS_K), 1)
        ),
        _ => NA.to_owned(),
    }
}

/// A length of time in words: `42.0 s`, `9 min 50 s`, `5 h 3 min`, `2 d 4 h`.
pub fn duration(s: f64) -> String {
    if !s.is_finite() {
        return NA.to_owned();
    }
    let neg = if s < 0.0 { "−" } else { "" };
    let s = s.abs();
    // Whole seconds of a finite f64 fit an i64 for any run a log can hold.
    #[allow(clippy::cast_possible_truncation)]
    let whole = s.round().min(9.0e15) as i64;
    let text = if s < 120.0 {
        format!("{s:.1} s")
    } else if s < 7200.0 {
        format!("{} min {} s", whole / 60, whole % 60)
    } else if s < 172_800.0 {
        format!("{} h {} min", whole / 3600, whole / 60 % 60)
    } else {
        format!("{} d {} h", whole / 86_400, whole / 3600 % 24)
    };
    format!("{neg}{text}")
}

/// Host time (Unix ms) as `YYYY-MM-DD HH:MM:SS UTC`.
///
/// ```
/// use heatbound_host::report::format::utc;
/// // Unix time 1 700 000 000 s is 2023-11-14 22:13:20 UTC (POSIX.1-2017
/// // §4.16 gives the formula; the date is the one `date -u -d @1700000000` prints).
/// assert_eq!(utc(1_700_000_000_123), "2023-11-14 22:13:20 UTC");
/// assert_eq!(utc(-1), "1969-12-31 23:59:59 UTC");
/// ```
pub fn utc(host_ms: i64) -> String {
    let ms = host_ms.rem_euclid(86_400_000);
    let (y, m, d) = crate::term::civil_from_days(host_ms.div_euclid(86_400_000));
    format!(
        "{y:04}-{m:02}-{d:02} {:02}:{:02}:{:02} UTC",
        ms / 3_600_000,
        ms / 60_000 % 60,
        ms / 1000 % 60
    )
}

/// `n` and the noun in the singular or plural: `1 outage`, `3 outages`.
pub fn count(n: u64, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// Text made safe for HTML content and attribute values.
///
/// ```
/// use heatbound_host::report::format::escape;
/// assert_eq!(escape("<a href=\"x\">&'"), "&lt;a href=&quot;x&quot;&gt;&amp;&#39;");
/// ```
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            // Control characters other than tab and newline cannot be
            // shown; a damaged log may hold them.
            c if c.is_control() && c != '\t' && c != '\n' => out.push('\u{fffd}'),
            c => out.push(c),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits_carry_and_never_show_nan() {
        assert_eq!(sig(9.996, 3), "10.0");
        assert_eq!(sig(0.099996, 3), "0.100");
        assert_eq!(sig(123_456_789.0, 3), "1.23×10⁸");
        assert_eq!(sig(9.9999e-5, 2), "1.0×10⁻⁴");
        assert_eq!(sig(9.9999e-6, 2), "1.0×10⁻⁵");
        assert_eq!(sig(5e-324, 3), "4.94×10⁻³²⁴");
        assert_eq!(sig(f64::MAX, 2), "1.8×10³⁰⁸");
        assert_eq!(sig(f64::INFINITY, 3), NA);
        assert_eq!(sig(0.0, 3), "0");
        assert_eq!(sig(-0.5, 2), "−0.50");
        assert_eq!(fixed(Some(f64::NAN), 2), NA);
        assert_eq!(fixed(None, 2), NA);
    }

    #[test]
    fn si_prefixes_and_durations() {
        assert_eq!(si(5_623_000.0, "J"), "5.623 MJ");
        assert_eq!(si(950.0, "W"), "950.0 W");
        assert_eq!(si(-2500.0, "J"), "−2.500 kJ");
        assert_eq!(duration(42.04), "42.0 s");
        assert_eq!(duration(590.0), "9 min 50 s");
        assert_eq!(duration(3.0 * 86_400.0 + 7200.0), "3 d 2 h");
        assert_eq!(duration(f64::NAN), NA);
    }

    #[test]
    fn times_never_panic() {
        // The epoch (POSIX §4.16, day 0).
        assert_eq!(utc(0), "1970-01-01 00:00:00 UTC");
        assert!(!utc(i64::MIN).is_empty());
        assert!(!utc(i64::MAX).is_empty());
    }

    #[test]
    fn control_characters_are_replaced() {
        assert_eq!(escape("a\u{1b}[31mb"), "a\u{fffd}[31mb");
    }
}
