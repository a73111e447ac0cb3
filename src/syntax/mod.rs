//! Parsing: text to AST, for `.ward` and `.rules` files.
//!
//! The grammar lives in `grammar/ward.pest`; this module has one
//! `parse_<rule>` function per grammar rule that builds an AST node, and turns
//! pest's errors into [`Error`]s that list the literal tokens expected.
//! The parser never touches declarations or the e-graph.

pub mod ast;

use std::str::FromStr;
use std::sync::Arc;

use num_bigint::BigInt;
use num_rational::BigRational;
use pest::iterators::Pair;
use pest::Parser as _;

use crate::budget::{MAX_DEPTH, MAX_DIGITS};
use crate::diagnostic::{Error, ErrorKind, Result, Source};
use ast::*;

#[derive(pest_derive::Parser)]
#[grammar = "../grammar/ward.pest"]
struct WardParser;

/// Parses a `.ward` file.
pub fn parse_file(source: &Arc<Source>) -> Result<File> {
    let mut pairs = parse_rule(source, Rule::file)?;
    let file = pairs
        .next()
        .expect("the grammar's file rule always yields one pair");
    let mut stmts = Vec::new();
    for pair in file.into_inner() {
        if pair.as_rule() == Rule::EOI {
            break;
        }
        stmts.push(parse_statement(source, pair)?);
    }
    Ok(File { stmts })
}

/// Parses a `.rules` file. A text that does not start with `ruleset`
/// (after blank lines and comments) is not taken for a rules file, and its
/// text is not shown: it may be any file named by mistake.
pub fn parse_rule_file(source: &Arc<Source>) -> Result<RuleFile> {
    if !starts_with_ruleset(&source.text) {
        return Err(Error::new(
            ErrorKind::Rule,
            format!(
                "`{}` is not a rules file: it does not start with `ruleset`",
                source.name
            ),
        )
        .with_note(
            "a rules file holds `ruleset NAME` followed by `rule NAME … from … to …` blocks",
        ));
    }
    let mut pairs = parse_rule(source, Rule::rule_file)?;
    let file = pairs
        .next()
        .expect("the grammar's rule_file rule always yields one pair");
    let mut sets = Vec::new();
    for pair in file.into_inner() {
        if pair.as_rule() == Rule::ruleset {
            sets.push(parse_ruleset(source, pair)?);
        }
    }
    Ok(RuleFile { sets })
}

/// Parses a single expression (used to read printed output back).
pub fn parse_expr(source: &Arc<Source>) -> Result<Expr> {
    let mut pairs = parse_rule(source, Rule::expr_only)?;
    let whole = pairs
        .next()
        .expect("the grammar's expr_only rule always yields one pair");
    let expr = whole
        .into_inner()
        .next()
        .expect("expr_only holds an expression");
    build_expr(source, expr, 0)
}

// ───────────────────────────── errors ─────────────────────────────

fn parse_rule<'i>(
    source: &'i Arc<Source>,
    start: Rule,
) -> Result<pest::iterators::Pairs<'i, Rule>> {
    check_nesting(source)?;
    // Tracking every attempt for the error message costs most of the
    // parse: a text that parses is parsed without it, and one that does
    // not is parsed again with it.
    pest::set_error_detail(false);
    match WardParser::parse(start, &source.text) {
        Ok(pairs) => Ok(pairs),
        Err(plain) => {
            pest::set_error_detail(true);
            let detailed = WardParser::parse(start, &source.text).err();
            pest::set_error_detail(false);
            let ward = start != Rule::rule_file;
            Err(syntax_error(source, detailed.unwrap_or(plain), ward))
        }
    }
}

/// The error for text that does not follow the grammar; `ward` for a
/// `.ward` file (or a lone expression), whose expected tokens never name
/// the pattern forms of rule files.
fn syntax_error(source: &Arc<Source>, e: pest::error::Error<Rule>, ward: bool) -> Error {
    let text = source.text.as_str();
    let classic = match e.location {
        pest::error::InputLocation::Pos(p) => p,
        pest::error::InputLocation::Span((s, _)) => s,
    }
    .min(text.len());
    let positives = match &e.variant {
        pest::error::ErrorVariant::ParsingError { positives, .. } => positives.clone(),
        // pest stops on its own budgets: the stack left to it, or a call
        // limit set by the caller.
        pest::error::ErrorVariant::CustomError { message } => {
            return Error::at(
                ErrorKind::Limit,
                source,
                Span::new(classic, classic),
                format!("the parser stopped here: {message}"),
            )
            .with_label("stopped here")
            .with_note("parse on a thread with a larger stack, as `wardsmith::run` does (`budget::on_checker_stack`)");
        }
    };
    if positives.contains(&Rule::string) && text[classic..].starts_with('"') {
        return unterminated_string(source, classic);
    }
    // pest records the tokens it tried at the farthest position it reached;
    // they are the most precise, unless all it tried there was to continue a
    // word (a keyword seen where a name was expected), in which case the
    // rules tried where that word starts say more.
    let farthest = e
        .parse_attempts()
        .filter(|a| a.max_position >= classic)
        .and_then(|a| {
            let after_word = text[..a.max_position]
                .chars()
                .next_back()
                .is_some_and(is_ident_char);
            let tokens: Vec<String> = a.expected_tokens().iter().map(|t| t.to_string()).collect();
            let expected = describe_tokens(&tokens, after_word);
            let rules: Vec<Rule> = a
                .call_stacks()
                .iter()
                .filter_map(|c| c.deepest.get_rule().copied())
                .collect();
            (!expected.is_empty()).then_some((a.max_position, expected, rules))
        });
    let (offset, mut expected, rules) = farthest.unwrap_or_else(|| {
        let mut expected: Vec<String> = positives
            .iter()
            .filter_map(|r| describe(*r))
            .map(String::from)
            .collect();
        if at_statement_start(&positives) {
            expected.push("a new statement".into());
        }
        expected.sort();
        expected.dedup();
        (classic, expected, positives.clone())
    });
    if ward {
        expected.retain(|w| !RULE_FILE_ONLY.contains(&w.as_str()));
    }
    let (found, end) = found_at(text, offset);
    if ward {
        if let Some(error) = misspelt_keyword(source, offset) {
            return error;
        }
        if let Some(error) = unclosed_bracket(source, offset, end) {
            return error;
        }
    }
    let stray_expression =
        at_statement_start(&rules) && EXPRESSION_WORDS.contains(&&text[offset..end]);
    let message = if expected.is_empty() {
        format!("unexpected {found}")
    } else {
        format!("expected {}; found {found}", join_or(&expected))
    };
    let mut error = Error::at(ErrorKind::Syntax, source, Span::new(offset, end), message)
        .with_label("not expected here");
    for note in hints(&rules) {
        error = error.with_note(note);
    }
    let before = &text[..offset];
    if text[offset..].starts_with('_') {
        if before.ends_with('∂') || before.ends_with("del") {
            error = error.with_note(
                "a derivative is written with its index in brackets and the point it acts on: `∂[mu](x) <…>` (ASCII `del[mu](x)`), not `∂_mu`",
            );
        } else if before.ends_with('δ') || before.ends_with("delta") {
            error = error.with_note(
                "the Kronecker delta is written `δ[mu,nu]`, a δ-function `δ(x - x1)` (ASCII `delta`)",
            );
        }
    }
    if stray_expression {
        error = error.with_note(
            "an expression is written after `simplify`, `claim` or `let NAME =`, e.g. `simplify ∫[x in space] { … }`",
        );
    }
    error
}

