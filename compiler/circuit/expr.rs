//! Evaluation of angle and number expressions.
//!
//! Real arithmetic in IEEE double precision while every value is real, so
//! that `sin(pi/6)` is the libm value and `asin(2)` a domain error; complex
//! arithmetic (num-complex) only once an imaginary literal or `i` enters,
//! which only matrix entries allow. Every failure is a located diagnostic:
//! division by zero, a literal too large for a double, a result that is not
//! finite, a function outside its domain.

use super::units::{self, Kind};
use crate::diagnostic::Diagnostic;
use crate::source::Span;
use crate::syntax::ast::{BinOp, Expr, ExprKind, Quantity};
use num_complex::Complex64;
use std::collections::BTreeMap;

/// The names an expression may read: definition parameters (their values
/// already in internal units) besides `pi` and, in matrices, `i`.
#[derive(Clone, Debug, Default)]
pub struct Scope {
    /// Each parameter's value in internal units and the kind its argument
    /// was written with (`None` for a bare number), so that `RY(t)` takes an
    /// angle given as `30 deg` and `RY(t deg)` on it is refused, not scaled twice.
    pub params: BTreeMap<String, (f64, Option<Kind>)>,
}

pub const FUNCTIONS: [&str; 9] = [
    "sqrt", "sin", "cos", "tan", "asin", "acos", "atan", "exp", "ln",
];

/// A value and the kind of quantity its units make it (`None`: a bare number).
#[derive(Clone, Copy, Debug)]
pub struct Value {
    pub z: Complex64,
    pub kind: Option<Kind>,
    /// Where the (first) unit of the value was written.
    pub unit_span: Option<Span>,
}

impl Value {
    fn bare(z: Complex64) -> Value {
        Value {
            z,
            kind: None,
            unit_span: None,
        }
    }
}

/// Evaluates a plain expression (matrix entries): no units. `complex`
/// allows `i` and imaginary literals.
pub fn eval(e: &Expr, scope: &Scope, complex: bool) -> Result<Complex64, Diagnostic> {
    let v = eval_value(e, scope, complex)?;
    if let (Some(k), Some(sp)) = (v.kind, v.unit_span) {
        return Err(Diagnostic::error(
            "wrong-unit",
            format!("a matrix entry is a plain number, not {}", k.describe()),
            sp,
            "a unit",
        )
        .with_hint("write the entries of a unitary without units"));
    }
    Ok(v.z)
}

fn kind_name(k: Option<Kind>) -> &'static str {
    k.map_or("a plain number", Kind::describe)
}

/// Evaluates an expression whose terms may carry units.
pub fn eval_value(e: &Expr, scope: &Scope, complex: bool) -> Result<Value, Diagnostic> {
    eval_value_in(e, scope, complex, None)
}

