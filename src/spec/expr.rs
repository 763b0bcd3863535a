//! The `truth` of a simulation spec: a small arithmetic language over named
//! inputs, parsed by our own recursive-descent parser and evaluated with the
//! pure-Rust `libm` crate, so a spec stays data (it can never run code) and
//! the same expression gives the same bits on every platform.
//!
//! Grammar, loosest binding first (precedence climbing written out as one
//! function per level):
//!
//! ```text
//! sum     = product (("+" | "-") product)*        left-associative
//! product = unary (("*" | "/") unary)*            left-associative
//! unary   = ("-" | "+") unary | power
//! power   = primary ("^" unary)?                  right-associative
//! primary = number | name | name "(" sum ("," sum)* ")" | "(" sum ")"
//! ```
//!
//! So `2^3^2` is 2^(3^2) = 512, `-x^2` is −(x²), and `2^-1` is 0.5, the
//! usual conventions of mathematical notation. Names are the inputs, the
//! constant `pi`, and the functions sin cos tan exp log sqrt abs tanh (one
//! argument) and min max (two or more). Errors name the 1-based column of
//! the offending character and show it under a caret.

use std::fmt;

/// A one-argument function of the language.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Function {
    Sin,
    Cos,
    Tan,
    Exp,
    Log,
    Sqrt,
    Abs,
    Tanh,
}

/// A function over two or more arguments.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Fold {
    Min,
    Max,
}

/// Binary operators.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) enum Operator {
    Add,
    Subtract,
    Multiply,
    Divide,
    Power,
}

/// A parsed expression.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Expr {
    Number(f64),
    /// Index into the input names the expression was parsed against.
    Input(usize),
    Negate(Box<Expr>),
    Binary(Operator, Box<Expr>, Box<Expr>),
    Call(Function, Box<Expr>),
    Fold(Fold, Vec<Expr>),
}

/// The names of one-argument functions, for messages.
const FUNCTIONS: [(&str, Function); 8] = [
    ("sin", Function::Sin),
    ("cos", Function::Cos),
    ("tan", Function::Tan),
    ("exp", Function::Exp),
    ("log", Function::Log),
    ("sqrt", Function::Sqrt),
    ("abs", Function::Abs),
    ("tanh", Function::Tanh),
];

const FOLDS: [(&str, Fold); 2] = [("min", Fold::Min), ("max", Fold::Max)];

/// Named constants.
const CONSTANTS: [(&str, f64); 1] = [("pi", std::f64::consts::PI)];

/// Words the language reserves: no input may take one of these names.
pub(crate) fn reserved_names() -> Vec<&'static str> {
    FUNCTIONS
        .iter()
        .map(|(n, _)| *n)
        .chain(FOLDS.iter().map(|(n, _)| *n))
        .chain(CONSTANTS.iter().map(|(n, _)| *n))
        .collect()
}

/// A parse error at a 1-based character column of the expression.
#[derive(Debug, Clone, PartialEq, Eq)]
pub(crate) struct ParseError {
    pub(crate) column: usize,
    pub(crate) message: String,
    /// The expression text, shown with a caret under the column.
    pub(crate) text: String,
}

impl fmt::Display for ParseError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{} at column {}\n    {}\n    {}^",
            self.message,
            self.column,
            self.text,
            " ".repeat(self.column - 1)
        )
    }
}

#[derive(Debug, Clone, PartialEq)]
enum Token {
    Number(f64),
    Name(String),
    Plus,
    Minus,
    Star,
    Slash,
    Caret,
    Open,
    Close,
    Comma,
    End,
}

impl Token {
    fn describe(&self) -> String {
        match self {
            Token::Number(v) => format!("the number {v}"),
            Token::Name(n) => format!("the name \"{n}\""),
            Token::Plus => "\"+\"".into(),
            Token::Minus => "\"-\"".into(),
            Token::Star => "\"*\"".into(),
            Token::Slash => "\"/\"".into(),
            Token::Caret => "\"^\"".into(),
            Token::Open => "\"(\"".into(),
            Token::Close => "\")\"".into(),
            Token::Comma => "\",\"".into(),
            Token::End => "the end of the expression".into(),
        }
    }
}