/// Rules that are whole statements of a `.ward` file.
const STATEMENT_RULES: &[Rule] = &[
    Rule::dimension_decl,
    Rule::halfspace_decl,
    Rule::operator_decl,
    Rule::points_decl,
    Rule::parameters_decl,
    Rule::positive_decl,
    Rule::parallel_decl,
    Rule::rules_decl,
    Rule::simplify_stmt,
    Rule::claim_stmt,
    Rule::function_decl,
    Rule::killing_decl,
    Rule::let_stmt,
    Rule::classify_stmt,
    Rule::place_stmt,
    Rule::derivation_stmt,
];

/// Expected tokens that belong to rule files only (pattern variables,
/// splices, sums over insertions): never offered in a `.ward` file.
const RULE_FILE_ONLY: &[&str] = &["`...`", "`?`", "`sum`", "a rule variable like `?x`"];

/// A word that starts a line, is no keyword, and is one or two letters from
/// a statement keyword (`scalr O dim 1`), on the line of the error or on a
/// line above it back to the last line that starts with a keyword: the
/// parser read it as a name and stopped later, so the error says what it
/// probably is.
fn misspelt_keyword(source: &Arc<Source>, offset: usize) -> Option<Error> {
    let text = source.text.as_str();
    let mut start = text[..offset].rfind('\n').map_or(0, |i| i + 1);
    loop {
        let line = &text[start..];
        let indent = line.len() - line.trim_start_matches([' ', '\t']).len();
        let word_start = start + indent;
        let word_len = text[word_start..]
            .find(|c: char| !is_ident_char(c))
            .unwrap_or(text.len() - word_start);
        let word = &text[word_start..word_start + word_len];
        if STATEMENT_STARTS.contains(&word) {
            return None;
        }
        let allowed = if word.chars().count() <= 5 { 1 } else { 2 };
        let nearest = (word.chars().count() >= 3)
            .then(|| {
                STATEMENT_STARTS
                    .iter()
                    .map(|k| (crate::derive::edit_distance(word, k), *k))
                    .filter(|(d, _)| *d <= allowed)
                    .min()
            })
            .flatten();
        if let Some((_, keyword)) = nearest {
            let (line, col) = source.line_col(offset);
            return Some(
                Error::at(
                    ErrorKind::Syntax,
                    source,
                    Span::new(word_start, word_start + word.len()),
                    format!("`{word}` is not a statement; did you mean `{keyword}`?"),
                )
                .with_label(format!("did you mean `{keyword}`?"))
                .with_note(format!(
                    "read as a name, `{word}` made this line part of the statement before, and the parser stopped at line {line}, column {col}"
                )),
            );
        }
        if start == 0 {
            return None;
        }
        start = text[..start - 1].rfind('\n').map_or(0, |i| i + 1);
    }
}

/// A bracket (`<`, `⟨`, `{`, `(`) still open where the parser met the next
/// statement or the end of the file: the error is reported at the opener,
/// where the fix goes, with the place the parser stopped underlined too.
fn unclosed_bracket(source: &Arc<Source>, offset: usize, end: usize) -> Option<Error> {
    let text = source.text.as_str();
    let rest = &text[offset..end];
    if !(rest.is_empty() || STATEMENT_STARTS.contains(&rest)) {
        return None;
    }
    let mut open: Vec<(usize, char)> = Vec::new();
    let mut chars = text[..offset].char_indices();
    while let Some((i, c)) = chars.next() {
        match c {
            '#' => {
                for (_, c) in chars.by_ref() {
                    if c == '\n' {
                        break;
                    }
                }
            }
            '"' => {
                for (_, c) in chars.by_ref() {
                    if c == '"' || c == '\n' {
                        break;
                    }
                }
            }
            '<' | '⟨' | '{' | '(' => open.push((i, c)),
            '>' | '⟩' | '}' | ')' => {
                let opener = match c {
                    '>' | '⟩' => ['<', '⟨'],
                    '}' => ['{', '{'],
                    _ => ['(', '('],
                };
                if open.last().is_some_and(|(_, o)| opener.contains(o)) {
                    open.pop();
                }
            }
            _ => {}
        }
    }
    let (at, c) = *open.last()?;
    let (what, close) = match c {
        '<' => ("correlator", ">"),
        '⟨' => ("correlator", "⟩"),
        '{' => ("body", "}"),
        _ => ("bracket", ")"),
    };
    let there = if rest.is_empty() {
        "the file ends here".to_string()
    } else {
        format!("the next statement, `{rest}`, starts here")
    };
    Some(
        Error::at(
            ErrorKind::Syntax,
            source,
            Span::new(at, at + c.len_utf8()),
            format!("this {what} is never closed: `{close}` is missing"),
        )
        .with_label(format!("`{c}` opened here"))
        .with_secondary(Span::new(offset, end), there)
        .with_note(format!("close it with `{close}` where the {what} ends")),
    )
}

/// Tokens that start an expression but never a statement.
const EXPRESSION_WORDS: &[&str] = &[
    "∫", "int", "∮", "oint", "∂", "del", "<", "⟨", "δ", "delta", "|", "(",
];

/// True when the parser was between statements: it tried several kinds of
/// statement at once.
fn at_statement_start(rules: &[Rule]) -> bool {
    rules.iter().filter(|r| STATEMENT_RULES.contains(r)).count() >= 2
}

/// True when the first word, after white space and comments, is
/// `ruleset`, or there is none.
fn starts_with_ruleset(text: &str) -> bool {
    let mut rest = text;
    loop {
        rest = rest.trim_start();
        match rest.strip_prefix('#') {
            Some(comment) => rest = comment.split_once('\n').map_or("", |(_, after)| after),
            None => break,
        }
    }
    rest.is_empty()
        || rest
            .strip_prefix("ruleset")
            .is_some_and(|after| !after.starts_with(is_ident_char))
}

/// Refuses text whose brackets nest more than [`MAX_DEPTH`] deep before
/// the grammar sees it, so that the parser's recursion stays bounded: `(`
/// and `{` open, `)` and `}` close; comments and quoted paths are skipped.
fn check_nesting(source: &Arc<Source>) -> Result<()> {
    let mut depth = 0usize;
    let mut chars = source.text.char_indices();
    while let Some((i, c)) = chars.next() {
        match c {
            '#' => {
                for (_, c) in chars.by_ref() {
                    if c == '\n' {
                        break;
                    }
                }
            }
            '"' => {
                for (_, c) in chars.by_ref() {
                    if c == '"' || c == '\n' {
                        break;
                    }
                }
            }
            '(' | '{' => {
                depth += 1;
                if depth > MAX_DEPTH {
                    return Err(too_deep(source, i));
                }
            }
            ')' | '}' => depth = depth.saturating_sub(1),
            _ => {}
        }
    }
    Ok(())
}

/// The error for a construct that starts at `offset` one level past
/// [`MAX_DEPTH`].
fn too_deep(source: &Arc<Source>, offset: usize) -> Error {
    let len = source.text[offset..]
        .chars()
        .next()
        .map_or(0, char::len_utf8);
    Error::at(
        ErrorKind::Limit,
        source,
        Span::new(offset, offset + len),
        format!("nested too deeply (limit {MAX_DEPTH})"),
    )
    .with_label("this level is one too many")
    .with_note(format!(
        "brackets, calls, derivatives, signs and powers nest at most {MAX_DEPTH} deep"
    ))
}

