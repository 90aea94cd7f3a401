//! Stage 2: the normalised form, a hash-consed DAG.
//!
//! A [`Graph`] stores each distinct node once (equal subexpressions share one [`Id`]), and can
//! only grow through constructors that fold constants and apply the identities that keep
//! expressions small: `x+0`, `x*1`, `x*0` (see below), `x^1`, `x^0`, `--x`, `1^x`. Children are
//! always created before their parents, so ids are a topological order and no pass needs to
//! recurse over the graph.
//!
//! `x*0 = 0` and `0/x = 0` assume `x` finite, as any algebra system does; a constant is folded
//! only when the result is finite, so the graph never holds an infinity or a NaN.
//!
//! ```
//! use efold::{config::Limits, ir::{Graph, Scope}, syntax};
//! let scope = Scope::new("phi", &["alpha"]);
//! let mut g = Graph::new(scope);
//! let ast = syntax::parse("(phi + 0) * 1 + phi^2 / (6*alpha)", &Limits::default())?;
//! let v = g.lower(&ast).unwrap();
//! assert_eq!(g.print(v), "phi + phi^2/(6*alpha)");
//! let dv = g.derivative(v);
//! assert_eq!(g.print(dv), "1 + 2*phi/(6*alpha)");
//! # Ok::<(), efold::syntax::SyntaxError>(())
//! ```

use crate::diag::{closest, Diagnostic, Span};
use crate::language::syntax::{BinOp, Expr, ExprKind};
use crate::numerics::elementary;
use rustc_hash::FxHashMap as HashMap;
use std::fmt;

/// A node's index in its [`Graph`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Id(pub u32);

impl Id {
    /// The index as usize.
    pub fn index(self) -> usize {
        self.0 as usize
    }
}

/// Built-in functions of one argument.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[allow(missing_docs)]
pub enum Func {
    Exp,
    Log,
    Sqrt,
    Sin,
    Cos,
    Tan,
    Asin,
    Acos,
    Atan,
    Sinh,
    Cosh,
    Tanh,
    Sech,
    Asinh,
    Acosh,
    Atanh,
    Abs,
}

impl Func {
    /// Every built-in function of one argument, in the order the docs list them.
    pub const ALL: [Func; 17] = [
        Func::Exp,
        Func::Log,
        Func::Sqrt,
        Func::Sin,
        Func::Cos,
        Func::Tan,
        Func::Asin,
        Func::Acos,
        Func::Atan,
        Func::Sinh,
        Func::Cosh,
        Func::Tanh,
        Func::Sech,
        Func::Asinh,
        Func::Acosh,
        Func::Atanh,
        Func::Abs,
    ];

    /// The name used when printing.
    pub fn name(self) -> &'static str {
        match self {
            Func::Exp => "exp",
            Func::Log => "log",
            Func::Sqrt => "sqrt",
            Func::Sin => "sin",
            Func::Cos => "cos",
            Func::Tan => "tan",
            Func::Asin => "asin",
            Func::Acos => "acos",
            Func::Atan => "atan",
            Func::Sinh => "sinh",
            Func::Cosh => "cosh",
            Func::Tanh => "tanh",
            Func::Sech => "sech",
            Func::Asinh => "asinh",
            Func::Acosh => "acosh",
            Func::Atanh => "atanh",
            Func::Abs => "abs",
        }
    }

    /// Looks a function up by name (`ln` is `log`).
    pub fn from_name(name: &str) -> Option<Func> {
        if name == "ln" {
            return Some(Func::Log);
        }
        Func::ALL.into_iter().find(|f| f.name() == name)
    }

    /// The function's value in f64. The tape (single points and batches), the jets and the
    /// constant folder all call this, so a folded constant is bit-for-bit what the evaluator
    /// would have computed. exp and tanh are efold's own branch-free kernels
    /// ([`crate::numerics::elementary`]), which vectorise in batches; the rest are the
    /// platform's.
    #[inline]
    pub fn apply(self, x: f64) -> f64 {
        match self {
            Func::Exp => elementary::exp(x),
            Func::Log => x.ln(),
            Func::Sqrt => x.sqrt(),
            Func::Sin => x.sin(),
            Func::Cos => x.cos(),
            Func::Tan => x.tan(),
            Func::Asin => x.asin(),
            Func::Acos => x.acos(),
            Func::Atan => x.atan(),
            Func::Sinh => x.sinh(),
            Func::Cosh => x.cosh(),
            Func::Tanh => elementary::tanh(x),
            Func::Sech => 1.0 / x.cosh(),
            Func::Asinh => x.asinh(),
            Func::Acosh => x.acosh(),
            Func::Atanh => x.atanh(),
            Func::Abs => x.abs(),
        }
    }
}

/// Integer exponents up to this size are stored as [`Node::PowI`] and evaluated by repeated
/// multiplication; larger ones by `powf`.
pub const MAX_POWI: i32 = 16;

/// One node of the DAG. Operands are ids of earlier nodes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Node {
    /// A finite constant, stored as its bits.
    Const(u64),
    /// The i-th field of the [`Scope`].
    Var(u32),
    /// The i-th parameter of the [`Scope`].
    Param(u32),
    /// a + b
    Add(Id, Id),
    /// a - b
    Sub(Id, Id),
    /// a * b
    Mul(Id, Id),
    /// a / b
    Div(Id, Id),
    /// -a
    Neg(Id),
    /// a ^ n for a small integer n.
    PowI(Id, i32),
    /// a ^ b in general.
    Pow(Id, Id),
    /// f(a)
    Func(Func, Id),
}

