//! Stage 3: the compiled evaluator.
//!
//! A [`Tape`] is the IR flattened into straight-line instructions over a register file, one
//! register per node. Nodes that do not depend on any field (constants, parameters, and
//! anything computed from them alone, such as `sqrt(6*alpha)`) are evaluated once, when
//! parameters are bound; only the rest runs per point. A point is a point of field space, one
//! value per field of the scope; one field is the common case, and every entry point taking a
//! bare `x` is the one-field form of one taking a point. Parameters are inputs, not folded constants: rebinding
//! them costs one pass over the parameter-only part and no recompilation (see the benchmark
//! `bind` in `benches/tape.rs` for the measurement behind this choice).
//!
//! Two evaluators share the tape: plain f64, at one point ([`Evaluator::eval`],
//! [`Evaluator::eval_at`]) or at up to [`BATCH`] points at once ([`Evaluator::eval_batch`],
//! [`Evaluator::eval_batch_at`] with one slice per field; the same bits, vectorised), and
//! truncated Taylor series ([`Evaluator::eval_jet`], [`Evaluator::eval_jet_along`]: the series
//! in t of f(p + t d) along a direction d) up to order [`MAX_ORDER`], giving the function and
//! its derivatives in one pass by the Taylor-mode recurrences of Griewank & Walther,
//! *Evaluating Derivatives*, 2nd ed. (SIAM 2008), ch. 13; the same recurrences serve every
//! direction. A [`Tape`] is immutable, `Send` and `Sync`; each thread makes its own
//! [`Evaluator`], which owns the registers, so no evaluation allocates.
//!
//! ```
//! use efold::{compile::compile_one, ir::Scope};
//! let f = compile_one("phi^3", &Scope::new("phi", &[]))?;
//! let mut ev = f.tape.evaluator(&[]);
//! assert_eq!(ev.eval(2.0), 8.0);
//! let d = ev.derivatives(2.0, 3);
//! assert_eq!(d, vec![8.0, 12.0, 12.0, 6.0]);
//! # Ok::<(), efold::compile::ExprError>(())
//! ```

use crate::language::ir::{Func, Graph, Id, Node};
use crate::numerics::elementary;
/// x^n for a small integer n: the kernel now lives with the other elementary functions, which
/// the IR's evaluator shares; kept here under its old path.
pub use crate::numerics::elementary::powi;
use std::fmt;

/// Highest Taylor order the jet evaluator supports.
pub const MAX_ORDER: usize = 8;
/// Coefficients in a jet: orders 0 to [`MAX_ORDER`].
pub const JET_LEN: usize = MAX_ORDER + 1;
/// A truncated Taylor series: `c[k] = f^(k)(x) / k!`; along a direction d of field space,
/// the series in t of f(p + t d).
pub type Jet = [f64; JET_LEN];

/// The quotient a / b of two truncated Taylor series, to `order` (at most [`MAX_ORDER`];
/// coefficients above it are zero): `c_k = (a_k - sum_{j<k} c_j b_{k-j}) / b_0`, the
/// recurrence and the order of operations of the tape's own division, so a caller dividing
/// jets gets the tape's bits. `b[0]` must not be zero (else infinities or NaN, as in f64).
pub fn jet_div(a: &Jet, b: &Jet, order: usize) -> Jet {
    div(a, b, order.min(MAX_ORDER))
}

/// The product a b of two truncated Taylor series, to `order` (at most [`MAX_ORDER`]), by the
/// tape's convolution.
pub fn jet_mul(a: &Jet, b: &Jet, order: usize) -> Jet {
    mul(a, b, order.min(MAX_ORDER))
}

/// The series of the derivative a' (with respect to the series' variable), to `order`:
/// `c_j = (j + 1) a_{j+1}`. Differentiating loses one order, so `order` is at most
/// `MAX_ORDER - 1`, and at most one less than the order `a` is known to; coefficients above
/// are zero.
pub fn jet_derivative(a: &Jet, order: usize) -> Jet {
    let mut c = [0.0; JET_LEN];
    for j in 0..(order + 1).min(MAX_ORDER) {
        c[j] = (j + 1) as f64 * a[j + 1];
    }
    c
}

/// One instruction; operands are register numbers, the destination is implied by position.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Op {
    /// `r[a]` + `r[b]`
    Add(u32, u32),
    /// `r[a]` - `r[b]`
    Sub(u32, u32),
    /// `r[a]` * `r[b]`
    Mul(u32, u32),
    /// `r[a]` / `r[b]`
    Div(u32, u32),
    /// -`r[a]`
    Neg(u32),
    /// `r[a]`^n
    PowI(u32, i32),
    /// `r[a]`^`r[b]`
    Pow(u32, u32),
    /// f(`r[a]`)
    Func(Func, u32),
    /// A polynomial in `r[x]`: coefficients in registers `poly_regs[first ..= first + degree]`,
    /// lowest degree first; evaluated by Horner's rule (split into even and odd chains from
    /// degree 5 up).
    Poly {
        /// The variable's register.
        x: u32,
        /// Index of the constant coefficient in the tape's coefficient list.
        first: u32,
        /// The degree.
        degree: u32,
    },
}

/// The compiled form of one or more expressions over one scope.
#[derive(Debug, Clone)]
pub struct Tape {
    n_regs: usize,
    /// (register, value) of every constant.
    consts: Vec<(u32, f64)>,
    /// (register, parameter index) of every parameter used.
    params: Vec<(u32, u32)>,
    n_params: usize,
    /// Field-independent instructions; the i-th writes register `prologue_start + i`.
    prologue: Vec<Op>,
    prologue_start: u32,
    /// The first field's register; field i is in register `var_reg + i` (whether the
    /// expressions use it or not). Registers below hold values fixed per binding.
    var_reg: u32,
    /// Number of fields: the length of a point of field space.
    n_fields: u32,
    /// Field-dependent instructions; the i-th writes register `body_start + i`.
    body: Vec<Op>,
    body_start: u32,
    outputs: Vec<u32>,
    has_abs: bool,
    /// Coefficient registers of the polynomial instructions.
    poly_regs: Vec<u32>,
}

impl Tape {
    /// Compiles the given roots of a graph (one output each, in order).
    pub fn compile(graph: &Graph, roots: &[Id]) -> Tape {
        // Sums of monomials in the field become one polynomial instruction; their combined
        // coefficients are new parameter-only nodes of a copy of the graph.
        let mut g = graph.clone();
        let polys = find_polynomials(&mut g, roots);
        let graph = &g;
        let order = reachable_with(graph, roots, &polys);
        let mut reg = vec![u32::MAX; graph.len()];
        let mut next = 0u32;
        let mut tape = Tape {
            n_regs: 0,
            consts: Vec::new(),
            params: Vec::new(),
            n_params: graph.scope().params.len(),
            prologue: Vec::new(),
            prologue_start: 0,
            var_reg: 0,
            n_fields: graph.scope().n_fields() as u32,
            body: Vec::new(),
            body_start: 0,
            outputs: Vec::new(),
            has_abs: false,
            poly_regs: Vec::new(),
        };
        // Leaves first: constants and parameters.
        for &id in &order {
            match graph.node(id) {
                Node::Const(bits) => tape.consts.push((next, f64::from_bits(bits))),
                Node::Param(i) => tape.params.push((next, i)),
                _ => continue,
            }
            reg[id.index()] = next;
            next += 1;
        }
        // Then what depends on parameters alone, then the fields, then the rest.
        tape.prologue_start = next;
        let is_leaf = |n: Node| matches!(n, Node::Const(_) | Node::Param(_) | Node::Var(_));
        for &id in &order {
            let n = graph.node(id);
            if !is_leaf(n) && !graph.is_varying(id) {
                tape.prologue.push(op_of(n, &reg));
                reg[id.index()] = next;
                next += 1;
            }
        }
        tape.var_reg = next;
        next += tape.n_fields;
        tape.body_start = next;
        for &id in &order {
            let n = graph.node(id);
            if let Node::Var(i) = n {
                reg[id.index()] = tape.var_reg + i;
            } else if let Some((x, coeffs)) = polys.get(&id) {
                let first = tape.poly_regs.len() as u32;
                tape.poly_regs.extend(coeffs.iter().map(|c| reg[c.index()]));
                tape.body.push(Op::Poly {
                    x: reg[x.index()],
                    first,
                    degree: coeffs.len() as u32 - 1,
                });
                reg[id.index()] = next;
                next += 1;
            } else if !is_leaf(n) && graph.is_varying(id) {
                tape.body.push(op_of(n, &reg));
                reg[id.index()] = next;
                next += 1;
            }
            tape.has_abs |= matches!(n, Node::Func(Func::Abs, _));
        }
        tape.n_regs = next as usize;
        tape.outputs = roots.iter().map(|r| reg[r.index()]).collect();
        tape
    }

