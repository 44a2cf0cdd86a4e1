//! Printing IR expressions in each target's syntax.
//!
//! Why one module: every emitted file, the rate-law output and the
//! diagnostics print expressions, and a wrong parenthesis in one target is a
//! wrong model. So there is one precedence table ([`precedence`]) and one
//! rule for when a child needs parentheses ([`needs_parens`]); each target
//! only chooses spellings (operators, function names, number literals).
//!
//! Invariants: the printed text parses back, in the target language, to an
//! expression with the same value (the printer inserts parentheses whenever
//! the table says a child binds more loosely than its place needs, and
//! around every negative operand that is not the leftmost of a sum); number
//! literals round-trip exactly (shortest representation that reads back as
//! the same `f64`); C, Rust and Julia literals always carry a decimal point
//! or exponent so no integer arithmetic happens by accident.

use crate::model::expr::{BinOp, Expr, Func};
use crate::model::ir::Sym;

/// A target syntax.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Syntax {
    /// The mechanism language itself (`^`, `ln`).
    Mech,
    /// Python with numpy imported as `np` (`**`, `np.exp`, `np.log`).
    Python,
    Julia,
    /// C99 with `<math.h>` (`pow`, `exp`, `log`, `fabs`, `fmin`, `fmax`).
    C,
    /// Rust with `f64` methods (`powi`, `powf`, `exp`, `ln`).
    Rust,
    /// Octave, element-wise operators (`.*`, `./`, `.^`).
    Octave,
    R,
    /// LaTeX math mode (`\frac`, `^{}`).
    Latex,
    /// Content MathML, as SBML kinetic laws use it.
    MathML,
}

/// Binding strength of an expression's top node. Higher binds tighter.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum Prec {
    /// `a + b`, `a - b`, and unary minus (which prints like `0 - a`).
    Sum = 1,
    /// `a * b`, `a / b`.
    Product = 2,
    /// `a ^ b`.
    Power = 3,
    /// Names, non-negative numbers, calls, parenthesised text.
    Atom = 4,
}

/// The precedence table shared by every infix target.
pub fn precedence(e: &Expr) -> Prec {
    match e {
        Expr::Number(v) if v.is_sign_negative() => Prec::Sum,
        Expr::Number(_) | Expr::Name(_) | Expr::Time | Expr::Call(..) => Prec::Atom,
        Expr::Neg(_) => Prec::Sum,
        Expr::Binary(BinOp::Add | BinOp::Sub, _, _) => Prec::Sum,
        Expr::Binary(BinOp::Mul | BinOp::Div, _, _) => Prec::Product,
        Expr::Binary(BinOp::Pow, _, _) => Prec::Power,
    }
}

/// Where a child sits under its parent.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Place {
    Left,
    Right,
    /// The operand of unary minus.
    Negated,
}

/// Whether `child` needs parentheses as the `place` operand of `parent`
/// (a binary operator, or unary minus with `Place::Negated`).
///
/// Left operands may bind as loosely as the parent (left associativity);
/// right operands must bind strictly tighter (so `a - (b - c)`, `a / (b * c)`
/// keep their parentheses); both operands of `^` must be atoms (its
/// associativity differs between languages); a negated operand must be at
/// least a product (`-(a + b)`, but `-a * b`).
pub fn needs_parens(child: &Expr, parent: Option<BinOp>, place: Place) -> bool {
    parens_for(precedence(child), parent, place)
}

/// The table as a target writes it: a LaTeX fraction and a C or Rust power
/// (a call) group their operands themselves, so they bind like atoms.
pub fn precedence_in(e: &Expr, syntax: Syntax) -> Prec {
    match (e, syntax) {
        (Expr::Binary(BinOp::Div, _, _), Syntax::Latex) => Prec::Atom,
        (Expr::Binary(BinOp::Pow, _, _), Syntax::C | Syntax::Rust | Syntax::Latex) => Prec::Atom,
        _ => precedence(e),
    }
}