/// A quoted path whose closing quote is missing on its line.
fn unterminated_string(source: &Arc<Source>, start: usize) -> Error {
    let rest = &source.text[start..];
    let end = start + rest.find('\n').unwrap_or(rest.len());
    Error::at(
        ErrorKind::Syntax,
        source,
        Span::new(start, end),
        "unterminated quoted path",
    )
    .with_label("no closing `\"` on this line")
    .with_note("write the path on one line between quotes, e.g. `rules \"extra.rules\"`")
}

/// True for characters that continue a name.
fn is_ident_char(c: char) -> bool {
    c == '_' || (c.is_alphanumeric() && c != 'δ' && c != '∂')
}

/// The text at `offset` as the error reports it (a whole word, a number or
/// one character), and the end of its span.
fn found_at(text: &str, offset: usize) -> (String, usize) {
    let rest = &text[offset..];
    let Some(first) = rest.chars().next() else {
        return ("end of file".to_string(), offset);
    };
    let len = if first.is_ascii_digit() {
        rest.find(|c: char| !c.is_ascii_digit() && c != '.')
            .unwrap_or(rest.len())
    } else if is_ident_char(first) {
        rest.find(|c: char| !is_ident_char(c)).unwrap_or(rest.len())
    } else {
        first.len_utf8()
    };
    (format!("`{}`", &rest[..len]), offset + len)
}

/// Tokens that can start a primary expression.
const OPERAND_STARTS: &[&str] = &[
    "(", "<", "⟨", "∂", "del", "δ", "delta", "n", "sum", "?", "a name", "a number", "|", "∫",
    "int", "∮", "oint", "par", "₂F₁",
];
/// Keywords that start a statement of a `.ward` file.
pub(crate) const STATEMENT_STARTS: &[&str] = &[
    "dimension",
    "halfspace",
    "boundary",
    "scalar",
    "tensor",
    "vector",
    "points",
    "parameters",
    "positive",
    "parallel",
    "rules",
    "simplify",
    "claim",
    "function",
    "let",
    "killing",
    "classify",
    "place",
    "model",
    "coefficient",
    "values",
    "evaluate",
    "compare",
    "solve",
    "flux",
    "sample",
    "tolerance",
    "scan",
    "decompose",
    "structures",
    "perturb",
    "derivation",
    "slip",
];
/// Infix operators.
const INFIX: &[&str] = &["+", "-", "*", "/", "^"];

/// A reader's list of the tokens pest expected: white space, comments and
/// the continuation of a word just read are left out, character ranges
/// become "a name" or "a number", and long lists are summarised.
fn describe_tokens(tokens: &[String], after_word: bool) -> Vec<String> {
    let mut words: Vec<String> = Vec::new();
    for token in tokens {
        let word = match token.as_str() {
            t if t.trim().is_empty() || t == "#" || t == "_" => continue,
            "a..z" | "A..Z" | "0..9" | "BUILTIN_RULE" if after_word => continue,
            "a..z" | "A..Z" | "BUILTIN_RULE" => "a name".to_string(),
            "0..9" => "a number".to_string(),
            t if t.contains("..") && t.chars().count() == 4 => continue,
            t => t.to_string(),
        };
        if !words.contains(&word) {
            words.push(word);
        }
    }
    words.sort();
    let has = |w: &str| words.iter().any(|x| x == w);
    let mut out: Vec<String> = Vec::new();
    // A name may start an operand: the whole family is expected.
    let operand = has("a name") && OPERAND_STARTS.iter().filter(|w| has(w)).count() >= 3;
    let after_operand = operand && has("*");
    let statement = STATEMENT_STARTS.iter().filter(|w| has(w)).count() >= 3;
    for w in &words {
        let w = w.as_str();
        if (operand && OPERAND_STARTS.contains(&w))
            || (after_operand && INFIX.contains(&w))
            || (operand && !after_operand && w == "-")
            || (statement && STATEMENT_STARTS.contains(&w))
        {
            continue;
        }
        out.push(match w {
            "a name" | "a number" => w.to_string(),
            _ => format!("`{w}`"),
        });
    }
    if after_operand {
        out.push("an operator (`+`, `-`, `*`, `/`, `^`)".into());
        out.push("another factor".into());
    } else if operand {
        out.push("an expression".into());
    }
    if statement {
        // Statements are expected only between statements, where the file
        // may also end.
        out.push("a new statement".into());
        out.push("end of file".into());
    }
    out
}

/// A note on the correct form of the construct the parser was inside.
fn hints(rules: &[Rule]) -> Vec<&'static str> {
    let mut out = Vec::new();
    // Between statements every kind of statement was tried: no single one
    // is meant.
    let between = at_statement_start(rules);
    for r in rules {
        if between && STATEMENT_RULES.contains(r) {
            continue;
        }
        let hint = match r {
            Rule::deriv | Rule::deriv_head => "a derivative takes a bracketed body: `∂[mu](x) <…>`, `∂[mu](x) { … }`, `∂[mu](x) ( … )` or another `∂`",
            Rule::halfspace_decl => "a half-space is declared as `halfspace y >= 0`, naming the normal coordinate",
            Rule::key | Rule::attribute | Rule::operator_decl => {
                "an operator is declared with its attributes, e.g. `scalar O dim Delta`"
            }
            Rule::corr_close => "a correlator `<…>` must be closed with `>` before the next statement",
            Rule::brace_close => "a body `{ … }` must be closed with `}` before the next statement",
            Rule::brace if !rules.contains(&Rule::deriv) => {
                "the body of an integral is written in braces: `∫[x in space] { … }`"
            }
            Rule::integral => "an integral reads `∫[x in REGION] { … }` (ASCII `int`), with REGION one of `space`, `halfspace`, `boundary` or `ball(x1, r)`",
            Rule::surface | Rule::surface_on => "a surface integral reads `∮[x on ball(x1, r)] { N[mu] … }` (ASCII `oint`)",
            Rule::region | Rule::region_ball | Rule::place_kind => {
                "a region is `space`, `halfspace`, `boundary` or `ball(x1, r)` (centre and radius)"
            }
            Rule::distance => "a distance is written `|x1 - x2|`, between two points, and a length `|x1|`",
            Rule::call | Rule::fun_orders => "a function is called with its arguments in parentheses: `F(u)`, `F'(u)`, `F[1,0](u, v)`, `xi(x1, x2)`, `F21(a, b; c; z)`",
            Rule::killing_decl
            | Rule::generator
            | Rule::gen_translation
            | Rule::gen_rotation
            | Rule::gen_mixing
            | Rule::gen_dilatation
            | Rule::gen_special
            | Rule::gen_vector => {
                "a Killing vector is declared as `killing eps translation a`, `rotation omega`, `rotation n e`, `dilatation lambda` or `special b`; add `parallel` for a vector or tensor along the boundary, or use `n` for the normal"
            }
            Rule::mixing_dir => "the rotation mixing n with a direction along the boundary names that direction: `killing eps rotation n e`",
            Rule::place_stmt => "a placement reads `place x2 inside ball(x1, r)` (or `outside`, `on`)",
            Rule::derivation_stmt | Rule::derivation_step => "a derivation reads `derivation NAME`, the starting expression, one `= STEP` per step (optionally `by RULE, …`), and closes with `end`",
            Rule::let_stmt | Rule::let_params => "a named expression reads `let G = EXPRESSION`, a function of t `let f(t) = EXPRESSION`",
            Rule::rule | Rule::conditions => "a rule reads `rule NAME [when CONDITIONS] from PATTERN to TEMPLATE`",
            _ => continue,
        };
        if !out.contains(&hint) {
            out.push(hint);
        }
    }
    out
}

