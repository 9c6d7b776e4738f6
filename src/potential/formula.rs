//! User formulas in one variable `x` ([`Formula`]) or two variables `x`, `y` ([`Formula2`]): a
//! small parser, exact symbolic derivatives (partials for two variables) and a tree evaluator.
//!
//! Grammar (precedence low to high): `+ -`, `* /`, unary `-`, `^` (right-associative, so `-x^2` is
//! `-(x^2)` and `2^-x` is allowed), function calls and parentheses. Functions: exp, ln, sqrt, sin,
//! cos, tan, sinh, cosh, tanh, abs. Named constants: `pi`, `e` and any constants the scenario defines.
//! Constants are folded at parse time; derivatives are built by the usual rules (chain, product,
//! quotient, `d a^b = a^b (b' ln a + b a'/a)`) and simplified by constant folding. `d|a| = sign(a) a'`
//! (the kink itself is not a stationary point the scan can see).
//!
//! Errors carry the 1-based character position in the formula.

use std::collections::BTreeMap;
use std::fmt;
use thiserror::Error;

/// A parse error with its position (1-based, in characters).
#[derive(Debug, Error, Clone, PartialEq)]
#[error("at position {position}: {message}")]
pub struct FormulaError {
    /// 1-based character position
    pub position: usize,
    /// what is wrong
    pub message: String,
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum Func {
    Exp,
    Ln,
    Sqrt,
    Sin,
    Cos,
    Tan,
    Sinh,
    Cosh,
    Tanh,
    Abs,
    Sign,
}

impl Func {
    fn from_name(s: &str) -> Option<Self> {
        Some(match s {
            "exp" => Self::Exp,
            "ln" => Self::Ln,
            "sqrt" => Self::Sqrt,
            "sin" => Self::Sin,
            "cos" => Self::Cos,
            "tan" => Self::Tan,
            "sinh" => Self::Sinh,
            "cosh" => Self::Cosh,
            "tanh" => Self::Tanh,
            "abs" => Self::Abs,
            _ => return None,
        })
    }
    fn name(self) -> &'static str {
        match self {
            Self::Exp => "exp",
            Self::Ln => "ln",
            Self::Sqrt => "sqrt",
            Self::Sin => "sin",
            Self::Cos => "cos",
            Self::Tan => "tan",
            Self::Sinh => "sinh",
            Self::Cosh => "cosh",
            Self::Tanh => "tanh",
            Self::Abs => "abs",
            Self::Sign => "sign",
        }
    }
    fn apply(self, v: f64) -> f64 {
        match self {
            Self::Exp => v.exp(),
            Self::Ln => v.ln(),
            Self::Sqrt => v.sqrt(),
            Self::Sin => v.sin(),
            Self::Cos => v.cos(),
            Self::Tan => v.tan(),
            Self::Sinh => v.sinh(),
            Self::Cosh => v.cosh(),
            Self::Tanh => v.tanh(),
            Self::Abs => v.abs(),
            Self::Sign => {
                if v > 0.0 {
                    1.0
                } else if v < 0.0 {
                    -1.0
                } else {
                    0.0
                }
            }
        }
    }
}

/// An expression tree in `x` (and `y` for two-variable formulas).
#[derive(Debug, Clone, PartialEq)]
enum Node {
    Num(f64),
    X,
    Y,
    Neg(Box<Node>),
    Add(Box<Node>, Box<Node>),
    Sub(Box<Node>, Box<Node>),
    Mul(Box<Node>, Box<Node>),
    Div(Box<Node>, Box<Node>),
    /// integer power, evaluated with `powi` (exact for negative bases)
    PowI(Box<Node>, i32),
    Pow(Box<Node>, Box<Node>),
    Call(Func, Box<Node>),
}

use Node::*;

fn num(v: f64) -> Node {
    Num(v)
}

