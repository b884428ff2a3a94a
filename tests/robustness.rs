//! Hostile inputs never panic, never abort and always give a located
//! diagnostic (issue: "never a panic and never an abort, on any bytes").

use trilane::circuit::NoFiles;
use trilane::diagnostic::{Diagnostics, Style, render_all};
use trilane::source::Source;

fn errors(text: &str) -> Diagnostics {
    let src = Source::new("t.trl", text);
    let d = trilane::check(&src, &NoFiles).expect_err("an error was expected");
    // Rendering must not panic either, whatever the spans.
    let _ = render_all(&d, &src, Style::Plain);
    d
}

fn codes(d: &Diagnostics) -> Vec<&'static str> {
    d.iter().filter(|x| x.is_error()).map(|x| x.code).collect()
}

#[test]
fn twenty_thousand_nested_parentheses() {
    let text = format!(
        "chip deep {{ dualrail q  RZ({}1{}) on q }}",
        "(".repeat(20_000),
        ")".repeat(20_000)
    );
    assert_eq!(codes(&errors(&text)), ["nesting-too-deep"]);
    let text = format!(
        "chip deep {{ dualrail q  RZ({}1) on q }}",
        "(".repeat(20_000)
    );
    assert_eq!(codes(&errors(&text)), ["nesting-too-deep"]);
    let text = "{".repeat(100_000);
    assert_eq!(codes(&errors(&text)), ["nesting-too-deep"]);
}

#[test]
fn long_operator_chains_do_not_recurse() {
    // 20,000 exponentiations and unary minuses parse by loops, and the
    // expression-size limit keeps evaluation shallow.
    let text = format!("chip c {{ dualrail q  RZ({}1) on q }}", "2^".repeat(20_000));
    assert_eq!(codes(&errors(&text)), ["expression-too-large"]);
    let text = format!("chip c {{ dualrail q  RZ({}1) on q }}", "-".repeat(20_000));
    assert_eq!(codes(&errors(&text)), ["expression-too-large"]);
    let text = format!("chip c {{ dualrail q  RZ(1{}) on q }}", "+1".repeat(20_000));
    assert_eq!(codes(&errors(&text)), ["expression-too-large"]);
}

#[test]
fn huge_literal_and_division_by_zero() {
    let d = errors("chip c {\n dualrail q\n RZ(1e999) on q\n RX(1/(2-2)) on q\n}");
    assert_eq!(codes(&d), ["overflow", "division-by-zero"]);
    // The primary span of the division error is the zero divisor, line 4.
    let src = Source::new(
        "t",
        "chip c {\n dualrail q\n RZ(1e999) on q\n RX(1/(2-2)) on q\n}",
    );
    assert_eq!(src.line_col(d.0[1].span().start), (4, 7));
}

#[test]
fn exponential_definition_expansion_is_cut_off() {
    // d0 doubles into d1 and so on: 2^30 gates if unchecked.
    let mut text = String::from("define d30 on q { X on q }\n");
    for k in (0..30).rev() {
        text.push_str(&format!(
            "define d{k} on q {{ d{} on q  d{} on q }}\n",
            k + 1,
            k + 1
        ));
    }
    text.push_str("chip blow { dualrail q  d0 on q }\n");
    assert_eq!(codes(&errors(&text)), ["too-many-operations"]);
}

#[test]
fn a_100000_line_file_checks() {
    let mut text = String::from("chip long {\n    dualrail a, b\n");
    for k in 0..50_000 {
        text.push_str(&format!(
            "    RZ({k}*pi/1000) on a // step {k}\n    CZ on a, b\n"
        ));
    }
    text.push_str("}\n");
    assert!(text.lines().count() >= 100_000);
    let p = trilane::check(&Source::new("long.trl", text), &NoFiles).unwrap();
    assert_eq!(p.circuits[0].ops.len(), 100_000);
}

#[test]
fn every_byte_value_is_survivable() {
    // All 256 byte values, each after a valid prefix.
    for b in 0u8..=255 {
        let mut bytes = b"chip c { dualrail q  H on q ".to_vec();
        bytes.push(b);
        bytes.extend_from_slice(b" }");
        let (text, _) = trilane::source::decode(&bytes);
        let src = Source::new("t", text);
        if let Err(d) = trilane::check(&src, &NoFiles) {
            let _ = render_all(&d, &src, Style::Plain);
        }
    }
}

#[test]
fn empty_and_comment_only_files_say_there_is_no_chip() {
    assert_eq!(codes(&errors("")), ["no-chip"]);
    assert_eq!(codes(&errors("// nothing here\n")), ["no-chip"]);
}