/// As [`eval_value`], knowing what kind the place expects, so that a unit of
/// the wrong kind is reported as such rather than as a sum that lacks units.
fn eval_value_in(
    e: &Expr,
    scope: &Scope,
    complex: bool,
    want: Option<Kind>,
) -> Result<Value, Diagnostic> {
    let v = match &e.kind {
        ExprKind::Number(text) => Value::bare(real(parse_literal(text, e)?)),
        ExprKind::Imaginary(text) => {
            if !complex {
                return Err(not_here(e));
            }
            Value::bare(Complex64::new(0.0, parse_literal(text, e)?))
        }
        ExprKind::Name(n) => match n.as_str() {
            "pi" => Value::bare(real(std::f64::consts::PI)),
            "i" if complex => Value::bare(Complex64::new(0.0, 1.0)),
            "i" => return Err(not_here(e)),
            _ => match scope.params.get(n) {
                Some(&(v, kind)) => Value {
                    z: real(v),
                    kind,
                    unit_span: kind.map(|_| e.span),
                },
                None => return Err(unknown_name(e, n, scope)),
            },
        },
        ExprKind::WithUnit {
            value,
            unit,
            unit_span,
        } => {
            let v = eval_value_in(value, scope, complex, want)?;
            if v.kind.is_some() {
                return Err(Diagnostic::error(
                    "wrong-unit",
                    "a unit follows a value that already has one",
                    *unit_span,
                    "second unit",
                )
                .with_label(v.unit_span.unwrap_or(value.span), "first unit")
                .with_hint(match &value.kind {
                    ExprKind::Name(n) if scope.params.contains_key(n) => format!("`{n}` already carries the unit it was given with: write `{n}`, not `{n} {}`", unit.as_str()),
                    _ => "write one unit per number, e.g. `30 deg`".to_owned(),
                }));
            }
            Value {
                z: v.z * units::scale(*unit),
                kind: Some(units::kind_of(*unit)),
                unit_span: Some(*unit_span),
            }
        }
        ExprKind::Neg(x) => {
            let v = eval_value_in(x, scope, complex, want)?;
            Value { z: -v.z, ..v }
        }
        ExprKind::Binary { op, lhs, rhs } => {
            let a = eval_value_in(lhs, scope, complex, want)?;
            let b = eval_value_in(rhs, scope, complex, want)?;
            let kind = combine(*op, &a, &b, e, lhs, rhs, want)?;
            let unit_span = a.unit_span.or(b.unit_span);
            let (a, b) = (a.z, b.z);
            let z = match op {
                BinOp::Add => a + b,
                BinOp::Sub => a - b,
                BinOp::Mul => a * b,
                BinOp::Div => {
                    if b == Complex64::new(0.0, 0.0) {
                        return Err(Diagnostic::error(
                            "division-by-zero",
                            "division by zero",
                            rhs.span,
                            "this is zero",
                        )
                        .with_label(e.span, "in this quotient"));
                    }
                    if is_real(a) && is_real(b) {
                        real(a.re / b.re)
                    } else {
                        a / b
                    }
                }
                BinOp::Pow => {
                    if is_real(a) && is_real(b) {
                        if a.re < 0.0 && b.re.fract() != 0.0 {
                            return Err(Diagnostic::error(
                                "domain",
                                format!(
                                    "a negative number to a fractional power, ({})^{}, is not real",
                                    fmt_real(a.re),
                                    fmt_real(b.re)
                                ),
                                e.span,
                                "not a real number",
                            ));
                        }
                        if a.re == 0.0 && b.re < 0.0 {
                            return Err(Diagnostic::error(
                                "division-by-zero",
                                "zero to a negative power",
                                e.span,
                                "divides by zero",
                            ));
                        }
                        real(a.re.powf(b.re))
                    } else {
                        a.powc(b)
                    }
                }
            };
            Value {
                z,
                kind,
                unit_span: if kind.is_some() { unit_span } else { None },
            }
        }
        ExprKind::Call { func, arg } => {
            let x = eval_value_in(arg, scope, complex, None)?;
            match x.kind {
                // Radians and fractions are dimensionless (SI Brochure, 9th
                // ed., 2019, section 2.3.3): functions take them as numbers.
                None | Some(Kind::Angle) | Some(Kind::Fraction) => {}
                Some(k) => {
                    return Err(Diagnostic::error("wrong-unit", format!("{}() takes a plain number, not {}", func.text, k.describe()), x.unit_span.unwrap_or(arg.span), "has a unit")
                        .with_hint("functions take plain numbers, angles or fractions; a length or a power has no sine or logarithm"));
                }
            }
            Value::bare(call(&func.text, x.z, e, arg)?)
        }
    };
    if !v.z.re.is_finite() || !v.z.im.is_finite() {
        return Err(Diagnostic::error(
            "overflow",
            "the value is too large for a double-precision number",
            e.span,
            "overflows",
        )
        .with_hint("values beyond about 1.8e308 cannot be represented"));
    }
    Ok(v)
}