// Smart constructors fold constants and drop neutral elements so derivatives stay small.
fn add(a: Node, b: Node) -> Node {
    match (a, b) {
        (Num(x), Num(y)) => Num(x + y),
        (Num(0.0), o) | (o, Num(0.0)) => o,
        (a, b) => Add(Box::new(a), Box::new(b)),
    }
}
fn sub(a: Node, b: Node) -> Node {
    match (a, b) {
        (Num(x), Num(y)) => Num(x - y),
        (o, Num(0.0)) => o,
        (Num(0.0), o) => neg(o),
        (a, b) => Sub(Box::new(a), Box::new(b)),
    }
}
fn mul(a: Node, b: Node) -> Node {
    match (a, b) {
        (Num(x), Num(y)) => Num(x * y),
        (Num(0.0), _) | (_, Num(0.0)) => Num(0.0),
        (Num(1.0), o) | (o, Num(1.0)) => o,
        (a, b) => Mul(Box::new(a), Box::new(b)),
    }
}
fn div(a: Node, b: Node) -> Node {
    match (a, b) {
        (Num(x), Num(y)) => Num(x / y),
        (Num(0.0), _) => Num(0.0),
        (o, Num(1.0)) => o,
        (a, b) => Div(Box::new(a), Box::new(b)),
    }
}
fn neg(a: Node) -> Node {
    match a {
        Num(x) => Num(-x),
        Neg(inner) => *inner,
        o => Neg(Box::new(o)),
    }
}
fn powi(a: Node, n: i32) -> Node {
    match (a, n) {
        (_, 0) => Num(1.0),
        (o, 1) => o,
        (Num(x), n) => Num(x.powi(n)),
        (o, n) => PowI(Box::new(o), n),
    }
}
fn pow(a: Node, b: Node) -> Node {
    match (a, b) {
        (a, Num(y)) if y.fract() == 0.0 && y.abs() <= 64.0 => powi(a, y as i32),
        (Num(x), Num(y)) => Num(x.powf(y)),
        (a, b) => Pow(Box::new(a), Box::new(b)),
    }
}
fn call(f: Func, a: Node) -> Node {
    match a {
        Num(x) => Num(f.apply(x)),
        o => Call(f, Box::new(o)),
    }
}

impl Node {
    fn size(&self) -> usize {
        match self {
            Num(_) | X | Y => 1,
            Neg(a) | PowI(a, _) | Call(_, a) => 1 + a.size(),
            Add(a, b) | Sub(a, b) | Mul(a, b) | Div(a, b) | Pow(a, b) => 1 + a.size() + b.size(),
        }
    }

    /// The value at (x, y); one-variable trees never read `y`.
    fn eval(&self, x: f64, y: f64) -> f64 {
        match self {
            Num(v) => *v,
            X => x,
            Y => y,
            Neg(a) => -a.eval(x, y),
            Add(a, b) => a.eval(x, y) + b.eval(x, y),
            Sub(a, b) => a.eval(x, y) - b.eval(x, y),
            Mul(a, b) => a.eval(x, y) * b.eval(x, y),
            Div(a, b) => a.eval(x, y) / b.eval(x, y),
            PowI(a, n) => a.eval(x, y).powi(*n),
            Pow(a, b) => a.eval(x, y).powf(b.eval(x, y)),
            Call(f, a) => f.apply(a.eval(x, y)),
        }
    }

    /// The derivative with respect to `x`.
    fn deriv(&self) -> Node {
        self.partial(&X)
    }