/// Splits the text into tokens with their 1-based columns.
fn tokenize(text: &str) -> Result<Vec<(Token, usize)>, ParseError> {
    let chars: Vec<char> = text.chars().collect();
    let error = |column: usize, message: String| ParseError {
        column,
        message,
        text: text.to_string(),
    };
    let mut tokens = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let column = i + 1;
        if c.is_whitespace() {
            i += 1;
            continue;
        }
        let single = match c {
            '+' => Some(Token::Plus),
            '-' | '−' => Some(Token::Minus),
            '*' => Some(Token::Star),
            '/' => Some(Token::Slash),
            '^' => Some(Token::Caret),
            '(' => Some(Token::Open),
            ')' => Some(Token::Close),
            ',' => Some(Token::Comma),
            _ => None,
        };
        if let Some(token) = single {
            tokens.push((token, column));
            i += 1;
            continue;
        }
        if c.is_ascii_digit() || c == '.' {
            let start = i;
            while i < chars.len() && (chars[i].is_ascii_digit() || chars[i] == '.') {
                i += 1;
            }
            // An exponent: e or E, an optional sign, then digits.
            if i < chars.len() && (chars[i] == 'e' || chars[i] == 'E') {
                let mut j = i + 1;
                if j < chars.len() && (chars[j] == '+' || chars[j] == '-') {
                    j += 1;
                }
                if j < chars.len() && chars[j].is_ascii_digit() {
                    while j < chars.len() && chars[j].is_ascii_digit() {
                        j += 1;
                    }
                    i = j;
                }
            }
            let literal: String = chars[start..i].iter().collect();
            let value: f64 = literal
                .parse()
                .map_err(|_| error(column, format!("cannot read \"{literal}\" as a number")))?;
            tokens.push((Token::Number(value), column));
            continue;
        }
        if c.is_ascii_alphabetic() || c == '_' {
            let start = i;
            while i < chars.len() && (chars[i].is_ascii_alphanumeric() || chars[i] == '_') {
                i += 1;
            }
            tokens.push((Token::Name(chars[start..i].iter().collect()), column));
            continue;
        }
        return Err(error(
            column,
            format!("unexpected character \"{c}\" (allowed: numbers, names, + - * / ^ ( ) ,)"),
        ));
    }
    tokens.push((Token::End, chars.len() + 1));
    Ok(tokens)
}

/// Parses `text` against the input `names` (their order gives
/// [`Expr::Input`] indices).
pub(crate) fn parse(text: &str, names: &[String]) -> Result<Expr, ParseError> {
    let tokens = tokenize(text)?;
    let mut parser = Parser {
        tokens,
        at: 0,
        names,
        text,
        open: Vec::new(),
        depth: 0,
    };
    let expr = parser.sum()?;
    match parser.peek() {
        Token::End => Ok(expr),
        Token::Close => Err(parser.error_here("unbalanced \")\": no \"(\" is open here".into())),
        other => {
            let found = other.describe();
            Err(parser.error_here(format!("expected an operator, found {found}")))
        }
    }
}

struct Parser<'a> {
    tokens: Vec<(Token, usize)>,
    at: usize,
    names: &'a [String],
    text: &'a str,
    /// Columns of the parentheses currently open, innermost last.
    open: Vec<usize>,
    /// How deep the descent is (every nesting level passes through `unary`).
    depth: usize,
}