/// A reader's name for grammar rules that are not literal tokens.
fn describe(r: Rule) -> Option<&'static str> {
    Some(match r {
        Rule::ident | Rule::name => "a name",
        Rule::number => "a number",
        Rule::var => "a rule variable like `?x`",
        Rule::key => "an attribute name",
        Rule::rule_name => "a rule name",
        Rule::string => "a quoted path",
        Rule::expr | Rule::primary => "an expression",
        Rule::point => "a point",
        Rule::index => "an index",
        Rule::op => "an insertion like `O(x)`",
        Rule::corr_close => "`>`",
        Rule::brace_close => "`}`",
        Rule::mixing_dir => "a name",
        Rule::surface_on => "`on`",
        Rule::region => "a region (`space`, `halfspace`, `boundary`, `ball(x1, r)`)",
        Rule::statement => "a statement (`dimension`, `points`, `simplify`, `claim`, …)",
        Rule::EOI => "end of file",
        _ => return None,
    })
}

fn join_or(items: &[String]) -> String {
    match items {
        [] => String::new(),
        [one] => one.clone(),
        [init @ .., last] => format!("{} or {}", init.join(", "), last),
    }
}

// ─────────────────────────── statements ───────────────────────────

fn span_of(pair: &Pair<Rule>) -> Span {
    Span::new(pair.as_span().start(), pair.as_span().end())
}

/// The span of a statement without the white space and comments pest
/// includes after its last part when it looks for an optional one.
fn statement_span(pair: &Pair<Rule>) -> Span {
    let span = span_of(pair);
    let end = pair
        .clone()
        .into_inner()
        .map(|p| p.as_span().end())
        .max()
        .unwrap_or(span.end);
    // Inner pairs may end after trailing white space; stop at the last
    // visible character.
    let text = &pair.get_input()[span.start..end];
    Span::new(span.start, span.start + text.trim_end().len())
}