    /// Number of parameters the evaluator expects.
    pub fn n_params(&self) -> usize {
        self.n_params
    }

    /// Number of outputs.
    pub fn n_outputs(&self) -> usize {
        self.outputs.len()
    }

    /// Number of fields: the length of a point of field space.
    pub fn n_fields(&self) -> usize {
        self.n_fields as usize
    }

    /// Instructions run per point (the parameter-only part runs once per binding).
    pub fn body_len(&self) -> usize {
        self.body.len()
    }

    /// True if `abs` occurs: derivatives are not defined where its argument is zero.
    pub fn has_abs(&self) -> bool {
        self.has_abs
    }

    /// An evaluator with its own registers, parameters bound to `params` (in scope order).
    ///
    /// # Panics
    /// If `params.len()` differs from [`Tape::n_params`]: a programming error, not bad input.
    pub fn evaluator(&self, params: &[f64]) -> Evaluator<'_> {
        let mut ev = Evaluator {
            tape: self,
            regs: vec![0.0; self.n_regs],
            jets: vec![[0.0; JET_LEN]; self.n_regs],
            lanes: vec![[0.0; BATCH]; self.n_regs],
            batch_len: 0,
            coeffs: vec![0.0; self.poly_regs.len()],
            out: vec![0.0; self.outputs.len()],
            jet_order: 0,
        };
        ev.set_params(params);
        ev
    }
}

/// Polynomials found in the graph: root -> (variable, coefficient nodes by degree).
type Polys = rustc_hash::FxHashMap<Id, (Id, Vec<Id>)>;

/// Smallest polynomial worth its own instruction: this many monomial terms, and degree 2.
const MIN_POLY_TERMS: usize = 3;
/// Largest degree handled as a polynomial instruction.
pub const MAX_POLY_DEGREE: usize = 48;

/// Finds maximal sums (Add/Sub/Neg trees) of monomials c x^k in one field x, with c free of
/// every field, and adds nodes for their combined coefficients.
fn find_polynomials(g: &mut Graph, roots: &[Id]) -> Polys {
    let order = g.reachable(roots);
    // A sum node inside a larger sum is not a root of its own.
    let mut inner = vec![false; g.len()];
    for &id in &order {
        let kids: Vec<Id> = match g.node(id) {
            Node::Add(a, b) | Node::Sub(a, b) => vec![a, b],
            Node::Neg(a) => vec![a],
            _ => continue,
        };
        for c in kids {
            if matches!(g.node(c), Node::Add(..) | Node::Sub(..) | Node::Neg(_)) {
                inner[c.index()] = true;
            }
        }
    }
    let mut out = Polys::default();
    for &id in &order {
        if inner[id.index()] || !g.is_varying(id) || !matches!(g.node(id), Node::Add(..) | Node::Sub(..)) {
            continue;
        }
        let mut terms: Vec<(usize, bool, Factors)> = Vec::new();
        let mut field = None;
        if !monomials(g, id, false, &mut field, &mut terms) || terms.len() < MIN_POLY_TERMS {
            continue;
        }
        let Some(field) = field else { continue };
        let degree = terms.iter().map(|t| t.0).max().unwrap_or(0);
        if !(2..=MAX_POLY_DEGREE).contains(&degree) {
            continue;
        }
        let x = g.field_var(field as usize);
        let zero = g.constant(0.0);
        let one = g.constant(1.0);
        let mut coeffs = vec![zero; degree + 1];
        let mut set = vec![false; degree + 1];
        for (k, negative, factors) in terms {
            let mut c = one;
            for (f, divide) in factors {
                c = if divide { g.div(c, f) } else { g.mul(c, f) };
            }
            coeffs[k] = match (set[k], negative) {
                (false, false) => c,
                (false, true) => g.neg(c),
                (true, false) => g.add(coeffs[k], c),
                (true, true) => g.sub(coeffs[k], c),
            };
            set[k] = true;
        }
        out.insert(id, (x, coeffs));
    }
    out
}

/// A monomial's coefficient: a product of field-free factors, each multiplied or divided.
type Factors = Vec<(Id, bool)>;

/// Collects the monomials of a sum: (degree, negated, coefficient factors); every monomial
/// must be in the same field, which `field` records.
fn monomials(
    g: &Graph,
    id: Id,
    negative: bool,
    field: &mut Option<u32>,
    terms: &mut Vec<(usize, bool, Factors)>,
) -> bool {
    if !g.is_varying(id) {
        terms.push((0, negative, vec![(id, false)]));
        return true;
    }
    match g.node(id) {
        Node::Add(a, b) => monomials(g, a, negative, field, terms) && monomials(g, b, negative, field, terms),
        Node::Sub(a, b) => monomials(g, a, negative, field, terms) && monomials(g, b, !negative, field, terms),
        Node::Neg(a) => monomials(g, a, !negative, field, terms),
        _ => match monomial(g, id) {
            Some((i, k, factors)) if *field.get_or_insert(i) == i => {
                terms.push((k, negative, factors));
                true
            }
            _ => false,
        },
    }
}

/// c x^k as (the field x, k, factors of c), through products and quotients by field-free
/// nodes.
fn monomial(g: &Graph, id: Id) -> Option<(u32, usize, Factors)> {
    if let Some((i, k)) = power_of_var(g, id) {
        return Some((i, k, Vec::new()));
    }
    match g.node(id) {
        Node::Mul(a, b) => {
            let (c, m) = if !g.is_varying(a) {
                (a, b)
            } else if !g.is_varying(b) {
                (b, a)
            } else {
                return None;
            };
            let (i, k, mut f) = monomial(g, m)?;
            f.push((c, false));
            Some((i, k, f))
        }
        Node::Div(m, c) if !g.is_varying(c) => {
            let (i, k, mut f) = monomial(g, m)?;
            f.push((c, true));
            Some((i, k, f))
        }
        _ => None,
    }
}

/// (i, k) if the node is field i to a non-negative integer power k.
fn power_of_var(g: &Graph, id: Id) -> Option<(u32, usize)> {
    let field = |a: Id| match g.node(a) {
        Node::Var(i) => Some(i),
        _ => None,
    };
    match g.node(id) {
        Node::Var(i) => Some((i, 1)),
        Node::PowI(a, k) if k >= 0 => Some((field(a)?, k as usize)),
        Node::Pow(a, e) => match g.constant_value(e) {
            Some(k) if k >= 0.0 && k.fract() == 0.0 && k <= MAX_POLY_DEGREE as f64 => Some((field(a)?, k as usize)),
            _ => None,
        },
        _ => None,
    }
}

/// Nodes reachable from the roots, a polynomial root reaching only its variable and
/// coefficients; ascending.
fn reachable_with(g: &Graph, roots: &[Id], polys: &Polys) -> Vec<Id> {
    let mut seen = vec![false; g.len()];
    let mut stack: Vec<Id> = roots.to_vec();
    while let Some(id) = stack.pop() {
        if std::mem::replace(&mut seen[id.index()], true) {
            continue;
        }
        match polys.get(&id) {
            Some((x, coeffs)) => {
                stack.push(*x);
                stack.extend(coeffs.iter().copied());
            }
            None => stack.extend(g.children(id)),
        }
    }
    (0..g.len()).filter(|&i| seen[i]).map(|i| Id(i as u32)).collect()
}

fn op_of(n: Node, reg: &[u32]) -> Op {
    let r = |id: Id| {
        let v = reg[id.index()];
        debug_assert!(v != u32::MAX, "tape: operand before its definition");
        v
    };
    match n {
        Node::Add(a, b) => Op::Add(r(a), r(b)),
        Node::Sub(a, b) => Op::Sub(r(a), r(b)),
        Node::Mul(a, b) => Op::Mul(r(a), r(b)),
        Node::Div(a, b) => Op::Div(r(a), r(b)),
        Node::Neg(a) => Op::Neg(r(a)),
        Node::PowI(a, k) => Op::PowI(r(a), k),
        Node::Pow(a, b) => Op::Pow(r(a), r(b)),
        Node::Func(f, a) => Op::Func(f, r(a)),
        Node::Const(_) | Node::Param(_) | Node::Var(_) => unreachable!("tape: leaves have no op"),
    }
}