/// The names an expression may use: the fields and the parameters, each in order. One field
/// is the common case ([`Scope::new`]); [`Scope::with_fields`] makes a scope of several.
///
/// A field's index is its coordinate in a point of field space (the slot the evaluator loads
/// it from), a parameter's index its slot among the parameters. A name is either a field or a
/// parameter, never both: [`Scope::with_fields`] refuses a clash, and for one field the model
/// loader checks it where the names are declared.
#[derive(Debug, Clone, PartialEq)]
pub struct Scope {
    /// The fields' names, at least one (default `phi`).
    pub fields: Vec<String>,
    /// Parameter names; a parameter's index here is its slot in the evaluator.
    pub params: Vec<String>,
}

impl Scope {
    /// A scope with one field and parameter names.
    pub fn new(field: &str, params: &[&str]) -> Scope {
        Scope {
            fields: vec![field.to_string()],
            params: params.iter().map(|p| p.to_string()).collect(),
        }
    }

    /// A scope with several fields (coordinates of field space, in order) and parameters.
    ///
    /// # Errors
    /// [`ScopeError`] if there is no field, or a name is given twice (two fields, two
    /// parameters, or a field and a parameter).
    ///
    /// ```
    /// use efold::ir::Scope;
    /// let s = Scope::with_fields(&["phi", "sigma"], &["m"]).unwrap();
    /// assert_eq!((s.n_fields(), s.field_index("sigma")), (2, Some(1)));
    /// assert!(Scope::with_fields(&["phi", "m"], &["m"]).is_err());
    /// ```
    pub fn with_fields(fields: &[&str], params: &[&str]) -> Result<Scope, ScopeError> {
        if fields.is_empty() {
            return Err(ScopeError::NoField);
        }
        let names: Vec<&str> = fields.iter().chain(params).copied().collect();
        for (i, name) in names.iter().enumerate() {
            if let Some(j) = names[..i].iter().position(|n| n == name) {
                let field = |k: usize| k < fields.len();
                return Err(ScopeError::Twice {
                    name: name.to_string(),
                    first_is_field: field(j),
                    second_is_field: field(i),
                });
            }
        }
        Ok(Scope {
            fields: fields.iter().map(|f| f.to_string()).collect(),
            params: params.iter().map(|p| p.to_string()).collect(),
        })
    }

    /// The first field's name: the field, in a scope of one.
    pub fn field(&self) -> &str {
        &self.fields[0]
    }

    /// Number of fields.
    pub fn n_fields(&self) -> usize {
        self.fields.len()
    }

    /// The index of a field by name.
    pub fn field_index(&self, name: &str) -> Option<usize> {
        self.fields.iter().position(|f| f == name)
    }

    fn param_index(&self, name: &str) -> Option<usize> {
        self.params.iter().position(|p| p == name)
    }
}

/// A scope that cannot be built: see [`Scope::with_fields`].
#[derive(Debug, Clone, PartialEq)]
pub enum ScopeError {
    /// The list of fields is empty.
    NoField,
    /// One name declared twice.
    Twice {
        /// The name.
        name: String,
        /// Whether the first declaration is a field (else a parameter).
        first_is_field: bool,
        /// Whether the second declaration is a field (else a parameter).
        second_is_field: bool,
    },
}

impl ScopeError {
    /// The error in words, with how to fix it.
    pub fn diagnostic(&self) -> Diagnostic {
        match self {
            ScopeError::NoField => {
                Diagnostic::new("no field declared").with_hint("an expression needs at least one field, such as `phi`")
            }
            ScopeError::Twice {
                name,
                first_is_field,
                second_is_field,
            } => {
                let what = |f: bool| if f { "a field" } else { "a parameter" };
                Diagnostic::new(format!(
                    "`{name}` is declared as {} and again as {}",
                    what(*first_is_field),
                    what(*second_is_field)
                ))
                .with_hint("rename one of them: each name is one field or one parameter")
            }
        }
    }
}

impl fmt::Display for ScopeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.diagnostic().message)
    }
}

impl std::error::Error for ScopeError {}

/// Built-in constants.
pub const CONSTANTS: [(&str, f64); 1] = [("pi", std::f64::consts::PI)];

/// A name that could not be resolved, or a call with the wrong number of arguments.
#[derive(Debug, Clone, PartialEq)]
pub struct NameError {
    /// What went wrong.
    pub kind: NameErrorKind,
    /// Where.
    pub span: Span,
}

/// The kinds of [`NameError`].
#[derive(Debug, Clone, PartialEq)]
pub enum NameErrorKind {
    /// A call to a function the language does not have.
    UnknownFunction {
        /// The name as written.
        name: String,
        /// A close built-in name, if any.
        suggestion: Option<String>,
        /// True if the name is a parameter or a field (a missing `*`).
        is_variable: bool,
    },
    /// A name that is neither a field, a parameter nor a constant.
    UnknownName {
        /// The name as written.
        name: String,
        /// A close name in scope, if any.
        suggestion: Option<String>,
        /// The fields' names.
        fields: Vec<String>,
        /// The parameters in scope.
        params: Vec<String>,
    },
    /// A function called with the wrong number of arguments.
    Arity {
        /// The function.
        name: String,
        /// How many it takes.
        expected: usize,
        /// How many it got.
        found: usize,
    },
    /// A function name used without a call.
    FunctionAsValue {
        /// The function.
        name: String,
    },
}