fn parens_for(c: Prec, parent: Option<BinOp>, place: Place) -> bool {
    match (parent, place) {
        (_, Place::Negated) => c < Prec::Product,
        (Some(BinOp::Pow), _) => c < Prec::Atom,
        (Some(op), Place::Left) => c < op_prec(op),
        (Some(op), Place::Right) => c <= op_prec(op),
        (None, _) => false,
    }
}

fn op_prec(op: BinOp) -> Prec {
    match op {
        BinOp::Add | BinOp::Sub => Prec::Sum,
        BinOp::Mul | BinOp::Div => Prec::Product,
        BinOp::Pow => Prec::Power,
    }
}

/// Prints `e` in `syntax`; `name` spells each symbol (for code targets it
/// may return e.g. `y[2]` or `p.k_on`; for LaTeX, already escaped, see
/// [`latex_name`]; for MathML, the identifier inside `<ci>`).
pub fn print_expr(e: &Expr, name: &dyn Fn(Sym) -> String, syntax: Syntax) -> String {
    let mut out = String::new();
    if syntax == Syntax::MathML {
        mathml(e, name, &mut out);
    } else {
        Printer { name, syntax }.expr(e, &mut out);
    }
    out
}

/// A name in LaTeX math: single letters stay italic, longer names upright,
/// the first `_` becomes a subscript and other specials are escaped
/// (`k_on` → `k_{\mathrm{on}}`, `ES` → `\mathrm{ES}`).
pub fn latex_name(name: &str) -> String {
    fn upright(s: &str) -> String {
        let escaped = latex_escape(s);
        if s.chars().count() == 1 {
            escaped
        } else {
            format!("\\mathrm{{{escaped}}}")
        }
    }
    match name.split_once('_') {
        Some((head, tail)) if !head.is_empty() && !tail.is_empty() => {
            format!("{}_{{{}}}", upright(head), upright(tail))
        }
        _ => upright(name),
    }
}

/// Escapes LaTeX's special characters in text.
pub fn latex_escape(s: &str) -> String {
    let mut out = String::new();
    for ch in s.chars() {
        match ch {
            '_' | '%' | '$' | '#' | '&' | '{' | '}' => {
                out.push('\\');
                out.push(ch)
            }
            '\\' => out.push_str("\\textbackslash{}"),
            '^' => out.push_str("\\^{}"),
            '~' => out.push_str("\\~{}"),
            c if c.is_ascii() => out.push(c),
            // pdflatex reads only the characters its fonts are set up for:
            // Greek letters (and µ, °) become their commands, anything else
            // its code point, so the document always compiles.
            c => match (greek_command(c), greek_plain(c)) {
                (Some(command), _) => out.push_str(&format!("\\ensuremath{{\\{command}}}")),
                (None, Some(latin)) => out.push(latin),
                (None, None) if c == '°' => out.push_str("\\ensuremath{^\\circ}"),
                (None, None) => out.push_str(&format!(
                    "\\ensuremath{{\\langle\\mathrm{{U{{+}}{:04X}}}\\rangle}}",
                    c as u32
                )),
            },
        }
    }
    out
}

/// The LaTeX command of a Greek letter (µ, the micro sign, as `mu`).
fn greek_command(c: char) -> Option<&'static str> {
    Some(match c {
        'α' => "alpha",
        'β' => "beta",
        'γ' => "gamma",
        'δ' => "delta",
        'ε' => "epsilon",
        'ζ' => "zeta",
        'η' => "eta",
        'θ' => "theta",
        'ι' => "iota",
        'κ' => "kappa",
        'λ' => "lambda",
        'μ' | 'µ' => "mu",
        'ν' => "nu",
        'ξ' => "xi",
        'π' => "pi",
        'ρ' => "rho",
        'σ' | 'ς' => "sigma",
        'τ' => "tau",
        'υ' => "upsilon",
        'φ' => "phi",
        'χ' => "chi",
        'ψ' => "psi",
        'ω' => "omega",
        'Γ' => "Gamma",
        'Δ' => "Delta",
        'Θ' => "Theta",
        'Λ' => "Lambda",
        'Ξ' => "Xi",
        'Π' => "Pi",
        'Σ' => "Sigma",
        'Υ' => "Upsilon",
        'Φ' => "Phi",
        'Ψ' => "Psi",
        'Ω' => "Omega",
        _ => return None,
    })
}