    /// The partial derivative with respect to `var` (`X` or `Y`).
    fn partial(&self, var: &Node) -> Node {
        let d = |n: &Node| n.partial(var);
        match self {
            Num(_) => num(0.0),
            X | Y => num(if self == var { 1.0 } else { 0.0 }),
            Neg(a) => neg(d(a)),
            Add(a, b) => add(d(a), d(b)),
            Sub(a, b) => sub(d(a), d(b)),
            Mul(a, b) => add(mul(d(a), (**b).clone()), mul((**a).clone(), d(b))),
            Div(a, b) => div(
                sub(mul(d(a), (**b).clone()), mul((**a).clone(), d(b))),
                powi((**b).clone(), 2),
            ),
            PowI(a, n) => mul(mul(num(f64::from(*n)), powi((**a).clone(), n - 1)), d(a)),
            Pow(a, b) => {
                // d a^b = a^b (b' ln a + b a' / a)
                let here = pow((**a).clone(), (**b).clone());
                let term = add(
                    mul(d(b), call(Func::Ln, (**a).clone())),
                    div(mul((**b).clone(), d(a)), (**a).clone()),
                );
                mul(here, term)
            }
            Call(f, a) => {
                let inner = (**a).clone();
                let outer = match f {
                    Func::Exp => call(Func::Exp, inner),
                    Func::Ln => div(num(1.0), inner),
                    Func::Sqrt => div(num(0.5), call(Func::Sqrt, inner)),
                    Func::Sin => call(Func::Cos, inner),
                    Func::Cos => neg(call(Func::Sin, inner)),
                    Func::Tan => div(num(1.0), powi(call(Func::Cos, inner), 2)),
                    Func::Sinh => call(Func::Cosh, inner),
                    Func::Cosh => call(Func::Sinh, inner),
                    Func::Tanh => sub(num(1.0), powi(call(Func::Tanh, inner), 2)),
                    Func::Abs => call(Func::Sign, inner),
                    Func::Sign => num(0.0),
                };
                mul(outer, d(a))
            }
        }
    }
}

/// A tree printed with the user's variable names.
struct Shown<'a>(&'a Node, [&'a str; 2]);

impl<'a> fmt::Display for Shown<'a> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let names = self.1;
        let s = |n: &'a Node| Shown(n, names);
        match self.0 {
            Num(v) => write!(f, "{v}"),
            X => write!(f, "{}", names[0]),
            Y => write!(f, "{}", names[1]),
            Neg(a) => write!(f, "(-{})", s(a)),
            Add(a, b) => write!(f, "({} + {})", s(a), s(b)),
            Sub(a, b) => write!(f, "({} - {})", s(a), s(b)),
            Mul(a, b) => write!(f, "({}*{})", s(a), s(b)),
            Div(a, b) => write!(f, "({}/{})", s(a), s(b)),
            PowI(a, n) => write!(f, "({})^{n}", s(a)),
            Pow(a, b) => write!(f, "({})^({})", s(a), s(b)),
            Call(g, a) => write!(f, "{}({})", g.name(), s(a)),
        }
    }
}

#[derive(Debug, Clone, PartialEq)]
enum Tok {
    Num(f64),
    Ident(String),
    Op(char),
    LParen,
    RParen,
    End,
}

struct Parser<'a> {
    toks: Vec<(Tok, usize)>,
    pos: usize,
    constants: &'a BTreeMap<String, f64>,
    /// the variable names: one (`x`) or two (`x`, `y`)
    vars: &'a [&'a str],
    /// nesting depth of parentheses, calls and unary signs (bounded: the parser recurses)
    depth: usize,
}

/// Longest formula accepted, in characters.
pub const MAX_LEN: usize = 2000;
/// Deepest nesting accepted (parentheses, calls, signs).
pub const MAX_DEPTH: usize = 100;
/// Largest derivative tree accepted: derivatives of long products grow quadratically.
pub const MAX_NODES: usize = 200_000;

fn err(position: usize, message: impl Into<String>) -> FormulaError {
    FormulaError {
        position,
        message: message.into(),
    }
}