impl NameError {
    /// The error in words, pointing at its span.
    pub fn diagnostic(&self) -> Diagnostic {
        use NameErrorKind::*;
        match &self.kind {
            UnknownFunction {
                name,
                suggestion,
                is_variable,
            } => {
                let d = Diagnostic::new(format!("unknown function `{name}`"))
                    .with_span(self.span, "not a built-in function");
                if *is_variable {
                    d.with_hint(format!("`{name}` is a variable: write `{name}*(...)` to multiply"))
                } else if let Some(s) = suggestion {
                    d.with_hint(format!("did you mean `{s}`?"))
                } else {
                    d.with_hint(format!("the functions are: {}, pow", function_names().join(", ")))
                }
            }
            UnknownName {
                name,
                suggestion,
                fields,
                params,
            } => unknown_name(self.span, name, suggestion.as_deref(), fields, params),
            Arity { name, expected, found } => {
                let s = |n: usize| if n == 1 { "" } else { "s" };
                Diagnostic::new(format!(
                    "`{name}` takes {expected} argument{}, but {found} {} given",
                    s(*expected),
                    if *found == 1 { "was" } else { "were" }
                ))
                .with_span(self.span, format!("{found} argument{}", s(*found)))
                .with_hint(if name == "pow" {
                    "write `pow(x, y)`, or `x^y`".to_string()
                } else {
                    format!("write `{name}(x)`")
                })
            }
            FunctionAsValue { name } => Diagnostic::new(format!("`{name}` is a function, not a value"))
                .with_span(self.span, "needs an argument")
                .with_hint(format!("write `{name}(x)`")),
        }
    }
}

impl fmt::Display for NameError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.diagnostic().message)
    }
}

impl std::error::Error for NameError {}

/// The diagnostic of [`NameErrorKind::UnknownName`].
fn unknown_name(span: Span, name: &str, suggestion: Option<&str>, fields: &[String], params: &[String]) -> Diagnostic {
    let quoted = |names: &[String]| names.iter().map(|n| format!("`{n}`")).collect::<Vec<_>>().join(", ");
    let (label, fields) = match fields {
        [one] => ("not the field, a parameter or a constant", format!("the field `{one}`")),
        several => (
            "not a field, a parameter or a constant",
            format!("the fields {}", quoted(several)),
        ),
    };
    let mut d = Diagnostic::new(format!("unknown name `{name}`")).with_span(span, label);
    if let Some(s) = suggestion {
        d = d.with_hint(format!("did you mean `{s}`?"));
    }
    let list = if params.is_empty() {
        "none".to_string()
    } else {
        quoted(params)
    };
    d.with_hint(format!("in scope: {fields}, the constant `pi`, and parameters: {list}"))
        .with_hint(format!(
            "declare it with `--param {name}=VALUE`, or `{name} = VALUE` under [params] in a model file"
        ))
}

fn function_names() -> Vec<&'static str> {
    Func::ALL.iter().map(|f| f.name()).collect()
}

/// The hash-consed DAG. See the module docs.
#[derive(Debug, Clone)]
pub struct Graph {
    nodes: Vec<Node>,
    index: HashMap<Node, Id>,
    /// Whether each node depends on any field.
    varying: Vec<bool>,
    scope: Scope,
}

impl Graph {
    /// An empty graph over a scope.
    pub fn new(scope: Scope) -> Graph {
        Graph {
            nodes: Vec::new(),
            index: HashMap::default(),
            varying: Vec::new(),
            scope,
        }
    }

    /// The scope the graph's parameters refer to.
    pub fn scope(&self) -> &Scope {
        &self.scope
    }

    /// The node behind an id.
    pub fn node(&self, id: Id) -> Node {
        self.nodes[id.index()]
    }

    /// Number of distinct nodes.
    pub fn len(&self) -> usize {
        self.nodes.len()
    }

    /// True if the graph holds no node.
    pub fn is_empty(&self) -> bool {
        self.nodes.is_empty()
    }

    /// True if the node depends on any field.
    pub fn is_varying(&self, id: Id) -> bool {
        self.varying[id.index()]
    }

    /// The node's constant value, if it is a constant.
    pub fn constant_value(&self, id: Id) -> Option<f64> {
        match self.node(id) {
            Node::Const(bits) => Some(f64::from_bits(bits)),
            _ => None,
        }
    }

    fn is_const(&self, id: Id, v: f64) -> bool {
        self.constant_value(id) == Some(v)
    }

    fn intern(&mut self, node: Node) -> Id {
        if let Some(&id) = self.index.get(&node) {
            return id;
        }
        let id = Id(self.nodes.len() as u32);
        let varying = match node {
            Node::Var(_) => true,
            Node::Const(_) | Node::Param(_) => false,
            Node::Add(a, b) | Node::Sub(a, b) | Node::Mul(a, b) | Node::Div(a, b) | Node::Pow(a, b) => {
                self.is_varying(a) || self.is_varying(b)
            }
            Node::Neg(a) | Node::PowI(a, _) | Node::Func(_, a) => self.is_varying(a),
        };
        self.nodes.push(node);
        self.varying.push(varying);
        self.index.insert(node, id);
        id
    }