/// Greek letters that look like Latin ones (capital alpha, omicron, ...).
fn greek_plain(c: char) -> Option<char> {
    Some(match c {
        'Α' => 'A',
        'Β' => 'B',
        'Ε' => 'E',
        'Ζ' => 'Z',
        'Η' => 'H',
        'Ι' => 'I',
        'Κ' => 'K',
        'Μ' => 'M',
        'Ν' => 'N',
        'Ο' => 'O',
        'ο' => 'o',
        'Ρ' => 'P',
        'Τ' => 'T',
        'Χ' => 'X',
        _ => return None,
    })
}

/// Escapes text for XML content and attribute values.
pub fn xml_escape(s: &str) -> String {
    let mut out = String::new();
    for ch in s.chars() {
        match ch {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            c => out.push(c),
        }
    }
    out
}

/// The shortest decimal text that reads back as exactly `v`, always with a
/// `.` or an exponent (`2.0`, `0.1`, `1e-300`).
pub fn float_literal(v: f64) -> String {
    // `{:?}` is Rust's shortest round-trip form and switches to an exponent
    // for very large and very small magnitudes.
    format!("{v:?}")
}

/// Like [`float_literal`] but integers print without `.0` (`2`, `0.5`).
pub fn plain_literal(v: f64) -> String {
    let s = float_literal(v);
    match s.strip_suffix(".0") {
        Some(int) => int.to_string(),
        None => s,
    }
}

struct Printer<'a> {
    name: &'a dyn Fn(Sym) -> String,
    syntax: Syntax,
}