/// The kind of `a op b`: sums need one kind (a bare number counts as
/// radians or as a fraction beside an angle or a fraction); a product may
/// have one factor with a unit; a ratio of one kind is a plain number.
fn combine(
    op: BinOp,
    a: &Value,
    b: &Value,
    e: &Expr,
    lhs: &Expr,
    rhs: &Expr,
    want: Option<Kind>,
) -> Result<Option<Kind>, Diagnostic> {
    let mismatch = |msg: String, hint: &str| {
        Err(
            Diagnostic::error("wrong-unit", msg, e.span, "units do not combine")
                .with_label(lhs.span, kind_name(a.kind))
                .with_label(rhs.span, kind_name(b.kind))
                .with_hint(hint.to_owned()),
        )
    };
    match op {
        BinOp::Add | BinOp::Sub => match (a.kind, b.kind) {
            (x, y) if x == y => Ok(x),
            (None, Some(k)) | (Some(k), None) if k.unit_optional() => Ok(Some(k)),
            (None, Some(k)) | (Some(k), None) if want.is_some_and(|w| !units::accepts(w, k)) => {
                let w = want.expect("checked");
                let at = a.unit_span.or(b.unit_span).unwrap_or(e.span);
                Err(Diagnostic::error("wrong-unit", format!("{} is expected here, not {}", w.describe(), k.describe()), at, format!("{} unit", strip_article(k.describe())))
                    .with_hint(format!("this place takes {}", w.units())))
            }
            (None, Some(k)) | (Some(k), None) => Err(Diagnostic::error(
                "missing-unit",
                format!("every term of {} needs a unit", k.describe()),
                if a.kind.is_none() { lhs.span } else { rhs.span },
                "no unit",
            )
            .with_hint(format!("write a unit on each term, e.g. `1 mm + 20 um`, or scale the sum: `(2 + 3) nm`; {} takes {}", k.describe(), k.units()))),
            (None, None) => Ok(None),
            (Some(x), Some(y)) => mismatch(format!("cannot add {} and {}", x.describe(), y.describe()), "terms of a sum measure the same kind of quantity"),
        },
        BinOp::Mul => match (a.kind, b.kind) {
            (None, k) | (k, None) => Ok(k),
            _ => mismatch("cannot multiply two quantities that both have units".into(), "a unit goes on one factor: `2*15 deg`"),
        },
        BinOp::Div => match (a.kind, b.kind) {
            (k, None) => Ok(k),
            (Some(x), Some(y)) if x == y => Ok(None),
            _ => mismatch("cannot divide by a quantity with a unit".into(), "write the unit on the result: `(pi/3) rad`, `6/2 mm`"),
        },
        BinOp::Pow => match (a.kind, b.kind) {
            (None, None) => Ok(None),
            _ => mismatch("powers take plain numbers".into(), "raise the number to the power, then write its unit: `10^3 nm`"),
        },
    }
}

fn real(x: f64) -> Complex64 {
    Complex64::new(x, 0.0)
}

fn is_real(z: Complex64) -> bool {
    z.im == 0.0
}

fn parse_literal(text: &str, e: &Expr) -> Result<f64, Diagnostic> {
    match text.parse::<f64>() {
        Ok(v) if v.is_finite() => Ok(v),
        _ => Err(Diagnostic::error(
            "overflow",
            format!("the number {text} is too large for a double-precision number"),
            e.span,
            "too large",
        )
        .with_hint("values beyond about 1.8e308 cannot be represented")),
    }
}

fn not_here(e: &Expr) -> Diagnostic {
    Diagnostic::error(
        "complex-not-allowed",
        "imaginary numbers are allowed only in matrix entries",
        e.span,
        "imaginary",
    )
    .with_hint("angles, fractions and lengths are real numbers")
}

fn unknown_name(e: &Expr, n: &str, scope: &Scope) -> Diagnostic {
    let mut known: Vec<&str> = scope.params.keys().map(String::as_str).collect();
    known.push("pi");
    let d = Diagnostic::error(
        "unknown-name",
        format!("unknown name `{n}` in an expression"),
        e.span,
        "not defined here",
    );
    match super::suggest::nearest_name(n, known.iter().copied()) {
        Some(s) => d.with_hint(format!("did you mean `{s}`?")),
        None if scope.params.is_empty() => d.with_hint("an expression may use numbers, `pi`, and the functions sqrt sin cos tan asin acos atan exp ln"),
        None => d.with_hint(format!("names in scope: {}", known.join(", "))),
    }
}