impl Parser<'_> {
    fn peek(&self) -> &Token {
        &self.tokens[self.at].0
    }

    fn column(&self) -> usize {
        self.tokens[self.at].1
    }

    fn advance(&mut self) -> (Token, usize) {
        let token = self.tokens[self.at].clone();
        if self.at + 1 < self.tokens.len() {
            self.at += 1;
        }
        token
    }

    fn error_at(&self, column: usize, message: String) -> ParseError {
        ParseError {
            column,
            message,
            text: self.text.to_string(),
        }
    }

    fn error_here(&self, message: String) -> ParseError {
        self.error_at(self.column(), message)
    }

    fn sum(&mut self) -> Result<Expr, ParseError> {
        let mut left = self.product()?;
        loop {
            let op = match self.peek() {
                Token::Plus => Operator::Add,
                Token::Minus => Operator::Subtract,
                _ => return Ok(left),
            };
            self.advance();
            let right = self.product()?;
            left = Expr::Binary(op, Box::new(left), Box::new(right));
        }
    }

    fn product(&mut self) -> Result<Expr, ParseError> {
        let mut left = self.unary()?;
        loop {
            let op = match self.peek() {
                Token::Star => Operator::Multiply,
                Token::Slash => Operator::Divide,
                _ => return Ok(left),
            };
            self.advance();
            let right = self.unary()?;
            left = Expr::Binary(op, Box::new(left), Box::new(right));
        }
    }

    fn unary(&mut self) -> Result<Expr, ParseError> {
        // Every level of parentheses, signs and powers passes through here;
        // bounding it bounds the parser's stack and the tree's depth.
        if self.depth >= super::limits::EXPRESSION_DEPTH {
            return Err(self.error_here(format!(
                "nested more than {} levels deep (parentheses, signs and powers; see \
                 docs/spec.md, \"Limits\")",
                super::limits::EXPRESSION_DEPTH
            )));
        }
        self.depth += 1;
        let result = self.unary_at_depth();
        self.depth -= 1;
        result
    }

    fn unary_at_depth(&mut self) -> Result<Expr, ParseError> {
        match self.peek() {
            Token::Minus => {
                self.advance();
                Ok(Expr::Negate(Box::new(self.unary()?)))
            }
            Token::Plus => {
                self.advance();
                self.unary()
            }
            _ => self.power(),
        }
    }

    fn power(&mut self) -> Result<Expr, ParseError> {
        let base = self.primary()?;
        if *self.peek() == Token::Caret {
            self.advance();
            // The exponent is a unary: right-associative, and 2^-1 reads as 2^(−1).
            let exponent = self.unary()?;
            return Ok(Expr::Binary(
                Operator::Power,
                Box::new(base),
                Box::new(exponent),
            ));
        }
        Ok(base)
    }

    fn primary(&mut self) -> Result<Expr, ParseError> {
        let (token, column) = self.advance();
        match token {
            Token::Number(v) => Ok(Expr::Number(v)),
            Token::Open => {
                self.open.push(column);
                let inner = self.sum()?;
                self.close()?;
                Ok(inner)
            }
            Token::Name(name) => self.name(name, column),
            Token::End => Err(self.error_at(
                column,
                "the expression ends where a number, name or \"(\" was expected".into(),
            )),
            other => Err(self.error_at(
                column,
                format!(
                    "expected a number, name or \"(\", found {}",
                    other.describe()
                ),
            )),
        }
    }

    /// Consumes the `)` that closes the innermost open parenthesis.
    fn close(&mut self) -> Result<(), ParseError> {
        let opened = self.open.pop().unwrap_or(1);
        match self.peek() {
            Token::Close => {
                self.advance();
                Ok(())
            }
            Token::End => Err(self.error_at(opened, "unbalanced \"(\": it is never closed".into())),
            other => {
                let found = other.describe();
                Err(self.error_here(format!("expected \")\" or an operator, found {found}")))
            }
        }
    }

    fn name(&mut self, name: String, column: usize) -> Result<Expr, ParseError> {
        if let Some(index) = self.names.iter().position(|n| *n == name) {
            return Ok(Expr::Input(index));
        }
        if let Some((_, value)) = CONSTANTS.iter().find(|(n, _)| *n == name) {
            return Ok(Expr::Number(*value));
        }
        let function = FUNCTIONS.iter().find(|(n, _)| *n == name).map(|(_, f)| *f);
        let fold = FOLDS.iter().find(|(n, _)| *n == name).map(|(_, f)| *f);
        if function.is_none() && fold.is_none() {
            let inputs = if self.names.is_empty() {
                "none".to_string()
            } else {
                self.names.join(", ")
            };
            return Err(self.error_at(
                column,
                format!(
                    "unknown name \"{name}\" (inputs: {inputs}; functions: sin cos tan exp log \
                     sqrt abs tanh min max; constant: pi)"
                ),
            ));
        }
        if *self.peek() != Token::Open {
            return Err(self.error_at(
                column,
                format!("function \"{name}\" needs its argument in parentheses: {name}(...)"),
            ));
        }
        let (_, open_column) = self.advance();
        self.open.push(open_column);
        let mut arguments = vec![self.sum()?];
        while *self.peek() == Token::Comma {
            self.advance();
            arguments.push(self.sum()?);
        }
        // Check the count before the closing parenthesis so the caret points
        // at the function's name.
        let count = arguments.len();
        if function.is_some() && count != 1 {
            return Err(self.error_at(
                column,
                format!("function \"{name}\" takes one argument, got {count}"),
            ));
        }
        if fold.is_some() && count < 2 {
            return Err(self.error_at(
                column,
                format!("function \"{name}\" takes two or more arguments, got {count}"),
            ));
        }
        self.close()?;
        Ok(match (function, fold) {
            (Some(f), _) => Expr::Call(f, Box::new(arguments.remove(0))),
            (None, Some(f)) => Expr::Fold(f, arguments),
            (None, None) => unreachable!("checked above"),
        })
    }
}

impl Expr {
    /// Evaluates at one point (`inputs` in the order of the names parsed
    /// against). Transcendental functions and powers go through `libm`.
    pub(crate) fn eval(&self, inputs: &[f64]) -> f64 {
        match self {
            Expr::Number(v) => *v,
            Expr::Input(i) => inputs[*i],
            Expr::Negate(e) => -e.eval(inputs),
            Expr::Binary(op, a, b) => {
                let (a, b) = (a.eval(inputs), b.eval(inputs));
                match op {
                    Operator::Add => a + b,
                    Operator::Subtract => a - b,
                    Operator::Multiply => a * b,
                    Operator::Divide => a / b,
                    Operator::Power => libm::pow(a, b),
                }
            }
            Expr::Call(f, e) => {
                let v = e.eval(inputs);
                match f {
                    Function::Sin => libm::sin(v),
                    Function::Cos => libm::cos(v),
                    Function::Tan => libm::tan(v),
                    Function::Exp => libm::exp(v),
                    Function::Log => libm::log(v),
                    Function::Sqrt => libm::sqrt(v),
                    Function::Abs => libm::fabs(v),
                    Function::Tanh => libm::tanh(v),
                }
            }
            Expr::Fold(f, arguments) => {
                let mut values = arguments.iter().map(|e| e.eval(inputs));
                let first = values.next().unwrap_or(f64::NAN);
                values.fold(first, |acc, v| match f {
                    // NaN propagates: a truth that is undefined somewhere must
                    // be reported, not silently replaced by the other argument.
                    _ if acc.is_nan() || v.is_nan() => f64::NAN,
                    Fold::Min => acc.min(v),
                    Fold::Max => acc.max(v),
                })
            }
        }
    }
}

#[cfg(test)]
mod tests;