fn tokenize(src: &str) -> Result<Vec<(Tok, usize)>, FormulaError> {
    let chars: Vec<char> = src.chars().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let at = i + 1;
        if c.is_whitespace() {
            i += 1;
        } else if c.is_ascii_digit() || c == '.' {
            let start = i;
            while i < chars.len() && (chars[i].is_ascii_digit() || chars[i] == '.') {
                i += 1;
            }
            // exponent: e or E followed by optional sign and at least one digit
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
            let text: String = chars[start..i].iter().collect();
            let v: f64 = text
                .parse()
                .map_err(|_| err(at, format!("malformed number \"{text}\"")))?;
            out.push((Tok::Num(v), at));
        } else if c.is_alphabetic() || c == '_' {
            let start = i;
            while i < chars.len() && (chars[i].is_alphanumeric() || chars[i] == '_') {
                i += 1;
            }
            out.push((Tok::Ident(chars[start..i].iter().collect()), at));
        } else {
            let t = match c {
                '+' | '-' | '*' | '/' | '^' => Tok::Op(c),
                '(' => Tok::LParen,
                ')' => Tok::RParen,
                _ => return Err(err(at, format!("unexpected character '{c}'"))),
            };
            out.push((t, at));
            i += 1;
        }
    }
    out.push((Tok::End, chars.len() + 1));
    Ok(out)
}

impl Parser<'_> {
    fn peek(&self) -> &Tok {
        &self.toks[self.pos].0
    }
    fn at(&self) -> usize {
        self.toks[self.pos].1
    }
    fn bump(&mut self) -> (Tok, usize) {
        let t = self.toks[self.pos].clone();
        if self.pos + 1 < self.toks.len() {
            self.pos += 1;
        }
        t
    }

    fn expr(&mut self) -> Result<Node, FormulaError> {
        let mut lhs = self.term()?;
        loop {
            match self.peek() {
                Tok::Op('+') => {
                    self.bump();
                    lhs = add(lhs, self.term()?);
                }
                Tok::Op('-') => {
                    self.bump();
                    lhs = sub(lhs, self.term()?);
                }
                _ => return Ok(lhs),
            }
        }
    }

    fn term(&mut self) -> Result<Node, FormulaError> {
        let mut lhs = self.unary()?;
        loop {
            match self.peek() {
                Tok::Op('*') => {
                    self.bump();
                    lhs = mul(lhs, self.unary()?);
                }
                Tok::Op('/') => {
                    self.bump();
                    lhs = div(lhs, self.unary()?);
                }
                _ => return Ok(lhs),
            }
        }
    }

    fn enter(&mut self) -> Result<(), FormulaError> {
        self.depth += 1;
        if self.depth > MAX_DEPTH {
            return Err(err(
                self.at(),
                format!("formula nested more than {MAX_DEPTH} levels deep"),
            ));
        }
        Ok(())
    }

    fn unary(&mut self) -> Result<Node, FormulaError> {
        self.enter()?;
        let r = self.unary_inner();
        self.depth -= 1;
        r
    }

    fn unary_inner(&mut self) -> Result<Node, FormulaError> {
        match self.peek() {
            Tok::Op('-') => {
                self.bump();
                Ok(neg(self.unary()?))
            }
            Tok::Op('+') => {
                self.bump();
                self.unary()
            }
            _ => self.power(),
        }
    }

    fn power(&mut self) -> Result<Node, FormulaError> {
        let base = self.primary()?;
        if let Tok::Op('^') = self.peek() {
            self.bump();
            let exponent = self.unary()?;
            return Ok(pow(base, exponent));
        }
        Ok(base)
    }

    fn primary(&mut self) -> Result<Node, FormulaError> {
        let (tok, at) = self.bump();
        let node = match tok {
            Tok::Num(v) => Num(v),
            Tok::LParen => {
                self.enter()?;
                let inner = self.expr()?;
                self.depth -= 1;
                self.expect_close(at)?;
                inner
            }
            Tok::Ident(name) => {
                if let Some(f) = Func::from_name(&name) {
                    if *self.peek() != Tok::LParen {
                        return Err(err(self.at(), format!("expected '(' after {name}")));
                    }
                    let open = self.bump().1;
                    let arg = self.expr()?;
                    self.expect_close(open)?;
                    call(f, arg)
                } else if name == self.vars[0] {
                    X
                } else if self.vars.get(1) == Some(&name.as_str()) {
                    Y
                } else if let Some(v) = self.constants.get(&name) {
                    Num(*v)
                } else if name == "pi" {
                    Num(std::f64::consts::PI)
                } else if name == "e" {
                    Num(std::f64::consts::E)
                } else {
                    let mut known: Vec<&str> = vec!["pi", "e"];
                    known.extend(self.constants.keys().map(String::as_str));
                    let variables = match self.vars {
                        [one] => format!("variable {one}"),
                        more => format!("variables {}", more.join(", ")),
                    };
                    return Err(err(
                        at,
                        format!(
                            "unknown name \"{name}\" ({variables}; constants {}; functions exp, ln, sqrt, sin, cos, tan, sinh, cosh, tanh, abs)",
                            known.join(", ")
                        ),
                    ));
                }
            }
            Tok::End => return Err(err(at, "formula ends where a value was expected")),
            Tok::RParen => return Err(err(at, "unexpected ')'")),
            Tok::Op(c) => return Err(err(at, format!("unexpected operator '{c}'"))),
        };
        // A value directly followed by another value is a missing operator ("2x", "x(1+x)").
        match self.peek() {
            Tok::Num(_) | Tok::Ident(_) | Tok::LParen => Err(err(
                self.at(),
                "expected an operator here (write products with '*')",
            )),
            _ => Ok(node),
        }
    }

    fn expect_close(&mut self, open: usize) -> Result<(), FormulaError> {
        match self.peek() {
            Tok::RParen => {
                self.bump();
                Ok(())
            }
            _ => Err(err(
                self.at(),
                format!("expected ')' to close the '(' at position {open}"),
            )),
        }
    }
}