fn call(func: &str, x: Complex64, e: &Expr, arg: &Expr) -> Result<Complex64, Diagnostic> {
    let domain = |what: &str| {
        Err(Diagnostic::error(
            "domain",
            format!("{func}({}) is undefined: {what}", fmt_real(x.re)),
            e.span,
            "outside the domain",
        )
        .with_label(arg.span, "this argument"))
    };
    if is_real(x) {
        let r = x.re;
        let v = match func {
            "sqrt" if r < 0.0 => return domain("the argument is negative"),
            "sqrt" => r.sqrt(),
            "sin" => r.sin(),
            "cos" => r.cos(),
            "tan" => {
                if r.cos().abs() < 1e-15 {
                    return domain("the tangent has a pole there");
                }
                r.tan()
            }
            "asin" if r.abs() > 1.0 => return domain("the argument is outside [-1, 1]"),
            "asin" => r.asin(),
            "acos" if r.abs() > 1.0 => return domain("the argument is outside [-1, 1]"),
            "acos" => r.acos(),
            "atan" => r.atan(),
            "exp" => r.exp(),
            "ln" if r <= 0.0 => return domain("the argument is not positive"),
            "ln" => r.ln(),
            _ => return Err(unknown_function(func, e)),
        };
        return Ok(real(v));
    }
    Ok(match func {
        "sqrt" => x.sqrt(),
        "sin" => x.sin(),
        "cos" => x.cos(),
        "tan" => x.tan(),
        "asin" => x.asin(),
        "acos" => x.acos(),
        "atan" => x.atan(),
        "exp" => x.exp(),
        "ln" => x.ln(),
        _ => return Err(unknown_function(func, e)),
    })
}

fn unknown_function(func: &str, e: &Expr) -> Diagnostic {
    let d = Diagnostic::error(
        "unknown-function",
        format!("unknown function `{func}`"),
        e.span,
        "not a function",
    );
    match super::suggest::nearest(func, FUNCTIONS.iter().copied()) {
        Some(s) => d.with_hint(format!("did you mean `{s}`?")),
        None => d.with_hint(format!("functions: {}", FUNCTIONS.join(" "))),
    }
}

fn strip_article(s: &str) -> &str {
    s.trim_start_matches("a ").trim_start_matches("an ")
}

pub fn fmt_real(x: f64) -> String {
    if x == x.trunc() && x.abs() < 1e15 {
        format!("{}", x as i64)
    } else {
        format!("{x}")
    }
}

/// Evaluates a quantity where a value of `want` kind is expected and returns
/// it in the internal unit; `what` names the place ("the angle of RY").
pub fn quantity(q: &Quantity, want: Kind, scope: &Scope, what: &str) -> Result<f64, Diagnostic> {
    quantity_with_kind(q, want, scope, what).map(|(v, _)| v)
}