    /// A constant. Non-finite values are refused (the graph holds finite constants only).
    pub fn constant(&mut self, v: f64) -> Id {
        assert!(v.is_finite(), "ir: constants are finite");
        // -0.0 and 0.0 are one constant: they behave alike everywhere except 1/x.
        let v = if v == 0.0 { 0.0 } else { v };
        self.intern(Node::Const(v.to_bits()))
    }

    /// The first field: the field, in a scope of one.
    pub fn var(&mut self) -> Id {
        self.field_var(0)
    }

    /// The i-th field of the scope.
    pub fn field_var(&mut self, i: usize) -> Id {
        debug_assert!(i < self.scope.n_fields(), "ir: field {i} outside the scope");
        self.intern(Node::Var(i as u32))
    }

    /// The i-th parameter.
    pub fn param(&mut self, i: usize) -> Id {
        self.intern(Node::Param(i as u32))
    }

    /// Folds `f` over constant operands when the result is finite.
    fn fold2(&mut self, a: Id, b: Id, f: impl Fn(f64, f64) -> f64) -> Option<Id> {
        let (x, y) = (self.constant_value(a)?, self.constant_value(b)?);
        let v = f(x, y);
        v.is_finite().then(|| self.constant(v))
    }

    /// Constants first, then by id: one order for the operands of + and *.
    fn ordered(&self, a: Id, b: Id) -> (Id, Id) {
        let key = |id: Id| (self.constant_value(id).is_none(), id);
        if key(a) <= key(b) {
            (a, b)
        } else {
            (b, a)
        }
    }

    /// a + b
    pub fn add(&mut self, a: Id, b: Id) -> Id {
        if let Some(c) = self.fold2(a, b, |x, y| x + y) {
            return c;
        }
        if self.is_const(a, 0.0) {
            return b;
        }
        if self.is_const(b, 0.0) {
            return a;
        }
        if let Node::Neg(nb) = self.node(b) {
            return self.sub(a, nb);
        }
        if let Node::Neg(na) = self.node(a) {
            return self.sub(b, na);
        }
        let (a, b) = self.ordered(a, b);
        self.intern(Node::Add(a, b))
    }

    /// a - b
    pub fn sub(&mut self, a: Id, b: Id) -> Id {
        if let Some(c) = self.fold2(a, b, |x, y| x - y) {
            return c;
        }
        if self.is_const(b, 0.0) {
            return a;
        }
        if self.is_const(a, 0.0) {
            return self.neg(b);
        }
        if let Node::Neg(nb) = self.node(b) {
            return self.add(a, nb);
        }
        self.intern(Node::Sub(a, b))
    }

    /// a * b
    pub fn mul(&mut self, a: Id, b: Id) -> Id {
        if let Some(c) = self.fold2(a, b, |x, y| x * y) {
            return c;
        }
        if self.is_const(a, 0.0) || self.is_const(b, 0.0) {
            return self.constant(0.0);
        }
        if self.is_const(a, 1.0) {
            return b;
        }
        if self.is_const(b, 1.0) {
            return a;
        }
        if self.is_const(a, -1.0) {
            return self.neg(b);
        }
        if self.is_const(b, -1.0) {
            return self.neg(a);
        }
        match (self.node(a), self.node(b)) {
            (Node::Neg(x), Node::Neg(y)) => return self.mul(x, y),
            (Node::Neg(x), _) => {
                let m = self.mul(x, b);
                return self.neg(m);
            }
            (_, Node::Neg(y)) => {
                let m = self.mul(a, y);
                return self.neg(m);
            }
            _ => {}
        }
        let (a, b) = self.ordered(a, b);
        self.intern(Node::Mul(a, b))
    }

    /// a / b
    pub fn div(&mut self, a: Id, b: Id) -> Id {
        if let Some(c) = self.fold2(a, b, |x, y| x / y) {
            return c;
        }
        if self.is_const(a, 0.0) && !self.is_const(b, 0.0) {
            return self.constant(0.0);
        }
        if self.is_const(b, 1.0) {
            return a;
        }
        if self.is_const(b, -1.0) {
            return self.neg(a);
        }
        self.intern(Node::Div(a, b))
    }

    /// -a
    pub fn neg(&mut self, a: Id) -> Id {
        if let Some(x) = self.constant_value(a) {
            return self.constant(-x);
        }
        if let Node::Neg(x) = self.node(a) {
            return x;
        }
        self.intern(Node::Neg(a))
    }

    /// a ^ b
    pub fn pow(&mut self, a: Id, b: Id) -> Id {
        if let Some(c) = self.fold2(a, b, f64::powf) {
            return c;
        }
        if self.is_const(a, 1.0) {
            return a;
        }
        if let Some(y) = self.constant_value(b) {
            if y.fract() == 0.0 && y.abs() <= f64::from(MAX_POWI) {
                return self.powi(a, y as i32);
            }
        }
        self.intern(Node::Pow(a, b))
    }