/// A parsed formula f(x) with its first and second derivatives.
#[derive(Debug, Clone)]
pub struct Formula {
    source: String,
    f: Node,
    d1: Node,
    d2: Node,
}

/// Parses `src` in the variables `vars` (one or two names) into its tree.
fn parse_tree(
    src: &str,
    constants: &BTreeMap<String, f64>,
    vars: &[&str],
) -> Result<Node, FormulaError> {
    for name in constants.keys() {
        if vars.contains(&name.as_str()) || Func::from_name(name).is_some() {
            let what = if vars.len() == 1 {
                "the variable"
            } else {
                "a variable"
            };
            return Err(err(
                1,
                format!("constant name \"{name}\" is reserved ({what} or a function)"),
            ));
        }
    }
    let len = src.chars().count();
    if len > MAX_LEN {
        return Err(err(
            MAX_LEN + 1,
            format!("formula longer than {MAX_LEN} characters ({len})"),
        ));
    }
    let toks = tokenize(src)?;
    let mut p = Parser {
        toks,
        pos: 0,
        constants,
        vars,
        depth: 0,
    };
    let f = p.expr()?;
    match p.peek() {
        Tok::End => Ok(f),
        Tok::RParen => Err(err(p.at(), "unmatched ')'")),
        _ => Err(err(p.at(), "unexpected text after the end of the formula")),
    }
}

/// `n`, or an error if a derivative grew beyond [`MAX_NODES`].
fn bounded(n: Node) -> Result<Node, FormulaError> {
    if n.size() > MAX_NODES {
        return Err(err(
            1,
            format!("formula too complex to differentiate (over {MAX_NODES} terms)"),
        ));
    }
    Ok(n)
}

impl Formula {
    /// Parses `src` with the given named constants.
    ///
    /// # Errors
    /// Syntax errors and unknown names, with the 1-based position in `src`.
    pub fn parse(src: &str, constants: &BTreeMap<String, f64>) -> Result<Self, FormulaError> {
        let f = parse_tree(src, constants, &["x"])?;
        let d1 = bounded(f.deriv())?;
        let d2 = bounded(d1.deriv())?;
        Ok(Self {
            source: src.to_string(),
            f,
            d1,
            d2,
        })
    }