/// As [`quantity`], also returning the kind the value was written with.
pub fn quantity_with_kind(
    q: &Quantity,
    want: Kind,
    scope: &Scope,
    what: &str,
) -> Result<(f64, Option<Kind>), Diagnostic> {
    let v = eval_value_in(&q.expr, scope, false, Some(want))?;
    let kind = v.kind;
    let value = match v.kind {
        None if !want.unit_optional() => Err(Diagnostic::error(
            "missing-unit",
            format!("{what} needs a unit"),
            q.span,
            format!("{} without a unit", want.describe()),
        )
        .with_hint(format!("write it with {}", want.units()))),
        None => Ok(v.z.re),
        Some(k) if !units::accepts(want, k) => Err(Diagnostic::error(
            "wrong-unit",
            format!("{what} is {}, not {}", want.describe(), k.describe()),
            v.unit_span.unwrap_or(q.span),
            format!("{} unit", strip_article(k.describe())),
        )
        .with_hint(format!("{what} takes {}", want.units()))),
        Some(_) => Ok(v.z.re),
    }?;
    Ok((value, kind))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::syntax::{self, ast::*};

    fn value(text: &str) -> Result<Complex64, Diagnostic> {
        let src =
            crate::source::Source::new("t", format!("chip t {{ unitary on m = [[{text}]] }}"));
        let ast = syntax::parse(&src).unwrap();
        let Item::Chip(c) = &ast.items[0] else {
            panic!()
        };
        let StmtKind::Unitary(u) = &c.body[0].kind else {
            panic!()
        };
        let MatrixSource::Literal(m) = &u.source else {
            panic!()
        };
        eval(&m.rows[0].entries[0], &Scope::default(), true)
    }

    fn close(text: &str, want: f64) {
        let v = value(text).unwrap();
        assert!(
            (v.re - want).abs() < 1e-15 && v.im == 0.0,
            "{text} = {v}, want {want}"
        );
    }

    // Identities from any table of elementary functions (e.g. Abramowitz &
    // Stegun, Handbook of Mathematical Functions, 1964, ch. 4).
    #[test]
    fn elementary_identities() {
        close("sin(pi/6)", 0.5);
        close("cos(pi/3)", 0.5);
        close("atan(1)", std::f64::consts::FRAC_PI_4);
        close("exp(ln(2))", 2.0);
        close("sqrt(2)^2", 2.0);
        close("asin(1)", std::f64::consts::FRAC_PI_2);
        close("acos(-1)", std::f64::consts::PI);
        close("tan(pi/4)", 1.0);
        close("2^3^2", 512.0);
        close("-2^2", -4.0);
        close("2^-1", 0.5);
        close("10 - 4 - 3", 3.0);
        close("12 / 3 / 2", 2.0);
        close("+2 - +1 + 2^+1", 3.0);
    }

    #[test]
    fn complex_entries() {
        let v = value("(1+i)/sqrt(2)").unwrap();
        assert!((v.re - v.im).abs() < 1e-16 && (v.norm() - 1.0).abs() < 1e-15);
        // e^{i pi} = -1 (Euler).
        let v = value("exp(i*pi)").unwrap();
        assert!((v.re + 1.0).abs() < 1e-15 && v.im.abs() < 1e-15);
        assert_eq!(value("0.5+0.5i").unwrap(), Complex64::new(0.5, 0.5));
    }

    #[test]
    fn failures_are_diagnostics() {
        assert_eq!(value("1/0").unwrap_err().code, "division-by-zero");
        assert_eq!(value("1e999").unwrap_err().code, "overflow");
        assert_eq!(value("10^400").unwrap_err().code, "overflow");
        assert_eq!(value("asin(2)").unwrap_err().code, "domain");
        assert_eq!(value("ln(0)").unwrap_err().code, "domain");
        assert_eq!(value("sqrt(-1)").unwrap_err().code, "domain");
        assert_eq!(value("(-8)^(1/3)").unwrap_err().code, "domain");
        assert_eq!(
            value("sinn(1)").unwrap_err().hint.as_deref(),
            Some("did you mean `sin`?")
        );
        assert_eq!(value("x").unwrap_err().code, "unknown-name");
    }

    fn qty(text: &str, want: Kind) -> Result<f64, Diagnostic> {
        let src = crate::source::Source::new("t", format!("chip t {{ G({text}) on q }}"));
        let ast = syntax::parse(&src).unwrap();
        let Item::Chip(c) = &ast.items[0] else {
            panic!()
        };
        let StmtKind::Apply(a) = &c.body[0].kind else {
            panic!()
        };
        quantity(&a.args.as_ref().unwrap()[0], want, &Scope::default(), "it")
    }

    // Units attach to the product before them; sums of terms with units add
    // in the internal unit (SI prefixes; 180 deg = pi rad).
    #[test]
    fn units_bind_to_their_term() {
        let pi = std::f64::consts::PI;
        assert!((qty("pi/2 + 30 deg", Kind::Angle).unwrap() - 2.0 * pi / 3.0).abs() < 1e-15);
        assert!(
            (qty("(pi/2 + 30) deg", Kind::Angle).unwrap() - (pi / 2.0 + 30.0) * pi / 180.0).abs()
                < 1e-15
        );
        assert!((qty("1 mm + 20 um", Kind::Length).unwrap() - 1020.0).abs() < 1e-12);
        assert!((qty("1/4 + 10%", Kind::Fraction).unwrap() - 0.35).abs() < 1e-15);
        assert!((qty("2*15 deg", Kind::Angle).unwrap() - pi / 6.0).abs() < 1e-15);
        assert!((qty("-(30 deg)*2", Kind::Angle).unwrap() + pi / 3.0).abs() < 1e-15);
        assert!((qty("asin(sin(30 deg))", Kind::Angle).unwrap() - pi / 6.0).abs() < 1e-15);
        assert!((qty("(3 mm)/(1 um)", Kind::Number).unwrap() - 3000.0).abs() < 1e-9);
        assert_eq!(
            qty("2 + 3 nm", Kind::Length).unwrap_err().code,
            "missing-unit"
        );
        assert_eq!(
            qty("1 mm + 3 deg", Kind::Length).unwrap_err().code,
            "wrong-unit"
        );
        assert_eq!(
            qty("(2 nm)*(3 nm)", Kind::Length).unwrap_err().code,
            "wrong-unit"
        );
        assert_eq!(qty("3 nm", Kind::Angle).unwrap_err().code, "wrong-unit");
        assert_eq!(qty("3", Kind::Length).unwrap_err().code, "missing-unit");
        assert_eq!(
            qty("sqrt(4 nm)", Kind::Length).unwrap_err().code,
            "wrong-unit"
        );
    }
}