/// Runs `ops`, the i-th writing register `start + i`; `coeffs` holds the coefficients of the
/// polynomial instructions, contiguous.
#[inline(always)]
fn run_f64(ops: &[Op], regs: &mut [f64], start: usize, coeffs: &[f64]) {
    for (i, op) in ops.iter().enumerate() {
        let v = match *op {
            Op::Poly { x, first, degree } => {
                poly_f64(&coeffs[first as usize..=(first + degree) as usize], regs[x as usize])
            }
            Op::Add(a, b) => regs[a as usize] + regs[b as usize],
            Op::Sub(a, b) => regs[a as usize] - regs[b as usize],
            Op::Mul(a, b) => regs[a as usize] * regs[b as usize],
            Op::Div(a, b) => regs[a as usize] / regs[b as usize],
            Op::Neg(a) => -regs[a as usize],
            Op::PowI(a, n) => powi(regs[a as usize], n),
            Op::Pow(a, b) => regs[a as usize].powf(regs[b as usize]),
            Op::Func(f, a) => f.apply(regs[a as usize]),
        };
        regs[start + i] = v;
    }
}

/// [`run_f64`] over [`BATCH`] points: each instruction runs over all lanes before the next.
/// Where the processor has 256-bit vectors (AVX2, detected once at run time) the same code is
/// compiled for them; no fused multiply-add is used on either path, so both give the bits of
/// the single-point evaluator.
fn run_lanes(ops: &[Op], regs: &mut [Lanes], start: usize, coeffs: &[f64]) {
    #[cfg(target_arch = "x86_64")]
    {
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor supports AVX2, checked just above.
            unsafe { run_lanes_avx2(ops, regs, start, coeffs) };
            return;
        }
    }
    run_lanes_portable(ops, regs, start, coeffs);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn run_lanes_avx2(ops: &[Op], regs: &mut [Lanes], start: usize, coeffs: &[f64]) {
    run_lanes_portable(ops, regs, start, coeffs);
}

#[inline(always)]
fn run_lanes_portable(ops: &[Op], regs: &mut [Lanes], start: usize, coeffs: &[f64]) {
    for (i, op) in ops.iter().enumerate() {
        // Operands always precede the destination: split there and write in place.
        let (src, dst) = regs.split_at_mut(start + i);
        let out = &mut dst[0];
        let r = |a: u32| &src[a as usize];
        match *op {
            Op::Add(a, b) => lanes2(r(a), r(b), out, |x, y| x + y),
            Op::Sub(a, b) => lanes2(r(a), r(b), out, |x, y| x - y),
            Op::Mul(a, b) => lanes2(r(a), r(b), out, |x, y| x * y),
            Op::Div(a, b) => lanes2(r(a), r(b), out, |x, y| x / y),
            Op::Pow(a, b) => lanes2(r(a), r(b), out, f64::powf),
            Op::Neg(a) => lanes1(r(a), out, |x| -x),
            Op::PowI(a, 2) => lanes1(r(a), out, |x| x * x),
            Op::PowI(a, n) => lanes1(r(a), out, |x| powi(x, n)),
            Op::Func(Func::Sqrt, a) => lanes1(r(a), out, f64::sqrt),
            Op::Func(Func::Abs, a) => lanes1(r(a), out, f64::abs),
            // efold's own exp and tanh are branch-free: these loops vectorise.
            Op::Func(Func::Exp, a) => lanes1(r(a), out, elementary::exp),
            Op::Func(Func::Tanh, a) => lanes1(r(a), out, elementary::tanh),
            Op::Func(f, a) => lanes1(r(a), out, |x| f.apply(x)),
            Op::Poly { x, first, degree } => poly_lanes(&coeffs[first as usize..=(first + degree) as usize], r(x), out),
        }
    }
}

#[inline(always)]
fn lanes1(a: &Lanes, out: &mut Lanes, f: impl Fn(f64) -> f64) {
    for j in 0..BATCH {
        out[j] = f(a[j]);
    }
}

#[inline(always)]
fn lanes2(a: &Lanes, b: &Lanes, out: &mut Lanes, f: impl Fn(f64, f64) -> f64) {
    for j in 0..BATCH {
        out[j] = f(a[j], b[j]);
    }
}

/// [`poly_f64`] in every lane, with the same operations in the same order (so bit-identical),
/// the lanes innermost.
fn poly_lanes(c: &[f64], x: &Lanes, out: &mut Lanes) {
    let n = c.len();
    if n < 6 {
        let (&top, rest) = c.split_last().expect("a polynomial has coefficients");
        let mut acc = [top; BATCH];
        for &ck in rest.iter().rev() {
            for j in 0..BATCH {
                acc[j] = acc[j] * x[j] + ck;
            }
        }
        *out = acc;
        return;
    }
    let mut x2 = [0.0; BATCH];
    for j in 0..BATCH {
        x2[j] = x[j] * x[j];
    }
    let (mut even, mut odd) = if n % 2 == 1 {
        ([c[n - 1]; BATCH], [0.0; BATCH])
    } else {
        ([0.0; BATCH], [0.0; BATCH])
    };
    for pair in c[..n - n % 2].chunks_exact(2).rev() {
        for j in 0..BATCH {
            even[j] = even[j] * x2[j] + pair[0];
            odd[j] = odd[j] * x2[j] + pair[1];
        }
    }
    for j in 0..BATCH {
        out[j] = even[j] + x[j] * odd[j];
    }
}

/// p(x) = sum c[k] x^k, `c` from degree 0 (at least one coefficient).
///
/// Horner's rule split in two: p = E(x^2) + x O(x^2), the even and the odd coefficients each
/// by Horner in x^2. The two chains are independent, which halves the dependency chain at the
/// cost of one multiplication; with the same number of operations otherwise, this measured
/// 1.5x faster than one Horner chain for degree 19 (`cargo bench --bench tape`). Low degrees
/// keep the single chain.
#[inline]
fn poly_f64(c: &[f64], x: f64) -> f64 {
    let n = c.len();
    if n < 6 {
        let (&top, rest) = c.split_last().expect("a polynomial has coefficients");
        return rest.iter().rev().fold(top, |acc, &ck| acc * x + ck);
    }
    let x2 = x * x;
    // With an odd count the top coefficient is even and starts the even chain.
    let (mut even, mut odd) = if n % 2 == 1 { (c[n - 1], 0.0) } else { (0.0, 0.0) };
    for pair in c[..n - n % 2].chunks_exact(2).rev() {
        even = even * x2 + pair[0];
        odd = odd * x2 + pair[1];
    }
    even + x * odd
}

/// Points evaluated together by [`Evaluator::eval_batch`].
pub const BATCH: usize = 16;
/// One register of the batch evaluator: a value per point.
type Lanes = [f64; BATCH];

/// Registers for one thread: evaluates a [`Tape`] in f64 (one point or a batch of points) or
/// in jets, without allocating.
#[derive(Debug, Clone)]
pub struct Evaluator<'t> {
    tape: &'t Tape,
    regs: Vec<f64>,
    jets: Vec<Jet>,
    /// Registers of the batch evaluator, and the number of points of the last batch.
    lanes: Vec<Lanes>,
    batch_len: usize,
    /// Polynomial coefficients, contiguous, refreshed with the parameters.
    coeffs: Vec<f64>,
    /// One value per output: the point handed to `eval_each`'s callback.
    out: Vec<f64>,
    /// Highest order the per-point jet registers may hold non-zero coefficients to (the
    /// instructions write only up to the order they run at).
    jet_order: usize,
}

