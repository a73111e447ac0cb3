//! How `test --accept` writes a new expected result: in the spelling and
//! the layout of the one it replaces, so that an accepted file reads as
//! its author wrote it.
//!
//! Spelling: the ASCII words (`del`, `delta`, `int`, `par(x)`) when the old
//! text uses them and Unicode (`∂`, `δ`, `∫`, `x∥`) when it uses those; the
//! correlator brackets the old text used (`<…>` or `⟨…⟩`). An old text that
//! shows neither (`expect 0`) takes its statement's habit, then the
//! file's. Layout: an
//! expected result on one line stays on one line; one broken over lines is
//! rewritten one top-level term per line, each continuation line indented
//! as the old text's second line was.

use crate::term::print::Style;

/// The new expected result `print` gives (in the style asked), in the
/// spelling and layout of `old`; where `old` shows no habit, the texts of
/// `around` decide, the nearest first (its statement, then the file).
pub fn in_layout_of(old: &str, around: &[&str], print: impl Fn(Style) -> String) -> String {
    let words = std::iter::once(old)
        .chain(around.iter().copied())
        .find_map(spelling)
        .unwrap_or(Style::Unicode);
    let ascii_angles = std::iter::once(old)
        .chain(around.iter().copied())
        .find_map(brackets)
        .unwrap_or(words == Style::Ascii);
    let mut text = print(words);
    if ascii_angles {
        text = text.replace('⟨', "<").replace('⟩', ">");
    } else if words == Style::Ascii {
        text = text.replace('<', "⟨").replace('>', "⟩");
    }
    let mut lines = old.lines();
    lines.next();
    let Some(second) = lines.find(|l| !l.trim().is_empty()) else {
        return text;
    };
    let indent = &second[..second.len() - second.trim_start().len()];
    let terms = top_level_terms(&text);
    let mut out = String::new();
    for (k, term) in terms.iter().enumerate() {
        if k > 0 {
            out.push('\n');
            out.push_str(indent);
        }
        out.push_str(term);
    }
    out
}

/// The words `text` spells its symbols with, if it shows any.
fn spelling(text: &str) -> Option<Style> {
    let unicode = text.contains(['∂', 'δ', '∫', '∮', '∥']);
    let ascii = ["del[", "delta(", "delta[", "int[", "oint[", "par("]
        .iter()
        .any(|w| text.contains(w));
    match (unicode, ascii) {
        (true, _) => Some(Style::Unicode),
        (false, true) => Some(Style::Ascii),
        _ => None,
    }
}

/// True for `<…>`, false for `⟨…⟩`, if `text` has a correlator.
fn brackets(text: &str) -> Option<bool> {
    match (text.contains('⟨'), text.contains('<')) {
        (true, _) => Some(false),
        (false, true) => Some(true),
        _ => None,
    }
}

/// `text` cut before each `+` or `-` that joins two terms outside every
/// bracket (`( )`, `[ ]`, `{ }`, `< >`, `⟨ ⟩`, `| |`); each piece keeps its
/// sign.
fn top_level_terms(text: &str) -> Vec<String> {
    let mut terms = Vec::new();
    let mut depth = 0i32;
    let mut in_bars = false;
    let mut start = 0;
    let bytes: Vec<(usize, char)> = text.char_indices().collect();
    for (k, &(i, c)) in bytes.iter().enumerate() {
        match c {
            '(' | '[' | '{' | '<' | '⟨' => depth += 1,
            ')' | ']' | '}' | '>' | '⟩' => depth -= 1,
            '|' => in_bars = !in_bars,
            '+' | '-' if depth == 0 && !in_bars && i > 0 => {
                // A binary sign is written with a space on each side.
                let spaced =
                    text[..i].ends_with(' ') && bytes.get(k + 1).is_some_and(|(_, n)| *n == ' ');
                if spaced && !text[start..i].trim().is_empty() {
                    terms.push(text[start..i].trim_end().to_string());
                    start = i;
                }
            }
            _ => {}
        }
    }
    terms.push(text[start..].trim_end().to_string());
    terms
}

#[cfg(test)]
mod tests {
    use super::*;

    fn printed(style: Style) -> String {
        match style {
            Style::Ascii => {
                "- Delta delta(x - x1) <O(x1) O(x2)> - Delta delta(x - x2) <O(x1) O(x2)>"
            }
            _ => "- Delta δ(x - x1) ⟨O(x1) O(x2)⟩ - Delta δ(x - x2) ⟨O(x1) O(x2)⟩",
        }
        .to_string()
    }

    #[test]
    fn one_line_stays_one_line_with_its_brackets() {
        assert_eq!(
            in_layout_of("- Delta δ(x - x1) <O(x1) O(x2)>", &[], printed),
            "- Delta δ(x - x1) <O(x1) O(x2)> - Delta δ(x - x2) <O(x1) O(x2)>"
        );
        assert_eq!(
            in_layout_of("- Delta δ(x - x1) ⟨O(x1) O(x2)⟩", &[], printed),
            printed(Style::Unicode)
        );
        assert_eq!(
            in_layout_of("- Delta delta(x - x1) <O(x1) O(x2)>", &[], printed),
            printed(Style::Ascii)
        );
        // `expect 0` shows nothing: its statement's habit decides, then the file's.
        assert_eq!(
            in_layout_of(
                "0",
                &["simplify del[mu](x) <T[mu,nu](x) O(x1)>", "δ"],
                printed
            ),
            printed(Style::Ascii)
        );
        assert_eq!(
            in_layout_of("0", &["simplify ∂[mu](x) <T[mu,nu](x) O(x1)>"], printed),
            "- Delta δ(x - x1) <O(x1) O(x2)> - Delta δ(x - x2) <O(x1) O(x2)>"
        );
        assert_eq!(in_layout_of("0", &[], printed), printed(Style::Unicode));
    }

    #[test]
    fn lines_and_indentation_are_kept() {
        let old = "- Delta δ(x - x1) <O(x1) O(x2)>\n         + 0 <O(x1) O(x2)>";
        assert_eq!(
            in_layout_of(old, &[], printed),
            "- Delta δ(x - x1) <O(x1) O(x2)>\n         - Delta δ(x - x2) <O(x1) O(x2)>"
        );
    }

    #[test]
    fn signs_inside_brackets_and_bars_do_not_split() {
        assert_eq!(
            top_level_terms("2 |x1 - x2|^(-2 Delta) - (a - b) F(u - v) + g"),
            ["2 |x1 - x2|^(-2 Delta)", "- (a - b) F(u - v)", "+ g"]
        );
        assert_eq!(top_level_terms("- a"), ["- a"]);
    }
}