fn parse_statement(source: &Arc<Source>, pair: Pair<Rule>) -> Result<Stmt> {
    let span = statement_span(&pair);
    let kind = pair.as_rule();
    let mut inner = pair.into_inner().peekable();
    Ok(match kind {
        Rule::dimension_decl => Stmt::Dimension(build_expr(source, next(&mut inner), 0)?),
        Rule::halfspace_decl => Stmt::Halfspace {
            coord: parse_name(next(&mut inner)),
        },
        Rule::operator_decl => {
            let boundary = inner.peek().map(|p| p.as_rule()) == Some(Rule::boundary_kw);
            if boundary {
                inner.next();
            }
            let kind = match next(&mut inner).as_str() {
                "vector" => OpKind::Vector,
                "tensor" => OpKind::Tensor,
                _ => OpKind::Scalar,
            };
            let name = parse_name(next(&mut inner));
            let mut attrs = Vec::new();
            for attr in inner {
                let mut parts = attr.into_inner().peekable();
                if parts.peek().map(|p| p.as_rule()) == Some(Rule::conserved_kw) {
                    // A flag: `conserved` stands for the attribute value 1.
                    let key = parse_name(next(&mut parts));
                    let value = Expr {
                        kind: ExprKind::Num(num_rational::BigRational::from_integer(1.into())),
                        span: key.span,
                    };
                    attrs.push((key, value));
                    continue;
                }
                let key = parse_name(next(&mut parts));
                let value = build_expr(source, next(&mut parts), 0)?;
                attrs.push((key, value));
            }
            Stmt::Operator {
                boundary,
                kind,
                name,
                attrs,
            }
        }
        Rule::points_decl => {
            let boundary = inner.peek().map(|p| p.as_rule()) == Some(Rule::boundary_kw);
            if boundary {
                inner.next();
            }
            Stmt::Points {
                boundary,
                names: inner.map(parse_name).collect(),
            }
        }
        Rule::parameters_decl => Stmt::Parameters(
            inner
                .map(|item| {
                    let mut parts = item.into_inner();
                    let name = parse_name(parts.next().expect("parameter name"));
                    let indices = parts
                        .next()
                        .map(|ix| ix.into_inner().map(parse_name).collect())
                        .unwrap_or_default();
                    (name, indices)
                })
                .collect(),
        ),
        Rule::positive_decl => Stmt::Positive(inner.map(parse_name).collect()),
        Rule::parallel_decl => Stmt::Parallel(inner.map(parse_name).collect()),
        Rule::rules_decl => {
            let string = next(&mut inner);
            let body = string.into_inner().next().map_or("", |p| p.as_str());
            Stmt::Rules {
                path: body.to_string(),
                span,
            }
        }
        Rule::simplify_stmt => {
            let expr = build_expr(source, next(&mut inner), 0)?;
            let expect = match inner.next() {
                Some(p) => Some(build_expr(source, p, 0)?),
                None => None,
            };
            Stmt::Simplify { expr, expect, span }
        }
        Rule::function_decl => Stmt::Functions(inner.map(parse_name).collect()),
        Rule::let_stmt => {
            let name = parse_name(next(&mut inner));
            let mut params = Vec::new();
            let mut body = next(&mut inner);
            if body.as_rule() == Rule::let_params {
                params = body.into_inner().map(parse_name).collect();
                body = next(&mut inner);
            }
            let expr = build_expr(source, body, 0)?;
            Stmt::Let { name, params, expr }
        }
        Rule::classify_stmt => Stmt::Classify {
            name: parse_name(next(&mut inner)),
            span,
        },
        Rule::place_stmt => {
            let first = next(&mut inner);
            if first.as_rule() == Rule::place_ball {
                let ball = next(&mut first.into_inner());
                let region_span = span_of(&ball);
                let mut parts = ball.into_inner();
                let center = parse_point(next(&mut parts));
                let radius = build_expr(source, next(&mut parts), 0)?;
                return Ok(Stmt::PlaceBall {
                    region: RegionRef {
                        kind: RegionKind::Ball(center, Box::new(radius)),
                        span: region_span,
                    },
                    span,
                });
            }
            let point = parse_point(first);
            let what = next(&mut inner);
            if what.as_rule() == Rule::place_at {
                return Ok(Stmt::Position {
                    point,
                    coords: what
                        .into_inner()
                        .map(|p| build_expr(source, p, 0))
                        .collect::<Result<_>>()?,
                    span,
                });
            }
            let kind = match what.as_str() {
                "inside" => PlaceKind::Inside,
                "outside" => PlaceKind::Outside,
                _ => PlaceKind::On,
            };
            let region = parse_region(source, next(&mut inner), 0)?;
            Stmt::Place {
                point,
                kind,
                region,
                span,
            }
        }
        Rule::model_stmt => {
            let model = next(&mut inner);
            let spec = if model.as_rule() == Rule::model_gff {
                ModelSpec::Gff {
                    wall: model.into_inner().next().map(|w| w.as_str().to_string()),
                }
            } else if model.as_rule() == Rule::model_conformal {
                ModelSpec::Conformal {
                    y_convention: model.into_inner().next().is_some_and(|c| c.as_str() == "y"),
                }
            } else {
                let mut wall = None;
                let mut unimproved = false;
                let mut complex = false;
                let mut fields = Vec::new();
                let mut reflection = None;
                let mut coupling = None;
                for part in model.into_inner() {
                    match part.as_rule() {
                        Rule::wall_kind => wall = Some(part.as_str().to_string()),
                        Rule::unimproved => unimproved = true,
                        Rule::complex_kw => complex = true,
                        Rule::reflection | Rule::coupling => {
                            let which = part.as_rule();
                            let value = next(&mut part.into_inner());
                            let expr = climb(source, &mut value.into_inner().peekable(), 0, 0)?;
                            if which == Rule::reflection {
                                reflection = Some(Box::new(expr));
                            } else {
                                coupling = Some(Box::new(expr));
                            }
                        }
                        _ => {
                            let mut kv = part.into_inner();
                            let name = parse_name(next(&mut kv));
                            fields.push((name, next(&mut kv).as_str().to_string()));
                        }
                    }
                }
                ModelSpec::FreeScalar {
                    wall,
                    complex,
                    unimproved,
                    fields,
                    reflection,
                    coupling,
                }
            };
            Stmt::Model { spec, span }
        }
        Rule::coefficient_stmt => {
            let mut names = Vec::new();
            let mut value = None;
            for part in inner {
                match part.as_rule() {
                    Rule::ident => names.push(parse_name(part)),
                    Rule::expr => value = Some(build_expr(source, part, 0)?),
                    _ => {}
                }
            }
            let value = value.expect("the grammar requires a value");
            Stmt::Coefficient { names, value, span }
        }
        Rule::values_stmt => Stmt::Values(
            inner
                .map(|item| {
                    let mut kv = item.into_inner();
                    let name = parse_name(next(&mut kv));
                    let value = next(&mut kv);
                    let exprs = if value.as_rule() == Rule::value_tuple {
                        value
                            .into_inner()
                            .map(|p| build_expr(source, p, 0))
                            .collect::<Result<_>>()?
                    } else {
                        vec![build_expr(source, value, 0)?]
                    };
                    Ok((name, exprs))
                })
                .collect::<Result<_>>()?,
        ),
        Rule::evaluate_stmt => Stmt::Evaluate {
            expr: build_expr(source, next(&mut inner), 0)?,
            span,
        },
        Rule::solve_stmt => {
            let unknown = parse_name(next(&mut inner));
            let lhs = build_expr(source, next(&mut inner), 0)?;
            let rhs = build_expr(source, next(&mut inner), 0)?;
            Stmt::Solve {
                unknown,
                lhs,
                rhs,
                span,
            }
        }
        Rule::structures_stmt => {
            let corr = build_expr(source, next(&mut inner), 0)?;
            Stmt::Structures {
                corr,
                fit: false,
                output: None,
                span,
            }
        }
        Rule::decompose_structures_stmt => {
            let corr = build_expr(source, next(&mut inner), 0)?;
            let output = inner.next().map(|string| output_name(&string));
            Stmt::Structures {
                corr,
                fit: true,
                output,
                span,
            }
        }
        Rule::decompose_stmt => {
            let corr = build_expr(source, next(&mut inner), 0)?;
            let which = next(&mut inner);
            let tower = |p: pest::iterators::Pair<'_, Rule>| -> Result<(Expr, Expr, Option<Expr>)> {
                let mut t = p.into_inner();
                let from = build_expr(source, next(&mut t), 0)?;
                let to = build_expr(source, next(&mut t), 0)?;
                let step = match t.next() {
                    Some(p) => Some(build_expr(source, p, 0)?),
                    None => None,
                };
                Ok((from, to, step))
            };
            if which.as_rule() == Rule::s_channel {
                let mut t = which.into_inner();
                let twist = tower(next(&mut t))?;
                let spin = tower(next(&mut t))?;
                let externals = match t.next() {
                    Some(p) => {
                        let mut e = p.into_inner();
                        let a = build_expr(source, next(&mut e), 0)?;
                        let b = build_expr(source, next(&mut e), 0)?;
                        Some(Box::new((a, b)))
                    }
                    None => None,
                };
                let output = inner.next().map(|string| output_name(&string));
                return Ok(Stmt::Decompose {
                    corr,
                    channel: Channel::SChannel,
                    dims: BlockDims::TwistSpin(Box::new([twist, spin]), externals),
                    output,
                    span,
                });
            }
            let channel = match which.as_str() {
                "bulk" => Channel::Bulk,
                _ => Channel::Boundary,
            };
            let dims_pair = next(&mut inner);
            let mut parts = dims_pair.into_inner();
            let first = next(&mut parts);
            let dims = if first.as_rule() == Rule::block_tower {
                let mut t = first.into_inner();
                let from = build_expr(source, next(&mut t), 0)?;
                let to = build_expr(source, next(&mut t), 0)?;
                let step = match t.next() {
                    Some(p) => Some(build_expr(source, p, 0)?),
                    None => None,
                };
                BlockDims::Tower(Box::new((from, to, step)))
            } else {
                let mut list = vec![build_expr(source, first, 0)?];
                for p in parts {
                    list.push(build_expr(source, p, 0)?);
                }
                BlockDims::List(list)
            };
            let output = inner.next().map(|string| output_name(&string));
            Stmt::Decompose {
                corr,
                channel,
                dims,
                output,
                span,
            }
        }
        Rule::scan_stmt => {
            let param = parse_name(next(&mut inner));
            let from = build_expr(source, next(&mut inner), 0)?;
            let to = build_expr(source, next(&mut inner), 0)?;
            let steps = parse_primary(source, next(&mut inner), 0)?;
            let lhs = build_expr(source, next(&mut inner), 0)?;
            let rhs = build_expr(source, next(&mut inner), 0)?;
            let output = inner.next().map(|string| output_name(&string));
            Stmt::Scan {
                param,
                from,
                to,
                steps,
                lhs,
                rhs,
                output,
                span,
            }
        }
        Rule::derivation_stmt => {
            let slip = inner.next_if(|p| p.as_rule() == Rule::slip_kw).is_some();
            let name = parse_name(next(&mut inner));
            let start = build_expr(source, next(&mut inner), 0)?;
            let mut steps = Vec::new();
            for step in inner {
                let mut parts = step.into_inner();
                let expr = build_expr(source, next(&mut parts), 0)?;
                steps.push((expr, parts.map(parse_name).collect()));
            }
            Stmt::Derivation {
                name,
                start,
                steps,
                slip,
                span,
            }
        }
        Rule::tolerance_stmt => {
            let value = build_expr(source, next(&mut inner), 0)?;
            Stmt::Tolerance { value, span }
        }
        Rule::sample_stmt => {
            let count = parse_primary(source, next(&mut inner), 0)?;
            let seed = parse_primary(source, next(&mut inner), 0)?;
            Stmt::Sample { count, seed, span }
        }
        Rule::flux_stmt => {
            let lhs = build_expr(source, next(&mut inner), 0)?;
            let rhs = build_expr(source, next(&mut inner), 0)?;
            let radius = build_expr(source, next(&mut inner), 0)?;
            Stmt::Flux {
                lhs,
                rhs,
                radius,
                span,
            }
        }
        Rule::perturb_stmt => {
            let corr = build_expr(source, next(&mut inner), 0)?;
            let value = next(&mut inner);
            let coupling = climb(source, &mut value.into_inner().peekable(), 0, 0)?;
            let mut operators = Vec::new();
            let mut points = Vec::new();
            let mut order = None;
            let mut expects = Vec::new();
            for part in inner {
                match part.as_rule() {
                    Rule::perturb_ops => operators.extend(part.into_inner().map(parse_name)),
                    Rule::perturb_points => points.extend(part.into_inner().map(parse_name)),
                    Rule::number => order = Some(parse_primary(source, part, 0)?),
                    Rule::perturb_expect => {
                        let mut parts = part.into_inner();
                        let first = next(&mut parts);
                        let which = if first.as_rule() == Rule::perturb_total {
                            None
                        } else {
                            Some(parse_primary(source, first, 0)?)
                        };
                        let expr = build_expr(source, next(&mut parts), 0)?;
                        expects.push((which, expr));
                    }
                    _ => {}
                }
            }
            let Some(order) = order else {
                return Err(Error::at(
                    ErrorKind::Syntax,
                    source,
                    span,
                    "`perturb` needs `to order N`",
                ));
            };
            Stmt::Perturb {
                corr,
                coupling,
                operators,
                points,
                order,
                expects,
                span,
            }
        }
        Rule::compare_stmt => {
            let lhs = build_expr(source, next(&mut inner), 0)?;
            let rhs = build_expr(source, next(&mut inner), 0)?;
            Stmt::Compare { lhs, rhs, span }
        }
        Rule::killing_decl => {
            let name = parse_name(next(&mut inner));
            let generator = parse_generator(next(&mut inner));
            Stmt::Killing {
                name,
                generator,
                span,
            }
        }
        Rule::claim_stmt => {
            let slip = inner.next_if(|p| p.as_rule() == Rule::slip_kw).is_some();
            let lhs = build_expr(source, next(&mut inner), 0)?;
            let rhs = build_expr(source, next(&mut inner), 0)?;
            Stmt::Claim {
                lhs,
                rhs,
                slip,
                span,
            }
        }
        other => unreachable_rule(other),
    })
}