impl Evaluator<'_> {
    /// Rebinds the parameters (in scope order) and recomputes what depends on them alone.
    ///
    /// # Panics
    /// If `params.len()` differs from [`Tape::n_params`].
    pub fn set_params(&mut self, params: &[f64]) {
        let t = self.tape;
        assert_eq!(params.len(), t.n_params, "tape: wrong number of parameters");
        for &(r, v) in &t.consts {
            self.regs[r as usize] = v;
        }
        for &(r, i) in &t.params {
            self.regs[r as usize] = params[i as usize];
        }
        run_f64(&t.prologue, &mut self.regs, t.prologue_start as usize, &[]);
        for (c, &r) in self.coeffs.iter_mut().zip(&t.poly_regs) {
            *c = self.regs[r as usize];
        }
        for r in 0..t.var_reg as usize {
            let mut j = [0.0; JET_LEN];
            j[0] = self.regs[r];
            self.jets[r] = j;
            self.lanes[r] = [self.regs[r]; BATCH];
        }
    }

    /// Evaluates every output at `x`; returns the first. For a tape of one field (on a tape of
    /// several, `x` is the first field and the others keep their last values).
    #[inline]
    pub fn eval(&mut self, x: f64) -> f64 {
        let t = self.tape;
        self.regs[t.var_reg as usize] = x;
        run_f64(&t.body, &mut self.regs, t.body_start as usize, &self.coeffs);
        self.regs[t.outputs[0] as usize]
    }

    /// Evaluates every output at a point of field space (one value per field, in scope order);
    /// returns the first. With one field, `eval_at(&[x])` is [`Evaluator::eval`]`(x)`.
    ///
    /// # Panics
    /// If `point.len()` differs from [`Tape::n_fields`]: a programming error, not bad input.
    ///
    /// ```
    /// use efold::{compile::compile_one, ir::Scope};
    /// let scope = Scope::with_fields(&["phi", "sigma"], &["m"]).unwrap();
    /// let f = compile_one("m^2*phi^2/2 + sigma^4", &scope)?;
    /// let mut ev = f.tape.evaluator(&[2.0]);
    /// assert_eq!(ev.eval_at(&[1.0, 3.0]), 2.0 + 81.0);
    /// # Ok::<(), efold::compile::ExprError>(())
    /// ```
    #[inline]
    pub fn eval_at(&mut self, point: &[f64]) -> f64 {
        let t = self.tape;
        assert_eq!(point.len(), t.n_fields as usize, "tape: point of the wrong dimension");
        let v = t.var_reg as usize;
        self.regs[v..v + point.len()].copy_from_slice(point);
        run_f64(&t.body, &mut self.regs, t.body_start as usize, &self.coeffs);
        self.regs[t.outputs[0] as usize]
    }

    /// Output `i` of the last [`Evaluator::eval`] or [`Evaluator::eval_at`].
    #[inline]
    pub fn output(&self, i: usize) -> f64 {
        self.regs[self.tape.outputs[i] as usize]
    }

    /// Whether output `i` depends on the fields: `false` for an output the tape computes from
    /// constants and parameters alone, whose value is the same at every point.
    pub fn output_varies(&self, i: usize) -> bool {
        self.tape.outputs[i] >= self.tape.var_reg
    }

    /// Evaluates every output at up to [`BATCH`] points at once; read the results with
    /// [`Evaluator::batch_output`]. Each point gets exactly the operations of
    /// [`Evaluator::eval`], so the results are bit-identical to evaluating point by point;
    /// running each instruction over all the points spreads its dispatch over them and lets
    /// the arithmetic vectorise. Callers with more points chunk them (see
    /// [`Evaluator::eval_each`]). For a tape of one field; [`Evaluator::eval_batch_at`] takes
    /// points of several.
    ///
    /// # Panics
    /// If `xs` is empty or longer than [`BATCH`], or the tape has several fields.
    ///
    /// ```
    /// use efold::{compile::compile_one, ir::Scope};
    /// let f = compile_one("phi^2 + exp(-phi)", &Scope::new("phi", &[]))?;
    /// let mut ev = f.tape.evaluator(&[]);
    /// ev.eval_batch(&[0.0, 1.0, 2.0]);
    /// let ys = ev.batch_output(0).to_vec();
    /// assert_eq!(ys, vec![ev.eval(0.0), ev.eval(1.0), ev.eval(2.0)]);
    /// # Ok::<(), efold::compile::ExprError>(())
    /// ```
    pub fn eval_batch(&mut self, xs: &[f64]) {
        // The one-field form without the per-field loop of `eval_batch_at` (same bits).
        assert_eq!(self.tape.n_fields, 1, "tape: points of the wrong dimension");
        assert!(
            !xs.is_empty() && xs.len() <= BATCH,
            "tape: batch of {} points",
            xs.len()
        );
        self.load_lanes(0, xs);
        self.run_batch(xs.len());
    }

    /// [`Evaluator::eval_batch`] at up to [`BATCH`] points of field space, given as structure
    /// of arrays: `fields[i][j]` is field i at point j, one slice per field (in scope order),
    /// all of the same length. Bit-identical to [`Evaluator::eval_at`] point by point.
    ///
    /// # Panics
    /// If there is not one slice per field, the slices differ in length, or their length is
    /// zero or above [`BATCH`].
    ///
    /// ```
    /// use efold::{compile::compile_one, ir::Scope};
    /// let scope = Scope::with_fields(&["x", "y"], &[]).unwrap();
    /// let f = compile_one("x*y + y", &scope)?;
    /// let mut ev = f.tape.evaluator(&[]);
    /// ev.eval_batch_at(&[&[1.0, 2.0, 3.0], &[10.0, 20.0, 30.0]]);
    /// assert_eq!(ev.batch_output(0), &[20.0, 60.0, 120.0]);
    /// # Ok::<(), efold::compile::ExprError>(())
    /// ```
    pub fn eval_batch_at(&mut self, fields: &[&[f64]]) {
        let len = self.check_points(fields);
        assert!(len > 0 && len <= BATCH, "tape: batch of {len} points");
        for (i, xs) in fields.iter().enumerate() {
            self.load_lanes(i, xs);
        }
        self.run_batch(len);
    }

    /// The number of points in `fields`, one slice per field of the tape, all of one length.
    fn check_points(&self, fields: &[&[f64]]) -> usize {
        assert_eq!(
            fields.len(),
            self.tape.n_fields as usize,
            "tape: points of the wrong dimension"
        );
        let len = fields[0].len();
        assert!(
            fields.iter().all(|xs| xs.len() == len),
            "tape: fields of a batch differ in length"
        );
        len
    }

    /// Field `i` of up to [`BATCH`] points (at least one) into its lanes.
    #[inline]
    fn load_lanes(&mut self, i: usize, xs: &[f64]) {
        // Unused lanes repeat the last point: computed and ignored.
        let mut x = [xs[xs.len() - 1]; BATCH];
        x[..xs.len()].copy_from_slice(xs);
        self.lanes[self.tape.var_reg as usize + i] = x;
    }

    /// Runs the body over the loaded lanes, `len` of them in use.
    #[inline]
    fn run_batch(&mut self, len: usize) {
        let t = self.tape;
        run_lanes(&t.body, &mut self.lanes, t.body_start as usize, &self.coeffs);
        self.batch_len = len;
    }

    /// Output `i` of the last [`Evaluator::eval_batch`], one value per point.
    #[inline]
    pub fn batch_output(&self, i: usize) -> &[f64] {
        &self.lanes[self.tape.outputs[i] as usize][..self.batch_len]
    }

    /// Evaluates at every point of `xs`, in batches of [`BATCH`], calling `each(i, outputs)`
    /// with the point's index in `xs` and the values of every output there (any number of
    /// outputs). For a tape of one field; [`Evaluator::eval_each_at`] takes several.
    ///
    /// ```
    /// use efold::{compile::compile_one, ir::Scope};
    /// let f = compile_one("phi^3", &Scope::new("phi", &[]))?;
    /// let mut ev = f.tape.evaluator(&[]);
    /// let xs: Vec<f64> = (0..40).map(|i| i as f64).collect();
    /// let mut ys = vec![0.0; xs.len()];
    /// ev.eval_each(&xs, |i, out| ys[i] = out[0]);
    /// assert_eq!(ys[39], 39f64.powi(3));
    /// # Ok::<(), efold::compile::ExprError>(())
    /// ```
    pub fn eval_each(&mut self, xs: &[f64], mut each: impl FnMut(usize, &[f64])) {
        for (c, chunk) in xs.chunks(BATCH).enumerate() {
            self.eval_batch(chunk);
            self.each_output(c * BATCH, &mut each);
        }
    }

    /// Hands every point of the last batch to `each`, numbered from `first`.
    #[inline]
    fn each_output(&mut self, first: usize, each: &mut impl FnMut(usize, &[f64])) {
        for j in 0..self.batch_len {
            for (v, &r) in self.out.iter_mut().zip(&self.tape.outputs) {
                *v = self.lanes[r as usize][j];
            }
            each(first + j, &self.out);
        }
    }

    /// [`Evaluator::eval_each`] over points of field space given as structure of arrays (one
    /// slice per field, all of the same length, any length), in batches of [`BATCH`].
    ///
    /// # Panics
    /// If there is not one slice per field or the slices differ in length.
    pub fn eval_each_at(&mut self, fields: &[&[f64]], mut each: impl FnMut(usize, &[f64])) {
        let len = self.check_points(fields);
        for start in (0..len).step_by(BATCH) {
            let end = (start + BATCH).min(len);
            for (i, xs) in fields.iter().enumerate() {
                self.load_lanes(i, &xs[start..end]);
            }
            self.run_batch(end - start);
            self.each_output(start, &mut each);
        }
    }

    /// Evaluates every output as a Taylor series to `order` (at most [`MAX_ORDER`]) at `x`;
    /// returns the first output's coefficients. Coefficients above `order` are left zero. For a
    /// tape of one field: the direction e_0 of [`Evaluator::eval_jet_along`].
    ///
    /// # Panics
    /// If `order > MAX_ORDER`.
    pub fn eval_jet(&mut self, x: f64, order: usize) -> &Jet {
        assert!(order <= MAX_ORDER, "tape: jet order above {MAX_ORDER}");
        let t = self.tape;
        let mut seed = [0.0; JET_LEN];
        seed[0] = x;
        if order >= 1 {
            seed[1] = 1.0;
        }
        self.jets[t.var_reg as usize] = seed;
        self.run_jet(order)
    }

    /// Every output as a Taylor series in t of f(p + t d), to `order` (at most
    /// [`MAX_ORDER`]), for a point `p` and a direction `d` in field space: `c[k]` is the k-th
    /// directional derivative along d divided by k!. Returns the first output's coefficients;
    /// read the others with [`Evaluator::jet_output`]. Mixed partial derivatives follow from
    /// several directions (polarisation); the gradient from the unit directions.
    ///
    /// # Panics
    /// If `order > MAX_ORDER`, or `point` or `direction` is not of the tape's dimension.
    ///
    /// ```
    /// use efold::{compile::compile_one, ir::Scope};
    /// let scope = Scope::with_fields(&["x", "y"], &[]).unwrap();
    /// let f = compile_one("x^2*y", &scope)?;
    /// let mut ev = f.tape.evaluator(&[]);
    /// // d/dt (1 + t)^2 (2 + t) at t = 0: 2*1*2 + 1 = 5
    /// assert_eq!(ev.eval_jet_along(&[1.0, 2.0], &[1.0, 1.0], 1)[1], 5.0);
    /// # Ok::<(), efold::compile::ExprError>(())
    /// ```
    pub fn eval_jet_along(&mut self, point: &[f64], direction: &[f64], order: usize) -> &Jet {
        assert!(order <= MAX_ORDER, "tape: jet order above {MAX_ORDER}");
        let t = self.tape;
        let n = t.n_fields as usize;
        assert!(
            point.len() == n && direction.len() == n,
            "tape: point or direction of the wrong dimension"
        );
        for i in 0..n {
            let mut seed = [0.0; JET_LEN];
            seed[0] = point[i];
            if order >= 1 {
                seed[1] = direction[i];
            }
            self.jets[t.var_reg as usize + i] = seed;
        }
        self.run_jet(order)
    }

    /// Runs the body on the seeded jets, truncated at `order`.
    fn run_jet(&mut self, order: usize) -> &Jet {
        let t = self.tape;
        if self.jet_order > order {
            // A run at a higher order left coefficients above this one: clear them once, so
            // that coefficients above `order` read as zero.
            for j in &mut self.jets[t.body_start as usize..] {
                j[order + 1..].fill(0.0);
            }
        }
        self.jet_order = order;
        let run = match order {
            0 => run_jets::<0>,
            1 => run_jets::<1>,
            2 => run_jets::<2>,
            3 => run_jets::<3>,
            4 => run_jets::<4>,
            5 => run_jets::<5>,
            6 => run_jets::<6>,
            7 => run_jets::<7>,
            _ => run_jets::<8>,
        };
        run(
            &t.body,
            &mut self.jets,
            t.var_reg as usize,
            t.body_start as usize,
            &t.poly_regs,
        );
        &self.jets[t.outputs[0] as usize]
    }

    /// Output `i` of the last [`Evaluator::eval_jet`] or [`Evaluator::eval_jet_along`], as
    /// Taylor coefficients.
    pub fn jet_output(&self, i: usize) -> &Jet {
        &self.jets[self.tape.outputs[i] as usize]
    }

    /// The first output and its derivatives `f, f', ..., f^(order)` at `x` (allocates the
    /// result; solvers use [`Evaluator::eval_jet`] instead).
    pub fn derivatives(&mut self, x: f64, order: usize) -> Vec<f64> {
        let jet = *self.eval_jet(x, order);
        taylor_to_derivatives(&jet, order)
    }

    /// The first output and its directional derivatives `f, D_d f, ..., D_d^order f` at
    /// `point` along `direction` (allocates the result).
    pub fn derivatives_along(&mut self, point: &[f64], direction: &[f64], order: usize) -> Vec<f64> {
        let jet = *self.eval_jet_along(point, direction, order);
        taylor_to_derivatives(&jet, order)
    }
}