    /// The formula as written.
    pub fn source(&self) -> &str {
        &self.source
    }
    /// f(x)
    #[inline]
    pub fn value(&self, x: f64) -> f64 {
        self.f.eval(x, 0.0)
    }
    /// f'(x), from the symbolic derivative
    #[inline]
    pub fn d1(&self, x: f64) -> f64 {
        self.d1.eval(x, 0.0)
    }
    /// f''(x), from the symbolic second derivative
    #[inline]
    pub fn d2(&self, x: f64) -> f64 {
        self.d2.eval(x, 0.0)
    }
    /// The first derivative, printed (for diagnostics).
    pub fn derivative_text(&self) -> String {
        Shown(&self.d1, ["x", "y"]).to_string()
    }
    /// True if the formula does not depend on x.
    pub fn is_constant(&self) -> bool {
        matches!(self.f, Num(_))
    }
}

/// A parsed formula f(x, y) of two variables with its exact first and second partial
/// derivatives.
#[derive(Debug, Clone)]
pub struct Formula2 {
    source: String,
    vars: [String; 2],
    f: Node,
    /// ∂f/∂x, ∂f/∂y
    grad: [Node; 2],
    /// ∂²f/∂x², ∂²f/∂x∂y, ∂²f/∂y²
    second: [Node; 3],
}

impl Formula2 {
    /// Parses `src` in the variables `vars` (e.g. `["x", "y"]`) with the given named constants.
    /// The mixed partial is taken as ∂/∂y of ∂f/∂x.
    ///
    /// # Errors
    /// Syntax errors and unknown names (a third variable such as `z` is an unknown name), with the
    /// 1-based position in `src`; a constant named like a variable or a function; two equal
    /// variable names.
    pub fn parse(
        src: &str,
        vars: [&str; 2],
        constants: &BTreeMap<String, f64>,
    ) -> Result<Self, FormulaError> {
        if vars[0] == vars[1] {
            return Err(err(
                1,
                format!("the two variables have one name \"{}\"", vars[0]),
            ));
        }
        let f = parse_tree(src, constants, &vars)?;
        let fx = bounded(f.partial(&X))?;
        let fy = bounded(f.partial(&Y))?;
        let second = [
            bounded(fx.partial(&X))?,
            bounded(fx.partial(&Y))?,
            bounded(fy.partial(&Y))?,
        ];
        Ok(Self {
            source: src.to_string(),
            vars: vars.map(str::to_string),
            f,
            grad: [fx, fy],
            second,
        })
    }