fn parse_ruleset(source: &Arc<Source>, pair: Pair<Rule>) -> Result<RuleSet> {
    let mut inner = pair.into_inner();
    let name = parse_name(next(&mut inner));
    let rules = inner
        .map(|p| parse_rule_def(source, p))
        .collect::<Result<_>>()?;
    Ok(RuleSet { name, rules })
}

/// The file stem of `into "name"`, with its span.
fn output_name(string: &Pair<Rule>) -> (String, Span) {
    let body = string
        .clone()
        .into_inner()
        .next()
        .map_or("", |p| p.as_str());
    (body.to_string(), span_of(string))
}

fn parse_rule_def(source: &Arc<Source>, pair: Pair<Rule>) -> Result<ast::Rule> {
    let span = span_of(&pair);
    let mut inner = pair.into_inner().peekable();
    let name = parse_name(next(&mut inner));
    let mut conditions = Vec::new();
    if inner.peek().map(|p| p.as_rule()) == Some(Rule::conditions) {
        for c in next(&mut inner).into_inner() {
            conditions.push(parse_condition(c));
        }
    }
    let from = build_expr(source, next(&mut inner), 0)?;
    let to = build_expr(source, next(&mut inner), 0)?;
    Ok(ast::Rule {
        name,
        conditions,
        from,
        to,
        span,
    })
}

fn parse_condition(pair: Pair<Rule>) -> Condition {
    let span = span_of(&pair);
    let inner = pair
        .into_inner()
        .next()
        .expect("condition has one alternative");
    let kind = match inner.as_rule() {
        Rule::no_halfspace => ConditionKind::NoHalfspace,
        Rule::has_halfspace => ConditionKind::Halfspace,
        _ => {
            let mut parts = inner.into_inner();
            let var = parse_name(next(&mut parts));
            let what = next(&mut parts);
            match what.as_rule() {
                Rule::cond_has => ConditionKind::Has(var, parse_name(next(&mut what.into_inner()))),
                Rule::cond_spin => {
                    // At most three digits (the grammar), so the parse holds.
                    let digits = next(&mut what.into_inner());
                    ConditionKind::Is(var, Property::Spin(digits.as_str().parse().unwrap_or(0)))
                }
                _ => ConditionKind::Is(
                    var,
                    match what.as_str() {
                        "bulk" => Property::Bulk,
                        "boundary" => Property::Boundary,
                        "parallel" => Property::Parallel,
                        "normal" => Property::Normal,
                        "vector" => Property::Vector,
                        "conserved" => Property::Conserved,
                        "spinning" => Property::Spinning,
                        _ => Property::Scalar,
                    },
                ),
            }
        }
    };
    Condition { kind, span }
}

// ─────────────────────────── expressions ───────────────────────────

/// Binding power and operator of an infix token. The numbers are those of
/// a Pratt parser: sums 10, negation 20 (prefix), products and
/// juxtaposition 30, powers 40 (right-associative); `-a b` is `-(a b)`.
fn infix(token: Rule) -> Option<(u8, BinOp)> {
    match token {
        Rule::add => Some((10, BinOp::Add)),
        Rule::sub => Some((10, BinOp::Sub)),
        Rule::mul | Rule::implicit => Some((30, BinOp::Mul)),
        Rule::div => Some((30, BinOp::Div)),
        Rule::pow => Some((40, BinOp::Pow)),
        _ => None,
    }
}

/// Binding power of the prefix `-`.
const NEG: u8 = 20;

/// One level deeper, or an error at `span` past [`MAX_DEPTH`].
fn deeper(source: &Arc<Source>, depth: usize, span: Span) -> Result<usize> {
    if depth >= MAX_DEPTH {
        return Err(too_deep(source, span.start));
    }
    Ok(depth + 1)
}

/// Builds an expression from an `expr` pair (or any primary). Sums and
/// products are n-ary chains built in a loop, so a long sum is not a deep
/// tree; what does nest (brackets, calls, derivatives, negations, powers)
/// counts towards [`MAX_DEPTH`].
fn build_expr(source: &Arc<Source>, pair: Pair<Rule>, depth: usize) -> Result<Expr> {
    if pair.as_rule() != Rule::expr {
        return parse_primary(source, pair, depth);
    }
    climb(source, &mut pair.into_inner().peekable(), 0, depth)
}

/// Precedence climbing over the flat list of operands and operators of an
/// `expr`: the operand at the front and every operator that binds more
/// tightly than `min`.
fn climb<'i>(
    source: &Arc<Source>,
    tokens: &mut std::iter::Peekable<pest::iterators::Pairs<'i, Rule>>,
    min: u8,
    depth: usize,
) -> Result<Expr> {
    let first = tokens
        .next()
        .expect("the grammar puts an operand after every operator");
    let mut lhs = if first.as_rule() == Rule::neg {
        let sign = span_of(&first);
        let operand = climb(source, tokens, NEG - 1, deeper(source, depth, sign)?)?;
        Expr {
            span: sign.to(operand.span),
            kind: ExprKind::Neg(Box::new(operand)),
        }
    } else {
        parse_primary(source, first, depth)?
    };
    // The binding power of the chain `lhs` is, when this loop built it.
    let mut open: Option<u8> = None;
    while let Some((power, op)) = tokens.peek().and_then(|t| infix(t.as_rule())) {
        if power <= min {
            break;
        }
        let token = tokens.next().expect("peeked");
        if op == BinOp::Pow {
            let exponent = climb(
                source,
                tokens,
                power - 1,
                deeper(source, depth, span_of(&token))?,
            )?;
            lhs = Expr {
                span: lhs.span.to(exponent.span),
                kind: ExprKind::Binary {
                    op,
                    lhs: Box::new(lhs),
                    rhs: Box::new(exponent),
                },
            };
            open = None;
            continue;
        }
        let rhs = climb(source, tokens, power, depth)?;
        let span = lhs.span.to(rhs.span);
        match (&mut lhs.kind, open) {
            (ExprKind::Chain { rest, .. }, Some(p)) if p == power => {
                rest.push((op, rhs));
                lhs.span = span;
            }
            _ => {
                lhs = Expr {
                    span,
                    kind: ExprKind::Chain {
                        first: Box::new(lhs),
                        rest: vec![(op, rhs)],
                    },
                };
                open = Some(power);
            }
        }
    }
    Ok(lhs)
}