/// Runs the per-point instructions on jets truncated at order `N`, the i-th writing register
/// `start + i`; registers below `var_reg` hold constants. A constant order lets the compiler
/// unroll every recurrence.
fn run_jets<const N: usize>(body: &[Op], jets: &mut [Jet], var_reg: usize, start: usize, poly: &[u32]) {
    for (i, op) in body.iter().enumerate() {
        // Operands always precede the destination: split there and write in place.
        let (src, dst) = jets.split_at_mut(start + i);
        let out = &mut dst[0];
        match *op {
            Op::Add(a, b) => zip_into::<N>(&src[a as usize], &src[b as usize], out, |x, y| x + y),
            Op::Sub(a, b) => zip_into::<N>(&src[a as usize], &src[b as usize], out, |x, y| x - y),
            Op::Mul(a, b) if (a as usize) < var_reg => scale_into::<N>(&src[b as usize], src[a as usize][0], out),
            Op::Mul(a, b) if (b as usize) < var_reg => scale_into::<N>(&src[a as usize], src[b as usize][0], out),
            Op::Mul(a, b) => mul_into::<N>(&src[a as usize], &src[b as usize], out),
            Op::Neg(a) => scale_into::<N>(&src[a as usize], -1.0, out),
            Op::Poly { x, first, degree } => {
                // Horner's rule: p = c_n; p = p x + c_k. Coefficients are constants.
                let c = &poly[first as usize..=(first + degree) as usize];
                let xj = &src[x as usize];
                let mut acc = [0.0; JET_LEN];
                acc[0] = src[c[degree as usize] as usize][0];
                for k in (0..degree as usize).rev() {
                    let mut next = [0.0; JET_LEN];
                    mul_into::<N>(&acc, xj, &mut next);
                    next[0] += src[c[k] as usize][0];
                    acc = next;
                }
                *out = acc;
            }
            Op::PowI(a, 2) => {
                let a = &src[a as usize];
                for k in 0..N + 1 {
                    out[k] = square_coefficient(a, k);
                }
            }
            _ => *out = jet_op::<N>(*op, src, var_reg),
        }
    }
}

#[inline(always)]
fn zip_into<const N: usize>(a: &Jet, b: &Jet, out: &mut Jet, f: impl Fn(f64, f64) -> f64) {
    for k in 0..N + 1 {
        out[k] = f(a[k], b[k]);
    }
}

#[inline(always)]
fn scale_into<const N: usize>(a: &Jet, s: f64, out: &mut Jet) {
    for k in 0..N + 1 {
        out[k] = a[k] * s;
    }
}

#[inline(always)]
fn mul_into<const N: usize>(a: &Jet, b: &Jet, out: &mut Jet) {
    for k in 0..N + 1 {
        let mut s = 0.0;
        for j in 0..k + 1 {
            s += a[j] * b[k - j];
        }
        out[k] = s;
    }
}

/// Taylor coefficients to derivatives: `f^(k) = k! c[k]`.
pub fn taylor_to_derivatives(jet: &Jet, order: usize) -> Vec<f64> {
    let mut fact = 1.0;
    (0..=order)
        .map(|k| {
            if k > 0 {
                fact *= k as f64;
            }
            jet[k] * fact
        })
        .collect()
}

