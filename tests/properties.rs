//! Property tests (proptest): the front end never panics on random or
//! mutated input, and the formatter is idempotent, keeps every comment and
//! round-trips generated circuits to the same IR. Case counts are bounded so
//! CI stays fast.

use proptest::prelude::*;
use trilane::circuit::NoFiles;
use trilane::diagnostic::{Style, render_all};
use trilane::source::Source;
use trilane::syntax::comments::comments;

/// A valid circuit to mutate: every statement kind.
const SEED: &str = r#"// seed
define tilt(t) on q { RY(t) on q  RZ(t/2) on q }
chip seed {
    process si220_wire // preset
    dualrail a, b
    mode m0, m1
    ancilla h = 1 photon
    launch a = |1>, m0 = 2 photons
    H on a
    CZ on a, b
    tilt(30 deg) on b
    rotate(pi/4, -pi/2) on a.0, a.1
    split(2/3) on m0, m1
    phase(0.1 rad) on m1
    unitary on m1, h = [[0, 1], [1, 0]]
    herald h = 1
    detect a, b, m0, m1
    require fidelity >= 0.95 at 90% yield
    require length <= 6 mm
    tolerance { edge_bias 2 nm, phase 0.01 rad }
    band 1540 nm to 1560 nm in 5 steps
}
"#;

fn survive(text: &str) {
    let src = Source::new("p.trl", text);
    match trilane::check(&src, &NoFiles) {
        Ok(p) => {
            let _ = render_all(&p.warnings, &src, Style::Plain);
        }
        Err(d) => {
            assert!(d.has_errors());
            let _ = render_all(&d, &src, Style::Plain);
        }
    }
    let _ = trilane::syntax::format_source(&src);
}

#[derive(Clone, Debug)]
enum Edit {
    Delete(usize, usize),
    Insert(usize, String),
    Replace(usize, char),
}

fn edit() -> impl Strategy<Value = Edit> {
    let snippet = prop_oneof![
        Just("(".to_owned()),
        Just(")".to_owned()),
        Just("{".to_owned()),
        Just("}".to_owned()),
        Just("[[".to_owned()),
        Just("//".to_owned()),
        Just("\"".to_owned()),
        Just(" on ".to_owned()),
        Just("1e999".to_owned()),
        Just("/0".to_owned()),
        Just("^".to_owned()),
        Just("\n".to_owned()),
        Just("define x on q { x on q }".to_owned()),
        "[ -~]{0,6}".prop_map(|s| s),
        any::<char>().prop_map(|c| c.to_string()),
    ];
    prop_oneof![
        (0..SEED.len(), 1usize..20).prop_map(|(a, n)| Edit::Delete(a, n)),
        (0..SEED.len(), snippet).prop_map(|(a, s)| Edit::Insert(a, s)),
        (0..SEED.len(), any::<char>()).prop_map(|(a, c)| Edit::Replace(a, c)),
    ]
}

fn apply(edits: &[Edit]) -> String {
    let mut s: Vec<char> = SEED.chars().collect();
    for e in edits {
        match e {
            Edit::Delete(a, n) => {
                let a = (*a).min(s.len());
                let b = (a + n).min(s.len());
                s.drain(a..b);
            }
            Edit::Insert(a, t) => {
                let a = (*a).min(s.len());
                s.splice(a..a, t.chars());
            }
            Edit::Replace(a, c) => {
                if let Some(x) = s.get_mut(*a) {
                    *x = *c;
                }
            }
        }
    }
    s.into_iter().collect()
}

// ---- generated valid circuits ------------------------------------------------

fn expr() -> impl Strategy<Value = String> {
    let leaf = prop_oneof![
        (0u32..1000).prop_map(|n| n.to_string()),
        (0u32..100, 1u32..100).prop_map(|(a, b)| format!("{a}.{b}")),
        Just("pi".to_owned()),
    ];
    leaf.prop_recursive(4, 24, 2, |inner| {
        prop_oneof![
            (
                inner.clone(),
                inner.clone(),
                prop::sample::select(vec!["+", "-", "*"])
            )
                .prop_map(|(a, b, op)| format!("{a} {op} {b}")),
            (inner.clone(), 1u32..9).prop_map(|(a, n)| format!("({a})/{n}")),
            inner.clone().prop_map(|a| format!("-({a})")),
            inner.clone().prop_map(|a| format!("sin({a})")),
            inner.clone().prop_map(|a| format!("({a})")),
            (inner, 1u32..4).prop_map(|(a, n)| format!("({a})^{n}")),
        ]
    })
}