    /// a ^ n for an integer n.
    pub fn powi(&mut self, a: Id, n: i32) -> Id {
        if n.abs() > MAX_POWI {
            let e = self.constant(f64::from(n));
            return self.intern(Node::Pow(a, e));
        }
        if n == 0 {
            return self.constant(1.0);
        }
        if n == 1 {
            return a;
        }
        if let Some(x) = self.constant_value(a) {
            let v = x.powi(n);
            if v.is_finite() {
                return self.constant(v);
            }
        }
        self.intern(Node::PowI(a, n))
    }

    /// f(a)
    pub fn func(&mut self, f: Func, a: Id) -> Id {
        if let Some(x) = self.constant_value(a) {
            let v = f.apply(x);
            if v.is_finite() {
                return self.constant(v);
            }
        }
        self.intern(Node::Func(f, a))
    }

    /// Lowers a syntax tree into the graph, resolving names against the scope.
    pub fn lower(&mut self, e: &Expr) -> Result<Id, NameError> {
        match &e.kind {
            ExprKind::Number(v) => Ok(self.constant(*v)),
            ExprKind::Ident(name) => self.lower_name(name, e.span),
            ExprKind::Neg(a) => {
                let a = self.lower(a)?;
                Ok(self.neg(a))
            }
            ExprKind::Binary(op, a, b) => {
                let (a, b) = (self.lower(a)?, self.lower(b)?);
                Ok(match op {
                    BinOp::Add => self.add(a, b),
                    BinOp::Sub => self.sub(a, b),
                    BinOp::Mul => self.mul(a, b),
                    BinOp::Div => self.div(a, b),
                    BinOp::Pow => self.pow(a, b),
                })
            }
            ExprKind::Call { name, name_span, args } => self.lower_call(name, *name_span, args, e.span),
        }
    }

    fn lower_name(&mut self, name: &str, span: Span) -> Result<Id, NameError> {
        if let Some(i) = self.scope.field_index(name) {
            return Ok(self.field_var(i));
        }
        if let Some(i) = self.scope.param_index(name) {
            return Ok(self.param(i));
        }
        if let Some((_, v)) = CONSTANTS.iter().find(|(n, _)| *n == name) {
            return Ok(self.constant(*v));
        }
        if Func::from_name(name).is_some() || name == "pow" {
            return Err(NameError {
                kind: NameErrorKind::FunctionAsValue { name: name.to_string() },
                span,
            });
        }
        let mut known: Vec<&str> = self.scope.fields.iter().map(String::as_str).collect();
        known.extend(self.scope.params.iter().map(String::as_str));
        known.extend(CONSTANTS.iter().map(|(n, _)| *n));
        Err(NameError {
            kind: NameErrorKind::UnknownName {
                name: name.to_string(),
                suggestion: closest(name, known).map(str::to_string),
                fields: self.scope.fields.clone(),
                params: self.scope.params.clone(),
            },
            span,
        })
    }

    fn lower_call(&mut self, name: &str, name_span: Span, args: &[Expr], span: Span) -> Result<Id, NameError> {
        let arity = |expected: usize| -> Result<(), NameError> {
            if args.len() == expected {
                Ok(())
            } else {
                Err(NameError {
                    kind: NameErrorKind::Arity {
                        name: name.to_string(),
                        expected,
                        found: args.len(),
                    },
                    span,
                })
            }
        };
        if name == "pow" {
            arity(2)?;
            let (a, b) = (self.lower(&args[0])?, self.lower(&args[1])?);
            return Ok(self.pow(a, b));
        }
        let Some(f) = Func::from_name(name) else {
            let is_variable = self.scope.field_index(name).is_some() || self.scope.param_index(name).is_some();
            let mut names = function_names();
            names.extend(["ln", "pow"]);
            return Err(NameError {
                kind: NameErrorKind::UnknownFunction {
                    name: name.to_string(),
                    suggestion: closest(name, names).map(str::to_string),
                    is_variable,
                },
                span: name_span,
            });
        };
        arity(1)?;
        let a = self.lower(&args[0])?;
        Ok(self.func(f, a))
    }

    /// The nodes reachable from `roots`, in ascending (topological) order.
    pub fn reachable(&self, roots: &[Id]) -> Vec<Id> {
        let mut seen = vec![false; self.nodes.len()];
        let mut stack: Vec<Id> = roots.to_vec();
        while let Some(id) = stack.pop() {
            if std::mem::replace(&mut seen[id.index()], true) {
                continue;
            }
            stack.extend(self.children(id));
        }
        (0..self.nodes.len())
            .filter(|&i| seen[i])
            .map(|i| Id(i as u32))
            .collect()
    }

    /// The operands of a node.
    pub fn children(&self, id: Id) -> impl Iterator<Item = Id> {
        let (a, b) = match self.node(id) {
            Node::Const(_) | Node::Var(_) | Node::Param(_) => (None, None),
            Node::Add(a, b) | Node::Sub(a, b) | Node::Mul(a, b) | Node::Div(a, b) | Node::Pow(a, b) => {
                (Some(a), Some(b))
            }
            Node::Neg(a) | Node::PowI(a, _) | Node::Func(_, a) => (Some(a), None),
        };
        a.into_iter().chain(b)
    }

    /// True if `abs` occurs under `root` (derivatives are then not smooth everywhere).
    pub fn has_abs(&self, root: Id) -> bool {
        self.reachable(&[root])
            .into_iter()
            .any(|id| matches!(self.node(id), Node::Func(Func::Abs, _)))
    }