/// 1/k for the recurrences' divisions by the order.
const INV: [f64; JET_LEN] = {
    let mut t = [0.0; JET_LEN];
    let mut k = 1;
    while k < JET_LEN {
        t[k] = 1.0 / k as f64;
        k += 1;
    }
    t
};

/// A jet holding a constant.
fn constant(v: f64) -> Jet {
    let mut j = [0.0; JET_LEN];
    j[0] = v;
    j
}

/// One instruction on jets. Registers below `fixed` hold constants (order 0 only), which lets
/// products and quotients by them skip the convolution.
#[inline(always)]
fn jet_op<const N: usize>(op: Op, regs: &[Jet], fixed: usize) -> Jet {
    let n = N;
    let r = |i: u32| &regs[i as usize];
    match op {
        Op::Add(a, b) => zip(r(a), r(b), n, |x, y| x + y),
        Op::Sub(a, b) => zip(r(a), r(b), n, |x, y| x - y),
        Op::Mul(a, b) if (a as usize) < fixed => scale(r(b), r(a)[0], n),
        Op::Mul(a, b) if (b as usize) < fixed => scale(r(a), r(b)[0], n),
        Op::Mul(a, b) => mul(r(a), r(b), n),
        Op::Div(a, b) if (b as usize) < fixed => scale(r(a), 1.0 / r(b)[0], n).map_first(r(a)[0] / r(b)[0]),
        Op::Div(a, b) => div(r(a), r(b), n),
        Op::Neg(a) => scale(r(a), -1.0, n),
        Op::PowI(a, k) => powi_jet(r(a), k, n),
        Op::Pow(a, b) if (b as usize) < fixed => powc_jet(r(a), r(b)[0], n),
        Op::Pow(a, b) => {
            let (a, b) = (r(a), r(b));
            let l = log_jet(a, n);
            let m = mul(b, &l, n);
            exp_jet(&m, n).map_first(a[0].powf(b[0]))
        }
        Op::Func(f, a) => func_jet(f, r(a), n),
        Op::Poly { .. } => unreachable!("tape: polynomials are evaluated by run_jets"),
    }
}

/// Small helper to overwrite the value (order 0) with the f64 evaluator's exact expression.
trait MapFirst {
    fn map_first(self, v: f64) -> Self;
}

impl MapFirst for Jet {
    #[inline]
    fn map_first(mut self, v: f64) -> Jet {
        self[0] = v;
        self
    }
}

#[inline(always)]
fn zip(a: &Jet, b: &Jet, n: usize, f: impl Fn(f64, f64) -> f64) -> Jet {
    let mut c = [0.0; JET_LEN];
    for k in 0..n + 1 {
        c[k] = f(a[k], b[k]);
    }
    c
}

#[inline(always)]
fn scale(a: &Jet, s: f64, n: usize) -> Jet {
    let mut c = [0.0; JET_LEN];
    for k in 0..n + 1 {
        c[k] = a[k] * s;
    }
    c
}

/// c_k = sum_{j=0}^{k} a_j b_{k-j}
#[inline(always)]
fn mul(a: &Jet, b: &Jet, n: usize) -> Jet {
    let mut c = [0.0; JET_LEN];
    for k in 0..n + 1 {
        let mut s = 0.0;
        for j in 0..k + 1 {
            s += a[j] * b[k - j];
        }
        c[k] = s;
    }
    c
}

/// c = a / b: c_k = (a_k - sum_{j=0}^{k-1} c_j b_{k-j}) / b_0
#[inline(always)]
fn div(a: &Jet, b: &Jet, n: usize) -> Jet {
    let mut c = [0.0; JET_LEN];
    c[0] = a[0] / b[0];
    for k in 1..n + 1 {
        let mut s = a[k];
        for j in 0..k {
            s -= c[j] * b[k - j];
        }
        c[k] = s / b[0];
    }
    c
}

/// 1 / b
#[inline(always)]
fn recip(b: &Jet, n: usize) -> Jet {
    div(&constant(1.0), b, n)
}

/// b with b' = g a', where g is known as a jet: b_k = (1/k) sum_{j=1}^{k} j a_j g_{k-j}.
#[inline(always)]
fn integrate(b0: f64, a: &Jet, g: &Jet, n: usize) -> Jet {
    let mut b = [0.0; JET_LEN];
    b[0] = b0;
    for k in 1..n + 1 {
        let mut s = 0.0;
        for j in 1..k + 1 {
            s += j as f64 * a[j] * g[k - j];
        }
        b[k] = s * INV[k];
    }
    b
}

/// exp: b_k = (1/k) sum_{j=1}^{k} j a_j b_{k-j}
#[inline(always)]
fn exp_jet(a: &Jet, n: usize) -> Jet {
    let da = weighted(a, n);
    let mut b = [0.0; JET_LEN];
    b[0] = Func::Exp.apply(a[0]);
    for k in 1..n + 1 {
        let mut s = 0.0;
        for j in 1..k + 1 {
            s += da[j] * b[k - j];
        }
        b[k] = s * INV[k];
    }
    b
}

/// log: b_k = (a_k - (1/k) sum_{j=1}^{k-1} j b_j a_{k-j}) / a_0
#[inline(always)]
fn log_jet(a: &Jet, n: usize) -> Jet {
    let mut b = [0.0; JET_LEN];
    b[0] = a[0].ln();
    for k in 1..n + 1 {
        let mut s = 0.0;
        for j in 1..k {
            s += j as f64 * b[j] * a[k - j];
        }
        b[k] = (a[k] - s * INV[k]) / a[0];
    }
    b
}

/// sqrt: b_k = (a_k - sum_{j=1}^{k-1} b_j b_{k-j}) / (2 b_0)
#[inline(always)]
fn sqrt_jet(a: &Jet, n: usize) -> Jet {
    let mut b = [0.0; JET_LEN];
    b[0] = a[0].sqrt();
    for k in 1..n + 1 {
        let mut s = a[k];
        for j in 1..k {
            s -= b[j] * b[k - j];
        }
        b[k] = s / (2.0 * b[0]);
    }
    b
}

/// a^r for a constant r, a_0 != 0: b_k = (1/(k a_0)) sum_{j=0}^{k-1} (r(k-j) - j) a_{k-j} b_j.
#[inline(always)]
fn powc_recurrence(a: &Jet, r: f64, b0: f64, n: usize) -> Jet {
    let mut b = [0.0; JET_LEN];
    b[0] = b0;
    for k in 1..n + 1 {
        let mut s = 0.0;
        for j in 0..k {
            s += (r * (k - j) as f64 - j as f64) * a[k - j] * b[j];
        }
        b[k] = s / (k as f64 * a[0]);
    }
    b
}

#[inline(always)]
fn powc_jet(a: &Jet, r: f64, n: usize) -> Jet {
    let b0 = a[0].powf(r);
    if a[0] != 0.0 {
        return powc_recurrence(a, r, b0, n);
    }
    // At a_0 = 0 a real power has no Taylor series unless r is a whole number (then PowI
    // handles it): the derivatives above r are infinite. Report NaN rather than a wrong number.
    let mut b = [f64::NAN; JET_LEN];
    b[0] = b0;
    b
}

#[inline(always)]
fn powi_jet(a: &Jet, k: i32, n: usize) -> Jet {
    let b0 = powi(a[0], k);
    if k == 2 {
        return mul(a, a, n);
    }
    if a[0] != 0.0 {
        return powc_recurrence(a, f64::from(k), b0, n);
    }
    // a_0 = 0: repeated squaring stays exact (and 1/0 gives the infinity it should).
    let mut result = constant(1.0);
    let mut base = *a;
    let mut e = k.unsigned_abs();
    while e > 0 {
        if e & 1 == 1 {
            result = mul(&result, &base, n);
        }
        base = mul(&base, &base, n);
        e >>= 1;
    }
    if k < 0 {
        result = recip(&result, n);
    }
    result.map_first(b0)
}

