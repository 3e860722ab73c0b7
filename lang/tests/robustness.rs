//! No input panics the parser, checker, completer or inspector.

use icefield_lang::{is_complete, Session};
use proptest::prelude::*;

const FRAGMENTS: &[&str] = &[
    "lattice",
    "pyrochlore",
    "couplings",
    "nearest",
    "J_eff",
    "=",
    "1.8",
    "K",
    "µB",
    "Å",
    "scan",
    "T",
    "from",
    "to",
    "in",
    "steps",
    ",",
    "[",
    "]",
    "(",
    ")",
    "{",
    "}",
    "rhai",
    "plot",
    "against",
    "table",
    "column",
    ".",
    "\"",
    "#",
    "\n",
    " ",
    "measure",
    "energy",
    "seed",
    "-",
    "1e999",
    "unit",
    "along",
    "`",
    "'",
    "/*",
    "//",
    ";",
    "field",
    "B",
    "x",
];

fn exercise(code: &str, cursor: usize) {
    let session = Session::new();
    let _ = session.diagnose(code);
    let _ = is_complete(code);
    let _ = session.complete(code, cursor);
    let _ = session.inspect(code, cursor);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(400))]

    #[test]
    fn random_text_never_panics(code in "\\PC{0,80}", cursor in 0usize..100) {
        exercise(&code, cursor);
    }

    #[test]
    fn random_token_soup_never_panics(
        parts in proptest::collection::vec(proptest::sample::select(FRAGMENTS), 0..30),
        cursor in 0usize..200,
    ) {
        let code: String = parts.join(" ");
        exercise(&code, cursor);
        let tight: String = parts.concat();
        exercise(&tight, cursor);
    }
}

#[test]
fn deep_nesting_and_long_expressions_are_errors_not_crashes() {
    let session = Session::new();
    for n in [1000usize, 100_000] {
        for code in [
            format!("t = scan T at {}{}", "[".repeat(n), "]".repeat(n)),
            format!("column t.x = {}1{}", "(".repeat(n), ")".repeat(n)),
            format!("rhai {{ {}1{} }}", "(".repeat(n), ")".repeat(n)),
            format!("rhai {{ {}1{} }}", "{".repeat(n), "}".repeat(n)),
            format!("column t.x = 1{}", "+1".repeat(n)),
            format!("rhai {{ 1{} }}", "+1".repeat(n)),
        ] {
            let diagnostics = session.diagnose(&code);
            assert!(!diagnostics.is_empty(), "{}", &code[..40.min(code.len())]);
        }
    }
}