fn comment() -> impl Strategy<Value = String> {
    "[a-z ,.()0-9]{0,20}".prop_map(|s| format!("// {s}"))
}

fn statement() -> impl Strategy<Value = String> {
    prop_oneof![
        (prop::sample::select(vec!["H", "X", "S", "TDG"]), prop::sample::select(vec!["a", "b", "c"])).prop_map(|(g, q)| format!("{g} on {q}")),
        (prop::sample::select(vec!["RX", "RY", "RZ", "P"]), expr(), prop::sample::select(vec!["", " deg", " rad"]), prop::sample::select(vec!["a", "b"]))
            .prop_map(|(g, e, u, q)| format!("{g}({e}{u}) on {q}")),
        prop::sample::select(vec!["CZ on a, b", "CNOT on b, c", "SWAP on a, c"]).prop_map(str::to_owned),
        (expr(), expr()).prop_map(|(t, p)| format!("rotate({t}, {p}) on m0, m1")),
        (1u32..100).prop_map(|c| format!("split({c}%) on m0, m1")),
        expr().prop_map(|x| format!("phase({x}) on m1")),
        Just("unitary on m0, m1 = [[0, 1], [1, 0]]".to_owned()),
        Just("unitary on a.0 ... b.1 = [[1, 0, 0, 0], [0, 0.5+0.5i, 0.5-0.5i, 0], [0, 0.5-0.5i, 0.5+0.5i, 0], [0, 0, 0, 1]]".to_owned()),
        (1u32..99).prop_map(|f| format!("require fidelity >= 0.{f}")),
        (1u32..99, 1u32..99).prop_map(|(f, y)| format!("require success > {f}% at {y}% yield")),
        (1u32..20).prop_map(|l| format!("require length <= {l} mm")),
    ]
}

/// A chip with comments on their own lines, after code and at block ends,
/// and blank lines in between.
fn circuit() -> impl Strategy<Value = String> {
    let line = (
        statement(),
        prop::option::of(comment()),
        prop::option::of(comment()),
        any::<bool>(),
    );
    (
        prop::collection::vec(line, 1..12),
        prop::option::of(comment()),
        prop::option::of(comment()),
        "[ \t]{0,3}",
    )
        .prop_map(|(lines, head, end, pad)| {
            let mut s = String::new();
            if let Some(h) = head {
                s.push_str(&format!("{h}\n"));
            }
            s.push_str("chip gen {\n dualrail a, b, c\nmode m0,m1\n");
            for (stmt, before, after, blank) in lines {
                if let Some(b) = before {
                    s.push_str(&format!("{pad}{b}\n"));
                }
                s.push_str(&format!("{pad}{stmt}"));
                if let Some(a) = after {
                    s.push_str(&format!("{pad} {a}"));
                }
                s.push('\n');
                if blank {
                    s.push('\n');
                }
            }
            if let Some(e) = end {
                s.push_str(&format!("  {e}\n"));
            }
            s.push_str("}\n");
            s
        })
}

fn ir(text: &str) -> String {
    let p = trilane::check(&Source::new("g.trl", text), &NoFiles)
        .unwrap_or_else(|d| panic!("generated circuit does not elaborate:\n{text}\n{d:?}"));
    p.circuits.iter().map(|c| c.to_string()).collect()
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 192, failure_persistence: None, ..ProptestConfig::default() })]

    #[test]
    fn random_bytes_never_panic(bytes in prop::collection::vec(any::<u8>(), 0..400)) {
        let (text, _) = trilane::source::decode(&bytes);
        survive(&text);
    }

    #[test]
    fn mutated_circuits_never_panic(edits in prop::collection::vec(edit(), 1..6)) {
        survive(&apply(&edits));
    }

    #[test]
    fn fmt_is_idempotent_keeps_comments_and_the_circuit(text in circuit()) {
        let src = Source::new("g.trl", text.clone());
        let once = trilane::syntax::format_source(&src).unwrap_or_else(|d| panic!("{text}\n{d:?}"));
        let twice = trilane::syntax::format_source(&Source::new("g.trl", once.clone())).unwrap();
        prop_assert_eq!(&once, &twice);
        let before: Vec<String> = comments(&text).into_iter().map(|c| c.text).collect();
        let after: Vec<String> = comments(&once).into_iter().map(|c| c.text).collect();
        prop_assert_eq!(before, after);
        prop_assert_eq!(ir(&text), ir(&once));
    }
}