    /// Evaluates, node by node, everything under `root` at field value `x` (a scope of one
    /// field); returns the first (innermost) node whose value is not finite, with that value. A
    /// slow reference path for diagnostics: "`log(phi - 1)` is NaN there".
    pub fn first_non_finite(&self, root: Id, x: f64, params: &[f64]) -> Option<(Id, f64)> {
        self.first_non_finite_at(root, std::slice::from_ref(&x), params)
    }

    /// [`Graph::first_non_finite`] at a point of field space, one value per field of the scope.
    ///
    /// # Panics
    /// If `point` has fewer values than the scope has fields.
    pub fn first_non_finite_at(&self, root: Id, point: &[f64], params: &[f64]) -> Option<(Id, f64)> {
        let mut val = vec![0.0; self.nodes.len()];
        for id in self.reachable(&[root]) {
            let v = |i: Id| val[i.index()];
            let y = match self.node(id) {
                Node::Const(bits) => f64::from_bits(bits),
                Node::Var(i) => point[i as usize],
                Node::Param(i) => params[i as usize],
                Node::Add(a, b) => v(a) + v(b),
                Node::Sub(a, b) => v(a) - v(b),
                Node::Mul(a, b) => v(a) * v(b),
                Node::Div(a, b) => v(a) / v(b),
                Node::Neg(a) => -v(a),
                Node::PowI(a, n) => elementary::powi(v(a), n),
                Node::Pow(a, b) => v(a).powf(v(b)),
                Node::Func(f, a) => f.apply(v(a)),
            };
            if !y.is_finite() {
                return Some((id, y));
            }
            val[id.index()] = y;
        }
        None
    }

    /// The symbolic derivative d/d(field) with respect to the first field (the field, in a
    /// scope of one), simplified by the same constructors: [`Graph::partial`] for field 0.
    pub fn derivative(&mut self, root: Id) -> Id {
        self.partial(root, 0)
    }

    /// The symbolic partial derivative with respect to the field of index `field`, the others
    /// held fixed, simplified by the same constructors.
    ///
    /// ```
    /// use efold::{config::Limits, ir::{Graph, Scope}, syntax};
    /// let mut g = Graph::new(Scope::with_fields(&["phi", "sigma"], &[]).unwrap());
    /// let v = g.lower(&syntax::parse("phi^2*sigma + sin(sigma)", &Limits::default())?).unwrap();
    /// let dv = g.partial(v, 1);
    /// assert_eq!(g.print(dv), "phi^2 + cos(sigma)");
    /// # Ok::<(), efold::syntax::SyntaxError>(())
    /// ```
    pub fn partial(&mut self, root: Id, field: usize) -> Id {
        let order = self.reachable(&[root]);
        // Which nodes depend on this field: with one field, exactly the varying ones.
        let mut depends = vec![false; self.nodes.len()];
        let mut d: HashMap<Id, Id> = HashMap::default();
        for id in order {
            let n = self.node(id);
            depends[id.index()] = n == Node::Var(field as u32) || self.children(id).any(|c| depends[c.index()]);
            let dv = self.derivative_of(id, field, &depends, &d);
            d.insert(id, dv);
        }
        d[&root]
    }

    /// One rule of differentiation with respect to field `field`; the operands' derivatives are
    /// in `d`, and `depends` tells which nodes depend on that field.
    fn derivative_of(&mut self, id: Id, field: usize, depends: &[bool], d: &HashMap<Id, Id>) -> Id {
        let zero = self.constant(0.0);
        let dep = |i: Id| depends[i.index()];
        if !dep(id) {
            return zero;
        }
        match self.node(id) {
            Node::Const(_) | Node::Param(_) => zero,
            Node::Var(i) if i as usize == field => self.constant(1.0),
            Node::Var(_) => zero,
            Node::Add(a, b) => self.add(d[&a], d[&b]),
            Node::Sub(a, b) => self.sub(d[&a], d[&b]),
            Node::Mul(a, b) => {
                let l = self.mul(d[&a], b);
                let r = self.mul(a, d[&b]);
                self.add(l, r)
            }
            Node::Div(a, b) if !dep(b) => self.div(d[&a], b),
            Node::Div(a, b) => {
                // (a' b - a b') / b^2
                let l = self.mul(d[&a], b);
                let r = self.mul(a, d[&b]);
                let num = self.sub(l, r);
                let den = self.powi(b, 2);
                self.div(num, den)
            }
            Node::Neg(a) => self.neg(d[&a]),
            Node::PowI(a, n) => {
                let c = self.constant(f64::from(n));
                let p = self.powi(a, n - 1);
                let cp = self.mul(c, p);
                self.mul(cp, d[&a])
            }
            Node::Pow(a, b) => {
                if dep(b) {
                    // a^b (b' log a + b a'/a)
                    let la = self.func(Func::Log, a);
                    let t1 = self.mul(d[&b], la);
                    let ba = self.mul(b, d[&a]);
                    let t2 = self.div(ba, a);
                    let s = self.add(t1, t2);
                    self.mul(id, s)
                } else {
                    // b a^(b-1) a'
                    let one = self.constant(1.0);
                    let bm1 = self.sub(b, one);
                    let p = self.pow(a, bm1);
                    let bp = self.mul(b, p);
                    self.mul(bp, d[&a])
                }
            }
            Node::Func(f, a) => {
                let g = self.func_derivative(f, a, id);
                self.mul(g, d[&a])
            }
        }
    }