impl Printer<'_> {
    fn expr(&self, e: &Expr, out: &mut String) {
        match e {
            Expr::Number(v) => out.push_str(&self.number(*v)),
            Expr::Name(s) => out.push_str(&(self.name)(*s)),
            Expr::Time => out.push('t'),
            Expr::Neg(a) => {
                out.push('-');
                self.operand(a, None, Place::Negated, out);
            }
            Expr::Binary(op, a, b) => self.binary(*op, a, b, out),
            Expr::Call(f, args) => self.call(*f, args, out),
        }
    }

    /// Prints a child, parenthesised when the table says so.
    fn operand(&self, e: &Expr, parent: Option<BinOp>, place: Place, out: &mut String) {
        if parens_for(precedence_in(e, self.syntax), parent, place) {
            self.open(out);
            self.expr(e, out);
            self.close(out);
        } else {
            self.expr(e, out);
        }
    }

    fn open(&self, out: &mut String) {
        out.push_str(if self.syntax == Syntax::Latex {
            "\\left("
        } else {
            "("
        });
    }
    fn close(&self, out: &mut String) {
        out.push_str(if self.syntax == Syntax::Latex {
            "\\right)"
        } else {
            ")"
        });
    }

    fn binary(&self, op: BinOp, a: &Expr, b: &Expr, out: &mut String) {
        let sx = self.syntax;
        match (op, sx) {
            (BinOp::Div, Syntax::Latex) => {
                out.push_str("\\frac{");
                self.expr(a, out);
                out.push_str("}{");
                self.expr(b, out);
                out.push('}');
                return;
            }
            (BinOp::Pow, Syntax::Latex) => {
                self.pow_base(a, out);
                out.push_str("^{");
                self.exponent_text(b, out);
                out.push('}');
                return;
            }
            (BinOp::Pow, Syntax::C) => return self.c_pow(a, b, out),
            (BinOp::Pow, Syntax::Rust) => return self.rust_pow(a, b, out),
            _ => {}
        }
        self.operand(a, Some(op), Place::Left, out);
        out.push_str(match (op, sx) {
            (BinOp::Add, _) => " + ",
            (BinOp::Sub, _) => " - ",
            (BinOp::Mul, Syntax::Octave) => " .* ",
            (BinOp::Mul, Syntax::Latex) => " \\, ",
            (BinOp::Mul, _) => " * ",
            (BinOp::Div, Syntax::Octave) => " ./ ",
            (BinOp::Div, _) => " / ",
            (BinOp::Pow, Syntax::Python) => "**",
            (BinOp::Pow, Syntax::Octave) => ".^",
            (BinOp::Pow, _) => "^",
        });
        if op == BinOp::Pow && sx == Syntax::Julia {
            // Julia integer exponents stay integers (`x^2` is exact and fast).
            self.julia_exponent(b, out);
        } else {
            self.operand(b, Some(op), Place::Right, out);
        }
    }

    fn julia_exponent(&self, b: &Expr, out: &mut String) {
        match b {
            Expr::Number(v) if v.fract() == 0.0 && v.abs() < 1e15 && *v >= 0.0 => {
                out.push_str(&plain_literal(*v))
            }
            Expr::Number(v) if v.fract() == 0.0 && v.abs() < 1e15 => {
                out.push('(');
                out.push_str(&plain_literal(*v));
                out.push(')');
            }
            _ => self.operand(b, Some(BinOp::Pow), Place::Right, out),
        }
    }

    /// A LaTeX power base: atoms as they are, anything else (a fraction too)
    /// in `\left( \right)`.
    fn pow_base(&self, a: &Expr, out: &mut String) {
        let atom = matches!(a, Expr::Name(_) | Expr::Time)
            || matches!(a, Expr::Number(v) if *v >= 0.0 && v.fract() == 0.0 && *v < 1e15);
        if atom {
            self.expr(a, out);
        } else {
            out.push_str("\\left(");
            self.expr(a, out);
            out.push_str("\\right)");
        }
    }

    fn exponent_text(&self, b: &Expr, out: &mut String) {
        self.expr(b, out);
    }

    fn c_pow(&self, a: &Expr, b: &Expr, out: &mut String) {
        out.push_str("pow(");
        self.expr(a, out);
        out.push_str(", ");
        self.expr(b, out);
        out.push(')');
    }

    fn rust_pow(&self, a: &Expr, b: &Expr, out: &mut String) {
        self.rust_receiver(a, out);
        match b {
            Expr::Number(v) if v.fract() == 0.0 && v.abs() <= 1024.0 => {
                out.push_str(&format!(".powi({})", *v as i32));
            }
            _ => {
                out.push_str(".powf(");
                self.expr(b, out);
                out.push(')');
            }
        }
    }

    /// A method-call receiver in Rust: names and calls as they are, number
    /// literals typed (`2.0_f64`), anything else in parentheses.
    fn rust_receiver(&self, a: &Expr, out: &mut String) {
        match a {
            Expr::Number(v) if *v >= 0.0 => {
                out.push_str(&float_literal(*v));
                out.push_str("_f64");
            }
            Expr::Number(v) => {
                out.push_str(&format!("({}_f64)", float_literal(*v)));
            }
            Expr::Name(_) | Expr::Time | Expr::Call(..) | Expr::Binary(BinOp::Pow, _, _)
                if !constant(a) =>
            {
                self.expr(a, out)
            }
            // A receiver made only of literals has no type yet: `(1.0 + 2.0).ln()`
            // does not compile, `((1.0 + 2.0) as f64).ln()` does.
            _ if constant(a) => {
                out.push_str("((");
                self.expr(a, out);
                out.push_str(") as f64)");
            }
            _ => {
                out.push('(');
                self.expr(a, out);
                out.push(')');
            }
        }
    }

    fn call(&self, f: Func, args: &[Expr], out: &mut String) {
        let sx = self.syntax;
        if f == Func::Pow && args.len() == 2 && sx != Syntax::Mech {
            let e = Expr::bin(BinOp::Pow, args[0].clone(), args[1].clone());
            // Printed as the operator; parenthesised because a call is an atom.
            let mut inner = String::new();
            self.expr(&e, &mut inner);
            if needs_parens(&e, Some(BinOp::Pow), Place::Left)
                && !matches!(sx, Syntax::C | Syntax::Rust)
            {
                self.open(out);
                out.push_str(&inner);
                self.close(out);
            } else {
                out.push_str(&inner);
            }
            return;
        }
        match sx {
            Syntax::Rust => return self.rust_call(f, args, out),
            Syntax::Latex => return self.latex_call(f, args, out),
            _ => {}
        }
        let fname = match (sx, f) {
            (Syntax::Mech, _) => f.name(),
            (Syntax::Python, Func::Exp) => "np.exp",
            (Syntax::Python, Func::Ln) => "np.log",
            (Syntax::Python, Func::Log10) => "np.log10",
            (Syntax::Python, Func::Sqrt) => "np.sqrt",
            (Syntax::Python, Func::Abs) => "np.abs",
            (Syntax::Python, Func::Min) => "np.fmin",
            (Syntax::Python, Func::Max) => "np.fmax",
            (Syntax::C, Func::Abs) => "fabs",
            (Syntax::C, Func::Min) => "fmin",
            (Syntax::C, Func::Max) => "fmax",
            (_, Func::Ln) => "log",
            (_, f) => f.name(),
        };
        out.push_str(fname);
        out.push('(');
        for (i, a) in args.iter().enumerate() {
            if i > 0 {
                out.push_str(", ");
            }
            self.expr(a, out);
        }
        out.push(')');
    }

    fn rust_call(&self, f: Func, args: &[Expr], out: &mut String) {
        let Some(a) = args.first() else { return };
        self.rust_receiver(a, out);
        let method = match f {
            Func::Exp => "exp",
            Func::Ln => "ln",
            Func::Log10 => "log10",
            Func::Sqrt => "sqrt",
            Func::Abs => "abs",
            Func::Min => "min",
            Func::Max => "max",
            Func::Pow => "powf",
        };
        out.push('.');
        out.push_str(method);
        out.push('(');
        if let Some(b) = args.get(1) {
            self.expr(b, out);
        }
        out.push(')');
    }

    fn latex_call(&self, f: Func, args: &[Expr], out: &mut String) {
        let arg = |i: usize, out: &mut String| {
            if let Some(a) = args.get(i) {
                self.expr(a, out)
            }
        };
        match f {
            Func::Sqrt => {
                out.push_str("\\sqrt{");
                arg(0, out);
                out.push('}');
            }
            Func::Abs => {
                out.push_str("\\left|");
                arg(0, out);
                out.push_str("\\right|");
            }
            _ => {
                out.push_str(match f {
                    Func::Exp => "\\exp",
                    Func::Ln => "\\ln",
                    Func::Log10 => "\\log_{10}",
                    Func::Min => "\\min",
                    Func::Max => "\\max",
                    _ => "\\operatorname{pow}",
                });
                out.push_str("\\left(");
                arg(0, out);
                if args.len() > 1 {
                    out.push_str(", ");
                    arg(1, out);
                }
                out.push_str("\\right)");
            }
        }
    }

    fn number(&self, v: f64) -> String {
        if !v.is_finite() {
            return match self.syntax {
                Syntax::Python => if v.is_nan() {
                    "np.nan"
                } else if v > 0.0 {
                    "np.inf"
                } else {
                    "-np.inf"
                }
                .into(),
                Syntax::C => if v.is_nan() {
                    "NAN"
                } else if v > 0.0 {
                    "INFINITY"
                } else {
                    "-INFINITY"
                }
                .into(),
                Syntax::Rust => if v.is_nan() {
                    "f64::NAN"
                } else if v > 0.0 {
                    "f64::INFINITY"
                } else {
                    "f64::NEG_INFINITY"
                }
                .into(),
                Syntax::Latex => if v.is_nan() {
                    "\\mathrm{NaN}"
                } else if v > 0.0 {
                    "\\infty"
                } else {
                    "-\\infty"
                }
                .into(),
                Syntax::R => if v.is_nan() {
                    "NaN"
                } else if v > 0.0 {
                    "Inf"
                } else {
                    "-Inf"
                }
                .into(),
                Syntax::Julia => if v.is_nan() {
                    "NaN"
                } else if v > 0.0 {
                    "Inf"
                } else {
                    "-Inf"
                }
                .into(),
                Syntax::Octave => if v.is_nan() {
                    "NaN"
                } else if v > 0.0 {
                    "Inf"
                } else {
                    "-Inf"
                }
                .into(),
                Syntax::Mech | Syntax::MathML => format!("{v}"),
            };
        }
        match self.syntax {
            Syntax::C | Syntax::Rust | Syntax::Julia => float_literal(v),
            Syntax::Latex => latex_number(v),
            _ => plain_literal(v),
        }
    }
}

