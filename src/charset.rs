//! Unicode or ASCII output: whether the terminal can show ∂, δ and ⟨⟩
//! (read from the locale, the common practice of terminal programs), and
//! the plain-ASCII spelling of a finished report for when it cannot.
//!
//! Terms are printed in ASCII by the printer itself (`del`, `delta`, `<>`,
//! `par(x)`, readable back as input); this module covers the rest of a
//! report: echoed statements, model descriptions and prose.

/// True when output may use Unicode: always when it goes to a file or a
/// pipe (files are UTF-8); on a terminal when the locale names UTF-8. The
/// first of `LC_ALL`, `LC_CTYPE`, `LANG` that is set and non-empty decides;
/// none set means the C locale, which is ASCII.
pub fn unicode_output(is_terminal: bool, var: impl Fn(&str) -> Option<String>) -> bool {
    if !is_terminal {
        return true;
    }
    let locale = ["LC_ALL", "LC_CTYPE", "LANG"]
        .iter()
        .find_map(|k| var(k).filter(|v| !v.is_empty()));
    match locale {
        Some(value) => {
            let v = value.to_ascii_lowercase();
            v.contains("utf-8") || v.contains("utf8")
        }
        // Windows consoles have no locale variables and show Unicode.
        None => cfg!(windows),
    }
}

/// True for a character that can drive a terminal (C0 and C1 controls and
/// DEL) other than a new line or a tab.
fn is_control(c: char) -> bool {
    c != '\n' && c != '\t' && c.is_control()
}

/// `text` with every control character but new lines and tabs written as
/// `\u{1b}` (a carriage return before a new line is kept), so that text
/// echoed from the input can never move the cursor, recolour or retitle a
/// terminal.
pub fn escape_controls(text: &str) -> std::borrow::Cow<'_, str> {
    escape_controls_at(text, &mut [])
}

/// [`escape_controls`], also moving the byte `offsets` into `text` to the
/// same places in the escaped text.
pub fn escape_controls_at<'t>(text: &'t str, offsets: &mut [usize]) -> std::borrow::Cow<'t, str> {
    let keep = |i: usize, c: char| !is_control(c) || (c == '\r' && text[i + 1..].starts_with('\n'));
    if text.char_indices().all(|(i, c)| keep(i, c)) {
        return std::borrow::Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 16);
    let mut moved: Vec<Option<usize>> = vec![None; offsets.len()];
    for (i, c) in text.char_indices() {
        for (k, o) in offsets.iter().enumerate() {
            if moved[k].is_none() && *o <= i {
                moved[k] = Some(out.len());
            }
        }
        if keep(i, c) {
            out.push(c);
        } else {
            out.push_str(&format!("\\u{{{:x}}}", c as u32));
        }
    }
    for (o, m) in offsets.iter_mut().zip(moved) {
        *o = m.unwrap_or(out.len());
    }
    std::borrow::Cow::Owned(out)
}

/// The report with every non-ASCII character spelt in ASCII: `∂` as `del`,
/// `x∥` as `par(x)`, Greek letters by name, anything unknown as `?`.
pub fn to_ascii(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    // ₂F₁ is spelt as the input's ASCII name, one word.
    let text = text.replace(crate::term::HYP2F1, crate::term::HYP2F1_ASCII);
    for c in text.chars() {
        if c.is_ascii() {
            out.push(c);
            continue;
        }
        if c == '∥' {
            // x∥ → par(x): the name just written moves inside.
            let start = out
                .char_indices()
                .rev()
                .take_while(|(_, ch)| ch.is_ascii_alphanumeric() || *ch == '_')
                .last()
                .map(|(k, _)| k);
            match start {
                Some(k) => {
                    let name = out.split_off(k);
                    out.push_str(&format!("par({name})"));
                }
                None => out.push_str("par"),
            }
            continue;
        }
        out.push_str(spelling(c));
    }
    out
}

fn spelling(c: char) -> &'static str {
    match c {
        '∂' => "del",
        'δ' => "delta",
        '⟨' => "<",
        '⟩' => ">",
        '∫' => "int",
        '∮' => "oint",
        '×' => "x",
        '…' => "...",
        '←' => "<-",
        '→' => "->",
        '·' => ".",
        '−' => "-",
        '–' | '—' => "--",
        '²' => "^2",
        '√' => "sqrt",
        '≤' => "<=",
        '≥' => ">=",
        '≠' => "!=",
        '±' => "+-",
        '∓' => "-+",
        '\u{302}' => "^",
        'Ô' => "O^",
        'α' => "alpha",
        'β' => "beta",
        'γ' => "gamma",
        'Δ' => "Delta",
        'ε' => "eps",
        'ζ' => "zeta",
        'η' => "eta",
        'θ' => "theta",
        'κ' => "kappa",
        'λ' => "lambda",
        'μ' => "mu",
        'ν' => "nu",
        'ξ' => "xi",
        'π' => "pi",
        'ρ' => "rho",
        'σ' => "sigma",
        'τ' => "tau",
        'φ' => "phi",
        'χ' => "chi",
        'ψ' => "psi",
        'ω' => "omega",
        'Ω' => "Omega",
        _ => "?",
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_locale_decides_on_a_terminal_only() {
        let env = |pairs: &'static [(&'static str, &'static str)]| {
            move |k: &str| {
                pairs
                    .iter()
                    .find(|(name, _)| *name == k)
                    .map(|(_, v)| v.to_string())
            }
        };
        assert!(unicode_output(false, env(&[("LANG", "C")])));
        assert!(unicode_output(true, env(&[("LANG", "en_GB.UTF-8")])));
        assert!(unicode_output(
            true,
            env(&[("LC_ALL", "de_DE.utf8"), ("LANG", "C")])
        ));
        assert!(!unicode_output(
            true,
            env(&[("LC_ALL", "C"), ("LANG", "en_GB.UTF-8")])
        ));
        assert!(!unicode_output(true, env(&[("LANG", "POSIX")])));
        // An empty LC_ALL does not count: LANG decides.
        assert!(unicode_output(
            true,
            env(&[("LC_ALL", ""), ("LANG", "C.UTF-8")])
        ));
        assert_eq!(unicode_output(true, env(&[])), cfg!(windows));
    }

    #[test]
    fn reports_spell_out_in_ascii() {
        assert_eq!(
            to_ascii("∫[x∥ in boundary] { ⟨D(x∥) P(x1)⟩ } = ∂[n](x1) ⟨P(x1)⟩ ×2 …"),
            "int[par(x) in boundary] { <D(par(x)) P(x1)> } = del[n](x1) <P(x1)> x2 ..."
        );
        assert_eq!(
            to_ascii("ξ = (d-2)/(4(d-1)), C_φ"),
            "xi = (d-2)/(4(d-1)), C_phi"
        );
        assert!(to_ascii("⟨O Ô⟩ = b/(2y)^(Δ-Δ̂) ← ✓").is_ascii());
    }
}