    /// f'(a), where `fa` is the node f(a).
    fn func_derivative(&mut self, f: Func, a: Id, fa: Id) -> Id {
        let one = self.constant(1.0);
        let a2 = self.powi(a, 2);
        match f {
            Func::Exp => fa,
            Func::Log => self.div(one, a),
            Func::Sqrt => {
                let two = self.constant(2.0);
                let den = self.mul(two, fa);
                self.div(one, den)
            }
            Func::Sin => self.func(Func::Cos, a),
            Func::Cos => {
                let s = self.func(Func::Sin, a);
                self.neg(s)
            }
            Func::Tan => {
                let t2 = self.powi(fa, 2);
                self.add(one, t2)
            }
            Func::Asin | Func::Acos => {
                let w = self.sub(one, a2);
                let s = self.func(Func::Sqrt, w);
                let g = self.div(one, s);
                if f == Func::Acos {
                    self.neg(g)
                } else {
                    g
                }
            }
            Func::Atan => {
                let w = self.add(one, a2);
                self.div(one, w)
            }
            Func::Sinh => self.func(Func::Cosh, a),
            Func::Cosh => self.func(Func::Sinh, a),
            Func::Tanh => {
                let t2 = self.powi(fa, 2);
                self.sub(one, t2)
            }
            Func::Sech => {
                let t = self.func(Func::Tanh, a);
                let st = self.mul(fa, t);
                self.neg(st)
            }
            Func::Asinh => {
                let w = self.add(a2, one);
                let s = self.func(Func::Sqrt, w);
                self.div(one, s)
            }
            Func::Acosh => {
                let w = self.sub(a2, one);
                let s = self.func(Func::Sqrt, w);
                self.div(one, s)
            }
            Func::Atanh => {
                let w = self.sub(one, a2);
                self.div(one, w)
            }
            // The sign of a: not defined at a = 0, where abs is flagged as non-smooth.
            Func::Abs => self.div(a, fa),
        }
    }

    /// Prints a node back to the expression language, with the fewest parentheses that keep its
    /// grouping: parsing the result gives back an expression that evaluates identically.
    pub fn print(&self, id: Id) -> String {
        let mut out = String::new();
        self.print_into(id, 0, &mut out);
        out
    }

    /// Binding strength of a node as printed: 1 sums, 2 products, 3 negation, 4 powers, 5 atoms.
    fn level(&self, id: Id) -> u8 {
        match self.node(id) {
            Node::Add(..) | Node::Sub(..) => 1,
            Node::Mul(..) | Node::Div(..) => 2,
            Node::Neg(_) => 3,
            Node::Const(bits) if f64::from_bits(bits) < 0.0 => 3,
            Node::Pow(..) | Node::PowI(..) => 4,
            Node::Const(_) | Node::Var(_) | Node::Param(_) | Node::Func(..) => 5,
        }
    }

    fn print_into(&self, id: Id, min: u8, out: &mut String) {
        let paren = self.level(id) < min;
        if paren {
            out.push('(');
        }
        let bin = |s: &Self, a: Id, op: &str, la: u8, b: Id, lb: u8, out: &mut String| {
            s.print_into(a, la, out);
            out.push_str(op);
            s.print_into(b, lb, out);
        };
        match self.node(id) {
            Node::Const(bits) => out.push_str(&format_number(f64::from_bits(bits))),
            Node::Var(i) => out.push_str(&self.scope.fields[i as usize]),
            Node::Param(i) => out.push_str(&self.scope.params[i as usize]),
            Node::Add(a, b) => bin(self, a, " + ", 1, b, 2, out),
            Node::Sub(a, b) => bin(self, a, " - ", 1, b, 2, out),
            Node::Mul(a, b) => bin(self, a, "*", 2, b, 3, out),
            Node::Div(a, b) => bin(self, a, "/", 2, b, 3, out),
            Node::Neg(a) => {
                out.push('-');
                self.print_into(a, 4, out);
            }
            Node::PowI(a, n) => {
                self.print_into(a, 5, out);
                out.push_str(&format!("^{n}"));
            }
            Node::Pow(a, b) => bin(self, a, "^", 5, b, 3, out),
            Node::Func(f, a) => {
                out.push_str(f.name());
                out.push('(');
                self.print_into(a, 0, out);
                out.push(')');
            }
        }
        if paren {
            out.push(')');
        }
    }
}