/// Whether an expression has no names and no `t` (only literals).
fn constant(e: &Expr) -> bool {
    e.names().is_empty() && !e.mentions_time()
}

/// `1.5e-7` → `1.5 \times 10^{-7}`.
fn latex_number(v: f64) -> String {
    let s = plain_literal(v);
    match s.split_once('e') {
        Some((mantissa, exp)) => {
            let exp = exp.trim_start_matches('+');
            if mantissa == "1" || mantissa == "1.0" {
                format!("10^{{{exp}}}")
            } else {
                format!("{} \\times 10^{{{exp}}}", mantissa.trim_end_matches(".0"))
            }
        }
        None => s,
    }
}

/// Content MathML: every operator is an `<apply>`, so no precedence is needed.
fn mathml(e: &Expr, name: &dyn Fn(Sym) -> String, out: &mut String) {
    match e {
        Expr::Number(v) => {
            if v.fract() == 0.0 && v.abs() < 1e15 {
                out.push_str(&format!("<cn type=\"integer\"> {} </cn>", *v as i64));
            } else if v.is_finite() {
                // `e-notation` keeps the exact value without a long decimal.
                let s = float_literal(*v);
                match s.split_once('e') {
                    Some((m, x)) => out.push_str(&format!("<cn type=\"e-notation\"> {m} <sep/> {x} </cn>")),
                    None => out.push_str(&format!("<cn type=\"real\"> {s} </cn>")),
                }
            } else if v.is_nan() {
                out.push_str("<notanumber/>");
            } else if *v > 0.0 {
                out.push_str("<infinity/>");
            } else {
                out.push_str("<apply><minus/><infinity/></apply>");
            }
        }
        Expr::Name(s) => out.push_str(&format!("<ci> {} </ci>", xml_escape(&name(*s)))),
        Expr::Time => out.push_str(
            "<csymbol encoding=\"text\" definitionURL=\"http://www.sbml.org/sbml/symbols/time\"> t </csymbol>",
        ),
        Expr::Neg(a) => {
            out.push_str("<apply><minus/>");
            mathml(a, name, out);
            out.push_str("</apply>");
        }
        Expr::Binary(op, a, b) => {
            out.push_str(match op {
                BinOp::Add => "<apply><plus/>",
                BinOp::Sub => "<apply><minus/>",
                BinOp::Mul => "<apply><times/>",
                BinOp::Div => "<apply><divide/>",
                BinOp::Pow => "<apply><power/>",
            });
            mathml(a, name, out);
            mathml(b, name, out);
            out.push_str("</apply>");
        }
        Expr::Call(f, args) => {
            out.push_str(match f {
                Func::Exp => "<apply><exp/>",
                Func::Ln => "<apply><ln/>",
                Func::Log10 => "<apply><log/><logbase><cn type=\"integer\"> 10 </cn></logbase>",
                Func::Sqrt => "<apply><root/>",
                Func::Abs => "<apply><abs/>",
                Func::Min => "<apply><min/>",
                Func::Max => "<apply><max/>",
                Func::Pow => "<apply><power/>",
            });
            for a in args {
                mathml(a, name, out);
            }
            out.push_str("</apply>");
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const A: Sym = Sym::Species(0);
    const B: Sym = Sym::Species(1);
    const C: Sym = Sym::Param(0);

    fn n(s: Sym) -> String {
        match s {
            A => "a".into(),
            B => "b".into(),
            _ => "c".into(),
        }
    }
    fn a() -> Expr {
        Expr::Name(A)
    }
    fn b() -> Expr {
        Expr::Name(B)
    }
    fn c() -> Expr {
        Expr::Name(C)
    }
    fn p(e: &Expr, sx: Syntax) -> String {
        print_expr(e, &n, sx)
    }

    #[test]
    fn parentheses_follow_the_table() {
        let e = Expr::sub(a(), Expr::sub(b(), c()));
        assert_eq!(p(&e, Syntax::Mech), "a - (b - c)");
        let e = Expr::sub(Expr::sub(a(), b()), c());
        assert_eq!(p(&e, Syntax::Mech), "a - b - c");
        let e = Expr::bin(BinOp::Div, a(), Expr::mul(b(), c()));
        assert_eq!(p(&e, Syntax::Mech), "a / (b * c)");
        let e = Expr::mul(Expr::add(a(), b()), c());
        assert_eq!(p(&e, Syntax::Python), "(a + b) * c");
        let e = Expr::pow(Expr::pow(a(), b()), c());
        assert_eq!(p(&e, Syntax::Python), "(a**b)**c");
        let e = Expr::pow(a(), Expr::Number(-1.0));
        assert_eq!(p(&e, Syntax::Python), "a**(-1)");
        assert_eq!(p(&e, Syntax::Julia), "a^(-1)");
        let e = Expr::Neg(Box::new(Expr::add(a(), b())));
        assert_eq!(p(&e, Syntax::R), "-(a + b)");
        let e = Expr::add(a(), Expr::Neg(Box::new(b())));
        assert_eq!(p(&e, Syntax::C), "a + (-b)");
    }

    #[test]
    fn target_spellings() {
        let e = Expr::Call(Func::Ln, vec![Expr::pow(a(), Expr::Number(2.0))]);
        assert_eq!(p(&e, Syntax::Mech), "ln(a^2)");
        assert_eq!(p(&e, Syntax::Python), "np.log(a**2)");
        assert_eq!(p(&e, Syntax::C), "log(pow(a, 2.0))");
        assert_eq!(p(&e, Syntax::Rust), "a.powi(2).ln()");
        assert_eq!(p(&e, Syntax::Octave), "log(a.^2)");
        assert_eq!(p(&e, Syntax::Julia), "log(a^2)");
        assert_eq!(p(&e, Syntax::Latex), "\\ln\\left(a^{2}\\right)");
        let e = Expr::bin(BinOp::Div, Expr::Number(1.0), Expr::Number(3.0));
        assert_eq!(p(&e, Syntax::C), "1.0 / 3.0");
        assert_eq!(p(&e, Syntax::Latex), "\\frac{1}{3}");
        assert_eq!(latex_name("k_on"), "k_{\\mathrm{on}}");
        assert_eq!(latex_number(1.5e-7), "1.5 \\times 10^{-7}");
        let e = Expr::Call(Func::Max, vec![a(), Expr::Number(0.5)]);
        assert_eq!(
            p(&e, Syntax::MathML),
            "<apply><max/><ci> a </ci><cn type=\"real\"> 0.5 </cn></apply>"
        );
    }

    #[test]
    fn literals_round_trip() {
        for v in [
            0.1,
            1.0 / 3.0,
            6.02214076e23,
            1e-300,
            2.5,
            1e16,
            123456789.0,
        ] {
            assert_eq!(float_literal(v).parse::<f64>().unwrap(), v);
            assert!(float_literal(v).contains(['.', 'e']));
            assert_eq!(plain_literal(v).parse::<f64>().unwrap(), v);
        }
    }
}