/// sin and cos together: s_k = (1/k) sum j a_j c_{k-j}, c_k = -(1/k) sum j a_j s_{k-j}.
/// With `hyperbolic`, sinh and cosh (the second sign is +).
#[inline(always)]
fn sin_cos(a: &Jet, n: usize, hyperbolic: bool) -> (Jet, Jet) {
    let mut s = [0.0; JET_LEN];
    let mut c = [0.0; JET_LEN];
    let sign = if hyperbolic { 1.0 } else { -1.0 };
    if hyperbolic {
        s[0] = a[0].sinh();
        c[0] = a[0].cosh();
    } else {
        (s[0], c[0]) = a[0].sin_cos();
    }
    for k in 1..n + 1 {
        let (mut ss, mut cc) = (0.0, 0.0);
        for j in 1..k + 1 {
            let ja = j as f64 * a[j];
            ss += ja * c[k - j];
            cc += ja * s[k - j];
        }
        s[k] = ss * INV[k];
        c[k] = sign * cc * INV[k];
    }
    (s, c)
}

/// tan (sign +1) and tanh (sign -1): t' = (1 + sign t^2) a'.
#[inline(always)]
fn tan_like(a: &Jet, n: usize, t0: f64, sign: f64) -> Jet {
    let da = weighted(a, n);
    let mut t = [0.0; JET_LEN];
    let mut u = [0.0; JET_LEN];
    t[0] = t0;
    u[0] = 1.0 + sign * t0 * t0;
    for k in 1..n + 1 {
        let mut s = 0.0;
        for j in 1..k + 1 {
            s += da[j] * u[k - j];
        }
        t[k] = s * INV[k];
        if k < n {
            u[k] = sign * square_coefficient(&t, k);
        }
    }
    t
}

/// j a_j, the coefficients of a' (times the order), shared by the recurrences.
#[inline(always)]
fn weighted(a: &Jet, n: usize) -> Jet {
    let mut d = [0.0; JET_LEN];
    for j in 1..n + 1 {
        d[j] = j as f64 * a[j];
    }
    d
}

/// Coefficient k of a^2, using the symmetry of the convolution.
#[inline(always)]
fn square_coefficient(a: &Jet, k: usize) -> f64 {
    let mut s = 0.0;
    for j in 0..k.div_ceil(2) {
        s += a[j] * a[k - j];
    }
    s *= 2.0;
    if k.is_multiple_of(2) {
        s += a[k / 2] * a[k / 2];
    }
    s
}

#[inline(always)]
fn func_jet(f: Func, a: &Jet, n: usize) -> Jet {
    let one = constant(1.0);
    let v = || f.apply(a[0]);
    match f {
        Func::Exp => exp_jet(a, n),
        Func::Log => log_jet(a, n),
        Func::Sqrt => sqrt_jet(a, n),
        Func::Sin => sin_cos(a, n, false).0,
        Func::Cos => sin_cos(a, n, false).1,
        Func::Sinh => sin_cos(a, n, true).0,
        Func::Cosh => sin_cos(a, n, true).1,
        Func::Tan => tan_like(a, n, v(), 1.0),
        Func::Tanh => tan_like(a, n, v(), -1.0),
        Func::Sech => recip(&sin_cos(a, n, true).1, n).map_first(v()),
        Func::Asin | Func::Acos => {
            let w = zip(&one, &mul(a, a, n), n, |x, y| x - y);
            let g = recip(&sqrt_jet(&w, n), n);
            let g = if f == Func::Acos { scale(&g, -1.0, n) } else { g };
            integrate(v(), a, &g, n)
        }
        Func::Atan => integrate(v(), a, &recip(&zip(&one, &mul(a, a, n), n, |x, y| x + y), n), n),
        Func::Asinh => {
            let w = zip(&mul(a, a, n), &one, n, |x, y| x + y);
            integrate(v(), a, &recip(&sqrt_jet(&w, n), n), n)
        }
        Func::Acosh => {
            let w = zip(&mul(a, a, n), &one, n, |x, y| x - y);
            integrate(v(), a, &recip(&sqrt_jet(&w, n), n), n)
        }
        Func::Atanh => integrate(v(), a, &recip(&zip(&one, &mul(a, a, n), n, |x, y| x - y), n), n),
        Func::Abs => {
            if a[0] == 0.0 {
                // The kink: no derivative exists.
                let mut b = [f64::NAN; JET_LEN];
                b[0] = 0.0;
                b
            } else {
                scale(a, a[0].signum(), n).map_first(v())
            }
        }
    }
}

impl fmt::Display for Tape {
    /// The `--emit tape` view: registers, the per-binding prologue and the per-point body.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for &(r, v) in &self.consts {
            writeln!(f, "r{r} = const {v}")?;
        }
        for &(r, i) in &self.params {
            writeln!(f, "r{r} = param #{i}")?;
        }
        if !self.prologue.is_empty() {
            writeln!(f, "; once per parameter binding")?;
        }
        for (i, op) in self.prologue.iter().enumerate() {
            writeln!(f, "r{} = {}", self.prologue_start as usize + i, op_text(op))?;
        }
        writeln!(f, "; per point")?;
        if self.n_fields == 1 {
            writeln!(f, "r{} = field", self.var_reg)?;
        } else {
            for i in 0..self.n_fields {
                writeln!(f, "r{} = field #{i}", self.var_reg + i)?;
            }
        }
        for (i, op) in self.body.iter().enumerate() {
            let text = match *op {
                Op::Poly { x, first, degree } => {
                    let c: Vec<String> = self.poly_regs[first as usize..=(first + degree) as usize]
                        .iter()
                        .map(|r| format!("r{r}"))
                        .collect();
                    format!("poly r{x} [{}]  (coefficients from degree 0)", c.join(" "))
                }
                _ => op_text(op),
            };
            writeln!(f, "r{} = {text}", self.body_start as usize + i)?;
        }
        let outs: Vec<String> = self.outputs.iter().map(|r| format!("r{r}")).collect();
        writeln!(f, "outputs: {}", outs.join(", "))
    }
}

