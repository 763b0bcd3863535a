//! Parser and evaluator checks: precedence, associativity, errors.

use super::*;

fn names(list: &[&str]) -> Vec<String> {
    list.iter().map(|s| s.to_string()).collect()
}

fn value(text: &str, x: f64) -> f64 {
    parse(text, &names(&["x"])).unwrap().eval(&[x])
}

#[test]
fn power_is_right_associative() {
    // Convention of mathematical notation: a^b^c = a^(b^c), so 2^3^2 = 2^9.
    assert_eq!(value("2^3^2", 0.0), 512.0);
    assert_eq!(value("(2^3)^2", 0.0), 64.0);
}

#[test]
fn unary_minus_binds_looser_than_power() {
    // Convention: -x^2 = -(x^2), while (-x)^2 = x^2.
    assert_eq!(value("-x^2", 3.0), -9.0);
    assert_eq!(value("(-x)^2", 3.0), 9.0);
    assert_eq!(value("2^-1", 0.0), 0.5);
    assert_eq!(value("--x", 3.0), 3.0);
}

#[test]
fn products_bind_tighter_than_sums_and_associate_left() {
    // Arithmetic conventions: 1 + 2*3 = 7; 8/4/2 = (8/4)/2 = 1; 8-4-2 = 2.
    assert_eq!(value("1 + 2*3", 0.0), 7.0);
    assert_eq!(value("8/4/2", 0.0), 1.0);
    assert_eq!(value("8-4-2", 0.0), 2.0);
    assert_eq!(value("2*(3+4)", 0.0), 14.0);
}

#[test]
fn functions_and_numbers() {
    assert_eq!(value("sqrt(16) + abs(-2)", 0.0), 6.0);
    assert_eq!(value("min(3, x, 5)", 1.5), 1.5);
    assert_eq!(value("max(3, x)", 1.5), 3.0);
    assert_eq!(value("1.5e2 + 2E-1", 0.0), 150.2);
    assert_eq!(value("exp(0) + log(1) + sin(0) + tanh(0)", 0.0), 1.0);
    assert_eq!(value("cos(pi)", 0.0), -1.0);
    assert!((value("tan(pi/4)", 0.0) - 1.0).abs() < 1e-15);
}

#[test]
fn unknown_name_points_at_its_column() {
    let err = parse("2 + 0.8*x - 0.1*z", &names(&["x"])).unwrap_err();
    assert_eq!(err.column, 17);
    assert!(
        err.message.starts_with("unknown name \"z\""),
        "{}",
        err.message
    );
    let shown = err.to_string();
    assert!(
        shown.contains("at column 17\n    2 + 0.8*x - 0.1*z\n"),
        "{shown}"
    );
    assert!(
        shown.ends_with(&format!("\n    {}^", " ".repeat(16))),
        "{shown}"
    );
}

#[test]
fn unbalanced_parentheses_are_errors() {
    let open = parse("sin(x + 1", &names(&["x"])).unwrap_err();
    assert_eq!(open.column, 4, "the caret points at the unclosed \"(\"");
    assert!(open.message.contains("never closed"), "{}", open.message);
    let close = parse("(x + 1))", &names(&["x"])).unwrap_err();
    assert_eq!(close.column, 8);
    assert!(
        close.message.contains("unbalanced \")\""),
        "{}",
        close.message
    );
}

#[test]
fn other_mistakes_are_named() {
    let x = names(&["x"]);
    assert!(parse("2x", &x)
        .unwrap_err()
        .message
        .contains("expected an operator"));
    assert!(parse("x +", &x).unwrap_err().message.contains("ends where"));
    assert!(parse("sin x", &x)
        .unwrap_err()
        .message
        .contains("parentheses"));
    assert!(parse("max(x)", &x)
        .unwrap_err()
        .message
        .contains("two or more"));
    assert!(parse("sin(x, 1)", &x)
        .unwrap_err()
        .message
        .contains("one argument"));
    let bad = parse("x $ 2", &x).unwrap_err();
    assert_eq!(bad.column, 3);
    assert!(bad.message.contains("unexpected character"));
}

#[test]
fn undefined_values_propagate() {
    assert!(value("log(x)", -1.0).is_nan());
    assert!(value("max(log(x), 2)", -1.0).is_nan());
}