/// Shortest text that reads back as the same f64, in the language's number syntax.
pub fn format_number(v: f64) -> String {
    let a = v.abs();
    if a != 0.0 && !(1e-5..1e16).contains(&a) {
        format!("{v:e}")
    } else {
        format!("{v}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    use crate::config::Limits;
    use crate::language::syntax::parse;

    fn lowered(src: &str) -> (Graph, Id) {
        let mut g = Graph::new(Scope::new("phi", &["alpha", "b"]));
        let id = g.lower(&parse(src, &Limits::default()).unwrap()).unwrap();
        (g, id)
    }

    #[test]
    fn identities_keep_expressions_small() {
        let cases = [
            ("phi + 0", "phi"),
            ("0 + phi", "phi"),
            ("phi*1", "phi"),
            ("1*phi", "phi"),
            ("phi*0", "0"),
            ("0/phi", "0"),
            ("phi^1", "phi"),
            ("phi^0", "1"),
            ("--phi", "phi"),
            ("1^phi", "1"),
            ("2*3 + phi", "6 + phi"),
            ("sqrt(4) * phi", "2*phi"),
            ("phi - -alpha", "phi + alpha"),
            ("phi + -alpha", "phi - alpha"),
            ("(-phi)*(-alpha)", "phi*alpha"),
            ("-(2)", "-2"),
            ("phi^2.5", "phi^2.5"),
            ("phi^-2", "phi^-2"),
            ("2^-1 * phi", "0.5*phi"),
            ("1/0 + phi", "1/0 + phi"),
        ];
        for (src, want) in cases {
            let (g, id) = lowered(src);
            assert_eq!(g.print(id), want, "{src}");
        }
    }

    #[test]
    fn equal_subexpressions_are_stored_once() {
        let (g, id) = lowered("tanh(phi/alpha)^2 + tanh(phi/alpha)^2 * tanh(alpha\t+phi)");
        // phi, alpha, phi/alpha, tanh, ^2, alpha+phi (= phi+alpha), tanh, *, + : and 2 as PowI.
        let distinct = g.reachable(&[id]).len();
        assert_eq!(distinct, 9, "{}", g.print(id));
        let (g2, a) = lowered("phi*alpha + alpha*phi");
        assert_eq!(g2.print(a), "phi*alpha + phi*alpha");
        assert_eq!(g2.reachable(&[a]).len(), 4);
    }

    #[test]
    fn printing_keeps_grouping() {
        let cases = [
            "phi - (alpha - b)",
            "phi/(alpha*b)",
            "(phi^alpha)^b",
            "phi^alpha^b",
            "-phi^2",
            "(-phi)^alpha",
            "phi^-alpha",
            "-(phi*alpha)",
            "exp(-b*phi)",
            "(1 - exp(-b*phi))^2",
            "1.5e-300*phi + 2.5e300",
        ];
        for src in cases {
            let (g, id) = lowered(src);
            let printed = g.print(id);
            let (g2, id2) = lowered(&printed);
            assert_eq!(g2.print(id2), printed, "{src} -> {printed}");
        }
    }

    #[test]
    fn derivatives_by_rule() {
        let cases = [
            ("phi^2", "2*phi"),
            ("exp(-phi)", "-exp(-phi)"),
            ("alpha*phi^3", "alpha*(3*phi^2)"),
            ("log(phi)", "1/phi"),
            ("tanh(phi)", "1 - tanh(phi)^2"),
            ("phi^alpha", "alpha*phi^(alpha - 1)"),
            ("alpha", "0"),
        ];
        for (src, want) in cases {
            let (mut g, id) = lowered(src);
            let d = g.derivative(id);
            assert_eq!(g.print(d), want, "{src}");
        }
    }

    fn lowered_in(scope: Scope, src: &str) -> (Graph, Id) {
        let mut g = Graph::new(scope);
        let id = g.lower(&parse(src, &Limits::default()).unwrap()).unwrap();
        (g, id)
    }

    #[test]
    fn partials_by_rule_in_three_fields() {
        let scope = Scope::with_fields(&["x", "y", "z"], &["a"]).unwrap();
        let cases = [
            ("x*y + z", ["y", "x", "1"]),
            ("a*x^2*y^3", ["y^3*(a*(2*x))", "a*x^2*(3*y^2)", "0"]),
            ("exp(x*z)", ["z*exp(x*z)", "0", "x*exp(x*z)"]),
            ("x/y", ["1/y", "-x/y^2", "0"]),
            ("y^z", ["0", "z*y^(z - 1)", "y^z*log(y)"]),
            ("sin(y) + a", ["0", "cos(y)", "0"]),
        ];
        for (src, want) in cases {
            let (mut g, id) = lowered_in(scope.clone(), src);
            for (i, w) in want.iter().enumerate() {
                let d = g.partial(id, i);
                assert_eq!(g.print(d), *w, "d/d{} {src}", scope.fields[i]);
            }
        }
    }

    #[test]
    fn derivative_is_the_partial_in_the_first_field() {
        for src in ["phi^2*exp(-alpha*phi)", "tanh(phi/b)^2", "alpha", "phi^phi"] {
            let (mut g, id) = lowered(src);
            let (d, p) = (g.derivative(id), g.partial(id, 0));
            assert_eq!(d, p, "{src}");
        }
    }

    #[test]
    fn varying_means_any_field() {
        let (g, id) = lowered_in(Scope::with_fields(&["x", "y"], &["a"]).unwrap(), "a*y");
        assert!(g.is_varying(id));
        let (g, id) = lowered_in(Scope::with_fields(&["x", "y"], &["a"]).unwrap(), "sqrt(a) + pi");
        assert!(!g.is_varying(id));
    }

    #[test]
    fn first_non_finite_at_a_point_of_field_space() {
        let (g, id) = lowered_in(Scope::with_fields(&["x", "y"], &[]).unwrap(), "x + log(y - 1)");
        let (bad, v) = g.first_non_finite_at(id, &[2.0, 0.5], &[]).unwrap();
        assert_eq!(g.print(bad), "log(y - 1)");
        assert!(v.is_nan());
        assert_eq!(g.first_non_finite_at(id, &[0.5, 2.0], &[]), None);
    }
}