    /// The formula as written.
    pub fn source(&self) -> &str {
        &self.source
    }
    /// f(x, y)
    #[inline]
    pub fn value(&self, x: f64, y: f64) -> f64 {
        self.f.eval(x, y)
    }
    /// (∂f/∂x, ∂f/∂y), from the symbolic partials
    #[inline]
    pub fn gradient(&self, x: f64, y: f64) -> [f64; 2] {
        [self.grad[0].eval(x, y), self.grad[1].eval(x, y)]
    }
    /// The Hessian [[f_xx, f_xy], [f_xy, f_yy]], from the symbolic second partials
    #[inline]
    pub fn hessian(&self, x: f64, y: f64) -> [[f64; 2]; 2] {
        let [xx, xy, yy] = &self.second;
        let xy = xy.eval(x, y);
        [[xx.eval(x, y), xy], [xy, yy.eval(x, y)]]
    }
    /// The two partial derivatives, printed with the user's variable names (for diagnostics).
    pub fn gradient_text(&self) -> [String; 2] {
        let names = [self.vars[0].as_str(), self.vars[1].as_str()];
        [
            Shown(&self.grad[0], names).to_string(),
            Shown(&self.grad[1], names).to_string(),
        ]
    }
    /// True if the formula depends on neither variable.
    pub fn is_constant(&self) -> bool {
        matches!(self.f, Num(_))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(s: &str) -> Formula {
        Formula::parse(s, &BTreeMap::new()).unwrap()
    }

    #[test]
    fn precedence_and_associativity() {
        assert_eq!(p("-2^2").value(0.0), -4.0);
        assert_eq!(p("2^3^2").value(0.0), 512.0);
        assert_eq!(p("2^-1").value(0.0), 0.5);
        assert_eq!(p("1 - 2 - 3").value(0.0), -4.0);
        assert_eq!(p("8/4/2").value(0.0), 1.0);
        assert_eq!(p("1.5e2 + 2E-1").value(0.0), 150.2);
        assert!((p("pi").value(0.0) - std::f64::consts::PI).abs() < 1e-15);
        assert!((p("ln(e)").value(0.0) - 1.0).abs() < 1e-15);
    }

    // Derivatives checked against the hand-derived closed forms (common practice, no source).
    #[test]
    fn symbolic_derivatives() {
        let f = p("4.5*(x^2-1)^2 + 0.6*sin(3*x)");
        for x in [-1.3f64, -0.2, 0.0, 0.7, 2.1] {
            let d1 = 18.0 * x * (x * x - 1.0) + 1.8 * (3.0 * x).cos();
            let d2 = 18.0 * (3.0 * x * x - 1.0) - 5.4 * (3.0 * x).sin();
            assert!((f.d1(x) - d1).abs() < 1e-12 * (1.0 + d1.abs()));
            assert!((f.d2(x) - d2).abs() < 1e-12 * (1.0 + d2.abs()));
        }
        let g = p("x^x + sqrt(x) + ln(x) + tanh(x) + cosh(x) + abs(x - 3) + exp(-x)/x");
        let x: f64 = 1.7;
        let d1 = x.powf(x) * (x.ln() + 1.0)
            + 0.5 / x.sqrt()
            + 1.0 / x
            + (1.0 - x.tanh().powi(2))
            + x.sinh()
            - 1.0
            + (-(-x).exp() * x - (-x).exp()) / (x * x);
        assert!((g.d1(x) - d1).abs() < 1e-12 * d1.abs());
    }

    #[test]
    fn errors_carry_positions() {
        let e = Formula::parse("2*x + foo", &BTreeMap::new()).unwrap_err();
        assert_eq!(e.position, 7);
        assert!(e.message.contains("foo"));
        let e = Formula::parse("(x + 1", &BTreeMap::new()).unwrap_err();
        assert_eq!(e.position, 7);
        let e = Formula::parse("2x", &BTreeMap::new()).unwrap_err();
        assert_eq!(e.position, 2);
        let e = Formula::parse("x # 2", &BTreeMap::new()).unwrap_err();
        assert_eq!(e.position, 3);
        let e = Formula::parse("x +", &BTreeMap::new()).unwrap_err();
        assert_eq!(e.position, 4);
        let e = Formula::parse("sin x", &BTreeMap::new()).unwrap_err();
        assert_eq!(e.position, 5);
        assert!(Formula::parse("", &BTreeMap::new()).is_err());
        // bounded recursion and size (fuzzing guards)
        let deep = format!("{}x{}", "(".repeat(150), ")".repeat(150));
        assert!(Formula::parse(&deep, &BTreeMap::new()).is_err());
        let long = vec!["x"; 900].join("*");
        assert!(Formula::parse(&long, &BTreeMap::new()).is_err());
        assert!(Formula::parse(&"x+".repeat(1200), &BTreeMap::new()).is_err());
        assert!(Formula::parse("x)", &BTreeMap::new()).is_err());
    }

    #[test]
    fn named_constants() {
        let mut c = BTreeMap::new();
        c.insert("Eb".to_string(), 5.0);
        c.insert("a".to_string(), 2.0);
        let f = Formula::parse("Eb*((x/a)^2 - 1)^2", &c).unwrap();
        assert_eq!(f.value(0.0), 5.0);
        assert_eq!(f.value(2.0), 0.0);
        c.insert("sin".to_string(), 1.0);
        assert!(Formula::parse("x", &c).is_err());
    }

    fn p2(s: &str) -> Formula2 {
        Formula2::parse(s, ["x", "y"], &BTreeMap::new()).unwrap()
    }

    // Partials checked against the hand-derived closed forms (common practice, no source); the
    // 1e-12 relative tolerance is a few roundings of terms of order one.
    #[test]
    fn two_variable_partials() {
        let f = p2("(x^2 - 1)^2 + 3*x*y^2 + exp(-x*y) + sin(y)/x");
        for (x, y) in [(0.7f64, -0.4f64), (-1.3, 0.9), (2.0, 0.1)] {
            let e = (-x * y).exp();
            let v = (x * x - 1.0).powi(2) + 3.0 * x * y * y + e + y.sin() / x;
            let gx = 4.0 * x * (x * x - 1.0) + 3.0 * y * y - y * e - y.sin() / (x * x);
            let gy = 6.0 * x * y - x * e + y.cos() / x;
            let hxx = 12.0 * x * x - 4.0 + y * y * e + 2.0 * y.sin() / (x * x * x);
            let hxy = 6.0 * y - e + x * y * e - y.cos() / (x * x);
            let hyy = 6.0 * x + x * x * e - y.sin() / x;
            let close = |a: f64, b: f64| (a - b).abs() < 1e-12 * (1.0 + b.abs());
            assert!(close(f.value(x, y), v));
            let g = f.gradient(x, y);
            assert!(close(g[0], gx) && close(g[1], gy));
            let h = f.hessian(x, y);
            assert!(close(h[0][0], hxx) && close(h[0][1], hxy) && close(h[1][1], hyy));
            assert_eq!(h[0][1], h[1][0]);
        }
        // the partials are printed with the user's names
        let g = Formula2::parse("a^2*b", ["a", "b"], &BTreeMap::new()).unwrap();
        assert_eq!(g.gradient_text(), ["((2*a)*b)", "(a)^2"]);
        assert!(p2("2 + pi").is_constant() && !p2("y").is_constant());
    }

    #[test]
    fn two_variable_errors() {
        let none = BTreeMap::new();
        // a third variable is an unknown name at its position
        let e = Formula2::parse("x^2 + z", ["x", "y"], &none).unwrap_err();
        assert_eq!(e.position, 7);
        assert!(e.message.contains("\"z\"") && e.message.contains("variables x, y"));
        let e = Formula2::parse("x*y +", ["x", "y"], &none).unwrap_err();
        assert_eq!(e.position, 6);
        let mut c = BTreeMap::new();
        c.insert("y".to_string(), 1.0);
        assert!(Formula2::parse("x", ["x", "y"], &c).is_err());
        // y is an ordinary constant of a one-variable formula, an unknown name otherwise
        assert_eq!(Formula::parse("x*y", &c).unwrap().value(2.0), 2.0);
        let e = Formula::parse("x*y", &none).unwrap_err();
        assert_eq!(e.position, 3);
        assert!(e.message.contains("(variable x; constants pi, e;"));
        assert!(Formula2::parse("x", ["x", "x"], &none).is_err());
    }

    /// The one-variable derivative text users see is unchanged by the two-variable trees.
    #[test]
    fn one_variable_text_unchanged() {
        // texts printed by the one-variable code before two-variable formulas existed
        assert_eq!(
            p("4.5*(x^2-1)^2 + 0.6*sin(3*x)").derivative_text(),
            "((4.5*((2*((x)^2 - 1))*(2*x))) + (0.6*(cos((3*x))*3)))"
        );
        assert_eq!(
            p("x^x + sqrt(x)/x - abs(x-3)*exp(-x)").derivative_text(),
            "((((x)^(x)*(ln(x) + (x/x))) + ((((0.5/sqrt(x))*x) - sqrt(x))/(x)^2)) - ((sign((x - 3))*exp((-x))) + (abs((x - 3))*(exp((-x))*-1))))"
        );
    }
}