fn parse_primary(source: &Arc<Source>, pair: Pair<Rule>, depth: usize) -> Result<Expr> {
    let span = span_of(&pair);
    let which = pair.as_rule();
    let kind = match which {
        Rule::number => ExprKind::Num(parse_number(source, span)?),
        Rule::name => ExprKind::Name(parse_name(pair.into_inner().next().expect("name"))),
        Rule::var => ExprKind::Var(parse_name(pair)),
        Rule::attr => {
            let mut inner = pair.into_inner();
            let var = parse_name(next(&mut inner));
            let key = parse_name(next(&mut inner));
            ExprKind::Attr { var, key }
        }
        Rule::group | Rule::brace => {
            let depth = deeper(source, depth, span)?;
            return build_expr(source, pair.into_inner().next().expect("body"), depth);
        }
        Rule::expr => return build_expr(source, pair, depth),
        Rule::corr => {
            mixed_brackets(source, &pair)?;
            ExprKind::Corr(
                pair.into_inner()
                    .filter(|p| p.as_rule() != Rule::corr_close)
                    .map(|p| match p.as_rule() {
                        Rule::splice => {
                            Insertion::Splice(parse_name(p.into_inner().next().expect("var")))
                        }
                        _ => Insertion::Op(parse_op(p)),
                    })
                    .collect(),
            )
        }
        Rule::op => ExprKind::Op(parse_op(pair)),
        Rule::distance => {
            let mut inner = pair.into_inner();
            let p = parse_point(next(&mut inner));
            match inner.next() {
                Some(q) => ExprKind::Distance(p, parse_point(q)),
                None => ExprKind::Length(p),
            }
        }
        Rule::component => {
            let mut inner = pair.into_inner();
            let first = next(&mut inner);
            let (name, par) = if first.as_rule() == Rule::par_point {
                (parse_name(next(&mut first.into_inner())), true)
            } else {
                (parse_name(first), false)
            };
            ExprKind::Component {
                name,
                par,
                indices: inner.map(parse_name).collect(),
            }
        }
        Rule::call => {
            let depth = deeper(source, depth, span)?;
            let mut inner = pair.into_inner().peekable();
            let name = parse_name(next(&mut inner));
            let mut primes = 0;
            while inner.peek().map(|p| p.as_rule()) == Some(Rule::prime) {
                inner.next();
                primes += 1;
            }
            let mut orders = None;
            if inner.peek().map(|p| p.as_rule()) == Some(Rule::fun_orders) {
                let list = next(&mut inner)
                    .into_inner()
                    .map(|n| {
                        n.as_str().parse::<u32>().map_err(|_| {
                            Error::at(
                                ErrorKind::Syntax,
                                source,
                                span_of(&n),
                                "a count of derivatives is a small whole number",
                            )
                            .with_label("not a count")
                        })
                    })
                    .collect::<Result<Vec<u32>>>()?;
                orders = Some(list);
            }
            let mut args = Vec::new();
            let mut separators = Vec::new();
            for p in inner.flat_map(|p| p.into_inner()) {
                if p.as_rule() == Rule::arg_sep {
                    separators.push(p.as_str().chars().next().unwrap_or(','));
                } else {
                    args.push(build_expr(source, p, depth)?);
                }
            }
            ExprKind::Call {
                name,
                primes,
                orders,
                args,
                separators,
            }
        }
        Rule::integral | Rule::surface => {
            let depth = deeper(source, depth, span)?;
            let surface = which == Rule::surface;
            let mut inner = pair
                .into_inner()
                .filter(|p| p.as_rule() != Rule::surface_on);
            let var = parse_point(next(&mut inner));
            let region = parse_region(source, next(&mut inner), depth)?;
            let body = build_expr(
                source,
                next(&mut inner).into_inner().next().expect("integral body"),
                depth,
            )?;
            ExprKind::Integral {
                var,
                region,
                surface,
                body: Box::new(body),
            }
        }
        Rule::deriv => {
            // ∂[mu](x) ∂[nu](y) <…>: the heads in order, each one level
            // deeper, around the body.
            let mut heads = Vec::new();
            let mut body = None;
            let mut depth = depth;
            for part in pair.into_inner() {
                if part.as_rule() == Rule::deriv_head {
                    let head = span_of(&part);
                    depth = deeper(source, depth, head)?;
                    let mut inner = part.into_inner();
                    let index = parse_name(next(&mut inner));
                    let point = parse_point(next(&mut inner));
                    heads.push((head.start, index, point));
                } else {
                    body = Some(parse_primary(source, part, depth)?);
                }
            }
            let mut expr = body.expect("a derivative has a body");
            for (start, index, point) in heads.into_iter().rev() {
                expr = Expr {
                    span: Span::new(start, span.end),
                    kind: ExprKind::Deriv {
                        index,
                        point,
                        body: Box::new(expr),
                    },
                };
            }
            return Ok(expr);
        }
        Rule::kron => {
            let mut inner = pair.into_inner();
            ExprKind::Kron(parse_name(next(&mut inner)), parse_name(next(&mut inner)))
        }
        Rule::normal => ExprKind::Normal(parse_name(next(&mut pair.into_inner()))),
        Rule::delta_points => {
            let mut inner = pair.into_inner();
            ExprKind::DeltaPoints(parse_point(next(&mut inner)), parse_point(next(&mut inner)))
        }
        Rule::delta_normal => {
            let mut inner = pair.into_inner();
            let coord = parse_name(next(&mut inner));
            let point = parse_point(next(&mut inner));
            ExprKind::DeltaNormal { coord, point }
        }
        Rule::sum_over => {
            let depth = deeper(source, depth, span)?;
            let mut inner = pair.into_inner();
            let op = parse_name(next(&mut inner));
            let mut slot = None;
            if inner.peek().map(|p| p.as_rule()) == Some(Rule::sum_slot) {
                let mut names = next(&mut inner).into_inner();
                let from = parse_name(next(&mut names));
                let to = parse_name(next(&mut names));
                slot = Some((from, to));
            }
            let point = parse_name(next(&mut inner));
            let splice = parse_name(next(&mut inner));
            let mut rest = next(&mut inner);
            let mut filter = None;
            if rest.as_rule() == Rule::condition {
                filter = Some(parse_condition(rest));
                rest = next(&mut inner);
            }
            ExprKind::Sum {
                op,
                slot,
                point,
                splice,
                filter,
                body: Box::new(build_expr(source, rest, depth)?),
            }
        }
        other => unreachable_rule(other),
    };
    Ok(Expr { kind, span })
}