fn op_text(op: &Op) -> String {
    match *op {
        Op::Add(a, b) => format!("add r{a} r{b}"),
        Op::Sub(a, b) => format!("sub r{a} r{b}"),
        Op::Mul(a, b) => format!("mul r{a} r{b}"),
        Op::Div(a, b) => format!("div r{a} r{b}"),
        Op::Neg(a) => format!("neg r{a}"),
        Op::PowI(a, n) => format!("powi r{a} {n}"),
        Op::Pow(a, b) => format!("pow r{a} r{b}"),
        Op::Func(func, a) => format!("{} r{a}", func.name()),
        Op::Poly { x, degree, .. } => format!("poly r{x} degree {degree}"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn assert_send_sync<T: Send + Sync>() {}

    #[test]
    fn tape_is_send_and_sync() {
        assert_send_sync::<Tape>();
    }

    #[test]
    fn sums_of_monomials_become_one_polynomial() {
        use crate::language::compile::compile_one;
        use crate::language::ir::Scope;
        let scope = Scope::new("x", &["a"]);
        let polys = |src: &str| {
            let c = compile_one(src, &scope).unwrap();
            c.tape.body.iter().filter(|op| matches!(op, Op::Poly { .. })).count()
        };
        assert_eq!(polys("1 + 2*x + 3*x^2"), 1);
        assert_eq!(polys("x^2/a - a*x^5 + x - 7"), 1);
        assert_eq!(polys("exp(x) * (1 + x + x^2/2 + x^3/6)"), 1);
        assert_eq!(polys("x + x^2"), 0, "two terms stay as written");
        assert_eq!(polys("x + sin(x) + x^2"), 0, "not a polynomial");
        assert_eq!(polys("x^2 + x^1.5 + 1"), 0, "fractional power");
        // f64 (split Horner) and jets (Horner) agree with the sum written out, to rounding.
        let src = (0..=30)
            .map(|k| format!("{}*x^{k}", 1.0 + k as f64 / 7.0))
            .collect::<Vec<_>>()
            .join(" + ");
        let c = compile_one(&src, &scope).unwrap();
        let mut ev = c.tape.evaluator(&[1.0]);
        for x in [-1.3f64, -0.4, 0.0, 0.6, 1.1] {
            let direct: f64 = (0..=30).map(|k| (1.0 + k as f64 / 7.0) * x.powi(k)).sum();
            let scale: f64 = (0..=30).map(|k| ((1.0 + k as f64 / 7.0) * x.powi(k)).abs()).sum();
            assert!((ev.eval(x) - direct).abs() <= 1e-14 * scale, "{x}");
            assert!((ev.derivatives(x, 0)[0] - direct).abs() <= 1e-14 * scale, "{x}");
        }
    }

    /// The batch evaluator runs the scalar evaluator's operations lane by lane, so the two
    /// agree bit for bit: every instruction kind, every built-in function, polynomials of both
    /// chain kinds, several outputs, partial batches and chunking.
    #[test]
    fn batches_are_bit_identical_to_single_points() {
        use crate::config::Limits;
        use crate::language::compile::{compile, compile_one};
        use crate::language::ir::Scope;
        let scope = Scope::new("x", &["a"]);
        let cases = [
            "x^2/a - a*x^5 + x - 7",
            "1 + x + x^2 + x^3 + x^4 + x^5 + x^6 + x^7",
            "exp(-x) * sqrt(abs(x)) / (1 + x^2)^3 - x^-2",
            "sin(x) + cos(x) + tan(x/3) + asin(x/9) + acos(x/9) + atan(x)",
            "sinh(x) + cosh(x) + tanh(x) + sech(x) + asinh(x) + acosh(2 + x^2) + atanh(x/9)",
            "log(1 + x^2) + pow(1 + x^2, a) + (2 + x)^(x/3) - ln(3 + x)",
            "1 - tanh(x/sqrt(6*a))^2 * exp(-x)",
        ];
        let xs: Vec<f64> = (0..37).map(|i| -4.0 + 0.21 * i as f64).collect();
        for src in cases {
            let c = compile_one(src, &scope).unwrap();
            let mut ev = c.tape.evaluator(&[0.7]);
            for n in [1, 5, BATCH] {
                ev.eval_batch(&xs[..n]);
                let got = ev.batch_output(0).to_vec();
                for (j, &x) in xs[..n].iter().enumerate() {
                    assert_eq!(got[j].to_bits(), ev.eval(x).to_bits(), "{src} at {x}");
                }
            }
        }
        // The portable path gives the same bits as the vector-extension path chosen at run
        // time (where there is one).
        let c = compile_one(cases[6], &scope).unwrap();
        let mut ev = c.tape.evaluator(&[0.7]);
        ev.eval_batch(&xs[..BATCH]);
        let mut lanes = ev.lanes.clone();
        let t = &c.tape;
        run_lanes_portable(&t.body, &mut lanes, t.body_start as usize, &ev.coeffs);
        for r in 0..t.n_regs {
            for j in 0..BATCH {
                assert_eq!(lanes[r][j].to_bits(), ev.lanes[r][j].to_bits(), "register {r}");
            }
        }
        let exprs = [("v", "x^2 * exp(-a*x)"), ("k", "1/(1 - x^2/9)^2")];
        let c = compile(&exprs, &scope, &Limits::default()).unwrap();
        let mut ev = c.tape.evaluator(&[1.3]);
        let mut seen = vec![false; xs.len()];
        let mut batch = ev.clone();
        batch.eval_each(&xs, |i, out| {
            let (v, k) = (ev.eval(xs[i]), ev.output(1));
            assert_eq!((out[0].to_bits(), out[1].to_bits()), (v.to_bits(), k.to_bits()));
            seen[i] = true;
        });
        assert!(seen.iter().all(|s| *s));
    }

    /// The split chains against the sum written out, for every count of coefficients from one
    /// (a constant) to twelve, both parities, so each branch of `poly_f64` is exercised.
    #[test]
    fn split_horner_matches_the_written_sum() {
        for n in 1..=12usize {
            let c: Vec<f64> = (0..n).map(|k| 1.0 - 0.3 * k as f64 + 0.05 * (k * k) as f64).collect();
            for x in [-1.7f64, -0.5, 0.0, 0.3, 1.0, 2.5] {
                let direct: f64 = c.iter().enumerate().map(|(k, ck)| ck * x.powi(k as i32)).sum();
                let scale: f64 = c.iter().enumerate().map(|(k, ck)| (ck * x.powi(k as i32)).abs()).sum();
                let got = poly_f64(&c, x);
                assert!((got - direct).abs() <= 1e-14 * scale, "n={n} x={x}: {got} vs {direct}");
            }
        }
    }

    /// Handbook check: the Maclaurin series of tanh is x - x^3/3 + 2x^5/15 - 17x^7/315
    /// (DLMF 4.33.3), so the jet at 0 has these coefficients.
    #[test]
    fn tanh_taylor_coefficients_dlmf_4_33_3() {
        let mut a = [0.0; JET_LEN];
        a[1] = 1.0;
        let t = tan_like(&a, MAX_ORDER, 0.0, -1.0);
        let want = [0.0, 1.0, 0.0, -1.0 / 3.0, 0.0, 2.0 / 15.0, 0.0, -17.0 / 315.0, 0.0];
        for k in 0..MAX_ORDER + 1 {
            assert!((t[k] - want[k]).abs() < 1e-15, "order {k}: {} vs {}", t[k], want[k]);
        }
    }

    /// The public jet arithmetic is the tape's own: dividing the jets of two expressions gives
    /// the bits of the jet of their quotient compiled as one tape, and likewise the product.
    #[test]
    fn public_jet_arithmetic_is_the_tapes() {
        use crate::config::Limits;
        use crate::language::compile::compile;
        use crate::language::ir::Scope;
        let scope = Scope::new("x", &[]);
        let exprs = [
            ("f", "exp(x) + x^3"),
            ("g", "2 + sin(x)"),
            ("q", "(exp(x) + x^3)/(2 + sin(x))"),
        ];
        let c = compile(&exprs, &scope, &Limits::default()).unwrap();
        let p = compile(&[("p", "(exp(x) + x^3)*(2 + sin(x))")], &scope, &Limits::default()).unwrap();
        let mut ev = c.tape.evaluator(&[]);
        let mut evp = p.tape.evaluator(&[]);
        for order in [0, 3, MAX_ORDER] {
            ev.eval_jet(0.3, order);
            let (f, g, q) = (*ev.jet_output(0), *ev.jet_output(1), *ev.jet_output(2));
            assert_eq!(
                jet_div(&f, &g, order).map(f64::to_bits),
                q.map(f64::to_bits),
                "order {order}"
            );
            let prod = *evp.eval_jet(0.3, order);
            assert_eq!(
                jet_mul(&f, &g, order).map(f64::to_bits),
                prod.map(f64::to_bits),
                "order {order}"
            );
        }
        // The derivative of a series: sum (k+1) x^k has derivative sum (k+1)(k+2) x^(k+1-1),
        // one order less; exact in integers.
        let a: Jet = std::array::from_fn(|k| (k + 1) as f64);
        let d = jet_derivative(&a, MAX_ORDER);
        for k in 0..MAX_ORDER {
            assert_eq!(d[k], ((k + 1) * (k + 2)) as f64, "order {k}");
        }
        assert_eq!(d[MAX_ORDER], 0.0);
        assert_eq!(jet_derivative(&a, 2)[3..], [0.0; JET_LEN - 3]);
    }

    /// A polynomial in a field other than the first is one instruction too; monomials of two
    /// fields in one sum are not a polynomial.
    #[test]
    fn polynomials_in_any_one_field() {
        use crate::language::compile::compile_one;
        use crate::language::ir::Scope;
        let scope = Scope::with_fields(&["x", "y"], &["a"]).unwrap();
        let polys = |src: &str| {
            let c = compile_one(src, &scope).unwrap();
            c.tape.body.iter().filter(|op| matches!(op, Op::Poly { .. })).count()
        };
        assert_eq!(polys("1 + 2*y + 3*y^2/a"), 1);
        assert_eq!(polys("exp(x)*(1 + y + y^2/2 + y^3/6)"), 1);
        assert_eq!(polys("1 + x + x^2 + y"), 0);
        assert_eq!(polys("x + y + x^2*y"), 0);
    }

    /// The `--emit tape` view names each field's register; with one field it reads as before.
    #[test]
    fn listing_shows_every_field() {
        use crate::language::compile::compile_one;
        use crate::language::ir::Scope;
        let two = compile_one("x*y + 1", &Scope::with_fields(&["x", "y"], &[]).unwrap()).unwrap();
        let text = two.tape.to_string();
        assert!(
            text.contains("r1 = field #0\nr2 = field #1\nr3 = mul r1 r2\n"),
            "{text}"
        );
        let one = compile_one("x*x + 1", &Scope::new("x", &[])).unwrap();
        assert!(
            one.tape.to_string().contains("; per point\nr1 = field\n"),
            "{}",
            one.tape
        );
    }
}