/// A correlator opened with `<` and closed with `⟩`, or the other way: an
/// error, so that a file keeps to one spelling and a stray `>` is not
/// taken for the end of a `⟨`.
fn mixed_brackets(source: &Arc<Source>, pair: &Pair<Rule>) -> Result<()> {
    let opener = pair.as_str().chars().next();
    let Some(close) = pair
        .clone()
        .into_inner()
        .find(|p| p.as_rule() == Rule::corr_close)
    else {
        return Ok(());
    };
    let want = match opener {
        Some('<') => ">",
        Some('⟨') => "⟩",
        _ => return Ok(()),
    };
    if close.as_str() == want {
        return Ok(());
    }
    let start = pair.as_span().start();
    Err(Error::at(
        ErrorKind::Syntax,
        source,
        span_of(&close),
        format!(
            "a correlator opened with `{}` is closed with `{}`",
            opener.unwrap_or('<'),
            close.as_str()
        ),
    )
    .with_label(format!("expected `{want}`"))
    .with_secondary(
        Span::new(start, start + opener.map_or(1, char::len_utf8)),
        "opened here",
    )
    .with_note("write `<…>` or `⟨…⟩`: the two spellings do not mix"))
}

fn parse_region(source: &Arc<Source>, pair: Pair<Rule>, depth: usize) -> Result<RegionRef> {
    let span = span_of(&pair);
    let inner = pair
        .into_inner()
        .next()
        .expect("region has one alternative");
    let kind = match inner.as_rule() {
        Rule::region_space => RegionKind::Space,
        Rule::region_halfspace => RegionKind::Halfspace,
        Rule::region_boundary => RegionKind::Boundary,
        _ => {
            let mut parts = inner.into_inner();
            let center = parse_point(next(&mut parts));
            let radius = build_expr(source, next(&mut parts), deeper(source, depth, span)?)?;
            RegionKind::Ball(center, Box::new(radius))
        }
    };
    Ok(RegionRef { kind, span })
}

fn parse_generator(pair: Pair<Rule>) -> Generator {
    let inner = pair
        .into_inner()
        .next()
        .expect("generator has one alternative");
    let which = inner.as_rule();
    let mut parts = inner.into_inner().peekable();
    match which {
        Rule::gen_translation => Generator::Translation(parse_vector_param(next(&mut parts))),
        Rule::gen_special => Generator::Special(parse_vector_param(next(&mut parts))),
        Rule::gen_dilatation => Generator::Dilatation(parse_name(next(&mut parts))),
        _ => {
            let first = next(&mut parts);
            if first.as_rule() == Rule::gen_mixing {
                let mut mixing = first.into_inner();
                next(&mut mixing);
                Generator::Mixing(parse_name(next(&mut mixing)))
            } else {
                Generator::Rotation {
                    omega: parse_name(first),
                    parallel: parts.next().is_some(),
                }
            }
        }
    }
}

fn parse_vector_param(pair: Pair<Rule>) -> VectorParam {
    let mut parts = pair.into_inner();
    let first = next(&mut parts);
    // The word itself: the `parallel_kw` pair may end after white space.
    let parallel_kw = parts
        .next()
        .map(|p| span_of(&p.clone().into_inner().next().unwrap_or(p)));
    let parallel = parallel_kw.is_some();
    if first.as_rule() == Rule::normal_kw {
        VectorParam::Normal {
            span: span_of(&first),
            parallel: parallel_kw,
        }
    } else {
        VectorParam::Named {
            name: parse_name(first),
            parallel,
        }
    }
}

fn parse_op(pair: Pair<Rule>) -> OpRef {
    let span = span_of(&pair);
    // The name, then the children of `op_tail`.
    let mut inner = pair
        .into_inner()
        .flat_map(|p| match p.as_rule() {
            Rule::op_tail => p
                .into_inner()
                .flat_map(|q| match q.as_rule() {
                    Rule::op_at => q.into_inner().collect::<Vec<_>>(),
                    _ => vec![q],
                })
                .collect::<Vec<_>>(),
            _ => vec![p],
        })
        .peekable();
    let name = parse_name(next(&mut inner));
    let mut indices = Vec::new();
    if inner.peek().map(|p| p.as_rule()) == Some(Rule::indices) {
        indices = next(&mut inner).into_inner().map(parse_name).collect();
    }
    let point = parse_point(next(&mut inner));
    OpRef {
        name,
        indices,
        point,
        span,
    }
}

fn parse_point(pair: Pair<Rule>) -> PointRef {
    let span = span_of(&pair);
    let inner = pair.into_inner().next().expect("point has one alternative");
    match inner.as_rule() {
        Rule::par_point => PointRef {
            name: parse_name(inner.into_inner().next().expect("par point name")),
            par: true,
            span,
        },
        _ => PointRef {
            name: parse_name(inner),
            par: false,
            span,
        },
    }
}

/// Names, indices and variables: `index`, `ident`, `var`, `key`, `rule_name`.
fn parse_name(pair: Pair<Rule>) -> Name {
    let span = span_of(&pair);
    match pair.as_rule() {
        Rule::index => parse_name(pair.into_inner().next().expect("index alternative")),
        Rule::var => Name {
            text: pair.as_str()[1..].to_string(),
            is_var: true,
            span,
        },
        _ => Name {
            text: pair.as_str().to_string(),
            is_var: false,
            span,
        },
    }
}

/// Reads `12`, `1.25` or `1.59e-1` exactly; at most [`MAX_DIGITS`] digits
/// and a power of ten at most [`MAX_DIGITS`] either way.
fn parse_number(source: &Arc<Source>, span: Span) -> Result<BigRational> {
    let text = &source.text[span.start..span.end];
    let (mantissa, exponent) = match text.find(['e', 'E']) {
        Some(i) => (&text[..i], Some(&text[i + 1..])),
        None => (text, None),
    };
    let digits = mantissa.len() - usize::from(mantissa.contains('.'));
    if digits > MAX_DIGITS {
        return Err(Error::at(
            ErrorKind::Limit,
            source,
            span,
            format!("number too long: {digits} digits (limit {MAX_DIGITS})"),
        )
        .with_label("this number"));
    }
    let mut value = match mantissa.split_once('.') {
        None => BigRational::from_integer(BigInt::from_str(mantissa).unwrap_or_default()),
        Some((int, frac)) => {
            let digits = format!("{int}{frac}");
            let numer = BigInt::from_str(&digits).unwrap_or_default();
            let denom = num_traits::pow(BigInt::from(10), frac.len());
            BigRational::new(numer, denom)
        }
    };
    if let Some(exponent) = exponent {
        let power = exponent
            .trim_start_matches('+')
            .parse::<i64>()
            .ok()
            .filter(|p| p.unsigned_abs() <= MAX_DIGITS as u64);
        let Some(power) = power else {
            return Err(Error::at(
                ErrorKind::Limit,
                source,
                span,
                format!("power of ten too large: {exponent} (limit ±{MAX_DIGITS})"),
            )
            .with_label("this number"));
        };
        let scale = num_traits::pow(BigInt::from(10), power.unsigned_abs() as usize);
        value = if power >= 0 {
            value * BigRational::from_integer(scale)
        } else {
            value / BigRational::from_integer(scale)
        };
    }
    Ok(value)
}

fn next<'i>(inner: &mut impl Iterator<Item = Pair<'i, Rule>>) -> Pair<'i, Rule> {
    inner
        .next()
        .expect("the grammar guarantees this child exists")
}

fn unreachable_rule(r: Rule) -> ! {
    unreachable!("grammar rule {r:?} is not an AST node")
}
