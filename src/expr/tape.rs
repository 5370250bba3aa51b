//! Compiled evaluation over whole columns.
//!
//! An expression (or several, sharing their common sub-expressions) is compiled once into
//! a flat instruction list. Sub-expressions without data variables (parameters,
//! constants, `exp(a)`, `1/298.15`) are computed once per call; the rest runs over the
//! rows in chunks of [`CHUNK`] so the working registers stay in cache and memory stays
//! bounded whatever the number of rows. Registers are reused once their value is dead.
//!
//! Domain errors are caught without slowing the common case: output chunks are checked
//! for non-finite values (one vectorizable pass), and only a chunk that has one is
//! re-evaluated row by row with the checked reference evaluator, which names the row and the
//! sub-expression (and decides, with its short-circuit `&&`/`||`, whether the value really
//! mattered). Checked are the outputs, and the operands of operations that can turn a
//! non-finite value finite again (x/∞, e^(−∞), comparisons, …; see `may_absorb`): a
//! non-finite value read only by the others (sums, products, ln, sin, …) stays non-finite up
//! to a checked value in the same row, so the chunks re-evaluated are those of checking every
//! instruction.
//!
//! From [`PARALLEL_FROM`] rows on, blocks of whole chunks run in parallel on the rayon pool
//! (the batch's pool when called from a batch), with the same values as one pass.

use std::collections::HashMap;

use rayon::prelude::*;

use super::ast::{AddOp, CmpOp, Expr, ExprKind, Func, LogicOp, MulOp};
use super::error::{EvalError, ExprError};
use super::recursive::eval_checked;
use crate::vector::all_finite;

/// Rows per chunk: 2,048 rows × 8 bytes = 16 KiB per register.
pub const CHUNK: usize = 2048;

/// Slot order of the names an expression may use: variables in column order,
/// parameters in parameter-vector order.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Symbols {
    pub variables: Vec<String>,
    pub parameters: Vec<String>,
}

impl Symbols {
    pub fn new(variables: &[&str], parameters: &[&str]) -> Symbols {
        Symbols {
            variables: variables.iter().map(|s| s.to_string()).collect(),
            parameters: parameters.iter().map(|s| s.to_string()).collect(),
        }
    }

    fn lookup<'a>(
        &'a self,
        columns: &'a [&[f64]],
        params: &'a [f64],
        row: usize,
    ) -> impl Fn(&str) -> Option<f64> + 'a {
        move |name: &str| {
            if let Some(i) = self.variables.iter().position(|v| v == name) {
                return columns.get(i).and_then(|c| c.get(row)).copied();
            }
            let i = self.parameters.iter().position(|p| p == name)?;
            params.get(i).copied()
        }
    }
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
enum Op {
    Add,
    Sub,
    Mul,
    Div,
    Neg,
    Pow,
    PowI(i32),
    Sqrt,
    F1(Func),
    F2(Func),
    Cmp(CmpOp),
    And,
    Or,
    Not,
}

const NONE: u32 = u32::MAX;

/// A value of the shared graph: a leaf or an operation on earlier values.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
enum Key {
    Const(u64),
    Var(u32),
    Param(u32),
    Op(Op, u32, u32),
}

/// Where an instruction reads an operand from.
#[derive(Clone, Copy, Debug)]
enum Src {
    Reg(u32),
    Col(u32),
    Scalar(u32),
}

#[derive(Clone, Debug)]
struct Instr {
    op: Op,
    out: u32,
    a: Src,
    b: Src,
    /// The value depends on the data columns and constants only (no parameter) and is not an
    /// output: a scratch made by [`TapeScratch::for_fixed_columns`] keeps it between calls
    /// (see [`MultiTape::run_rows_body`]). Its register is never reused.
    data_only: bool,
    /// The checked evaluation looks at this output for non-finite values: it is an output, an
    /// operand an operation may turn finite again, or read by nothing (see [`may_absorb`]).
    check: bool,
}

/// Several expressions compiled together; common sub-expressions are computed once.
#[derive(Clone, Debug)]
pub struct MultiTape {
    symbols: Symbols,
    exprs: Vec<Expr>,
    keys: Vec<Key>,
    /// Values computed once per call, in dependency order.
    scalar_order: Vec<u32>,
    program: Vec<Instr>,
    registers: usize,
    outputs: Vec<Src>,
    /// Per register: the output whose slice holds it (the first output computed in that
    /// register; output registers are never reused), so results are written in place.
    home: Vec<Option<u32>>,
    /// Whether any instruction is [`Instr::data_only`].
    has_data_only: bool,
    /// Tells the tapes apart for the values a [`TapeScratch`] keeps (copies share it: they
    /// compute the same values).
    id: u64,
}

/// Source of [`MultiTape::id`].
static NEXT_TAPE_ID: std::sync::atomic::AtomicU64 = std::sync::atomic::AtomicU64::new(0);

/// Working memory of an evaluation: the once-per-call values and the row registers. A
/// caller that evaluates the same tape many times (a fit) keeps one and passes it to
/// [`MultiTape::eval_in`], so repeated evaluations allocate nothing.
#[derive(Clone, Debug, Default)]
pub struct TapeScratch {
    scalars: Vec<f64>,
    regs: Vec<Vec<f64>>,
    /// Made by [`TapeScratch::for_fixed_columns`]: the caller passes the same data every time.
    fixed_columns: bool,
    /// The tape, columns (address and length) and rows the registers of the data-only values
    /// were computed for, if any.
    kept_for: Option<KeptFor>,
    /// Whether one of the kept data-only values is not finite (the evaluation then checks its
    /// rows, as if it had computed them).
    kept_bad: bool,
}

/// What kept data-only values were computed for: the tape's id, each column's address and
/// length, the number of rows.
type KeptFor = (u64, Vec<(usize, usize)>, usize);

impl TapeScratch {
    /// A scratch for a caller that evaluates with the very same data columns on every call
    /// (a fit: only the parameters change). It keeps the values that depend on the data
    /// alone (`x^2`, `ln(x)`, `cos(2*pi*x/12)`) from the first evaluation for one chunk
    /// ([`CHUNK`] rows at most) and reuses them; the results are the same to the last bit.
    /// The columns are recognised by address and length, so the caller must not change
    /// their contents between calls.
    pub fn for_fixed_columns() -> TapeScratch {
        TapeScratch {
            fixed_columns: true,
            ..TapeScratch::default()
        }
    }

    fn key(tape: &MultiTape, columns: &[&[f64]], rows: usize) -> KeptFor {
        let cols = columns
            .iter()
            .map(|c| (c.as_ptr() as usize, c.len()))
            .collect();
        (tape.id, cols, rows)
    }

    /// Whether the kept data-only values are those of `tape` on `columns`.
    fn holds(&self, tape: &MultiTape, columns: &[&[f64]], rows: usize) -> bool {
        match &self.kept_for {
            Some((id, cols, r)) => {
                *id == tape.id
                    && *r == rows
                    && cols.len() == columns.len()
                    && cols
                        .iter()
                        .zip(columns)
                        .all(|(&(ptr, len), c)| ptr == c.as_ptr() as usize && len == c.len())
            }
            None => false,
        }
    }
}

/// One compiled expression.
#[derive(Clone, Debug)]
pub struct Tape {
    inner: MultiTape,
}

impl Tape {
    /// Compiles `expr`; names must be in `symbols` (or be `pi`).
    pub fn compile(expr: &Expr, symbols: &Symbols) -> Result<Tape, ExprError> {
        Ok(Tape {
            inner: MultiTape::compile(std::slice::from_ref(expr), symbols)?,
        })
    }

    /// Evaluates over the rows: `columns[i]` holds variable `i`, `out` receives one value
    /// per row. A domain error names the first bad row and the sub-expression.
    pub fn eval(
        &self,
        columns: &[&[f64]],
        params: &[f64],
        out: &mut [f64],
    ) -> Result<(), EvalError> {
        self.inner.eval(columns, params, &mut [out])
    }

    /// Evaluates without domain checks: NaN and ±inf are left in `out`.
    pub fn eval_unchecked(
        &self,
        columns: &[&[f64]],
        params: &[f64],
        out: &mut [f64],
    ) -> Result<(), EvalError> {
        self.inner.run(
            &mut TapeScratch::default(),
            columns,
            params,
            &mut [out],
            false,
        )
    }

    /// Evaluates a filter: one `bool` per row.
    pub fn eval_mask(&self, columns: &[&[f64]], params: &[f64]) -> Result<Vec<bool>, EvalError> {
        let rows = rows_of(columns, self.inner.symbols.variables.len())?;
        let mut out = vec![0.0; rows];
        self.eval(columns, params, &mut out)?;
        Ok(out.iter().map(|v| *v != 0.0).collect())
    }

    /// Number of per-chunk instructions (after sharing and hoisting constants).
    pub fn len(&self) -> usize {
        self.inner.program.len()
    }

    pub fn is_empty(&self) -> bool {
        self.inner.program.is_empty()
    }
}

fn rows_of(columns: &[&[f64]], expected: usize) -> Result<usize, EvalError> {
    if columns.len() != expected {
        return Err(shape_error(format!(
            "expected {expected} data columns, got {}",
            columns.len()
        )));
    }
    Ok(columns.first().map_or(0, |c| c.len()))
}

fn shape_error(message: String) -> EvalError {
    EvalError {
        row: 0,
        message,
        subexpr: String::new(),
    }
}

impl MultiTape {
    /// Compiles several expressions over the same symbols into one shared program.
    pub fn compile(exprs: &[Expr], symbols: &Symbols) -> Result<MultiTape, ExprError> {
        for name in symbols.variables.iter().chain(&symbols.parameters) {
            if name == "pi" {
                return Err(ExprError::new(
                    Default::default(),
                    "`pi` is the constant π and cannot name a variable or parameter",
                ));
            }
        }
        let mut b = Builder {
            symbols,
            keys: Vec::new(),
            memo: HashMap::new(),
        };
        let roots = exprs
            .iter()
            .map(|e| b.lower(e))
            .collect::<Result<Vec<u32>, ExprError>>()?;
        let keys = b.keys;
        Ok(MultiTape::emit(
            symbols.clone(),
            exprs.to_vec(),
            keys,
            &roots,
        ))
    }

    /// Compiles a model and its derivative with respect to every parameter of `symbols`
    /// (output 0 is the simplified model, output `1 + j` its derivative by parameter `j`),
    /// sharing the sub-expressions they have in common.
    pub fn model_and_jacobian(model: &Expr, symbols: &Symbols) -> Result<MultiTape, ExprError> {
        let params: Vec<&str> = symbols.parameters.iter().map(String::as_str).collect();
        let mut exprs = vec![super::simplify(model)];
        exprs.extend(super::deriv::jacobian(model, &params));
        MultiTape::compile(&exprs, symbols)
    }

    /// Number of per-row instructions (after sharing and hoisting constants).
    pub fn program_len(&self) -> usize {
        self.program.len()
    }

    /// The compiled expressions, in output order.
    pub fn exprs(&self) -> &[Expr] {
        &self.exprs
    }

    fn emit(symbols: Symbols, exprs: Vec<Expr>, keys: Vec<Key>, roots: &[u32]) -> MultiTape {
        let n = keys.len();
        // A value is per-row ("vector") when it depends on a data variable.
        let mut vector = vec![false; n];
        for (i, k) in keys.iter().enumerate() {
            vector[i] = match *k {
                Key::Var(_) => true,
                Key::Const(_) | Key::Param(_) => false,
                Key::Op(_, a, b) => vector[a as usize] || (b != NONE && vector[b as usize]),
            };
        }
        // Free of parameters: depends on constants and data variables only.
        let mut param_free = vec![true; n];
        for (i, k) in keys.iter().enumerate() {
            param_free[i] = match *k {
                Key::Var(_) | Key::Const(_) => true,
                Key::Param(_) => false,
                Key::Op(_, a, b) => param_free[a as usize] && (b == NONE || param_free[b as usize]),
            };
        }
        let mut is_root = vec![false; n];
        for &r in roots {
            is_root[r as usize] = true;
        }
        let is_instr = |i: usize| vector[i] && matches!(keys[i], Key::Op(..));
        let data_only = |i: usize| is_instr(i) && param_free[i] && !is_root[i];
        let mut last_use = vec![0usize; n];
        let mut order = 0usize;
        let mut instr_index = vec![usize::MAX; n];
        for (i, k) in keys.iter().enumerate() {
            if !is_instr(i) {
                continue;
            }
            instr_index[i] = order;
            if let Key::Op(_, a, b) = *k {
                last_use[a as usize] = order;
                if b != NONE {
                    last_use[b as usize] = order;
                }
            }
            order += 1;
        }
        for &r in roots {
            last_use[r as usize] = usize::MAX;
        }
        // The values the checked evaluation must look at: a non-finite value read only by
        // operations that keep it non-finite reaches one of these in the same row.
        let mut check = vec![false; n];
        let mut readers = vec![0u32; n];
        for (i, k) in keys.iter().enumerate() {
            if let (true, Key::Op(op, a, b)) = (is_instr(i), *k) {
                readers[a as usize] += 1;
                check[a as usize] |= may_absorb(op, 0);
                if b != NONE {
                    readers[b as usize] += 1;
                    check[b as usize] |= may_absorb(op, 1);
                }
            }
        }
        for &r in roots {
            check[r as usize] = true;
        }
        for (c, r) in check.iter_mut().zip(&readers) {
            *c |= *r == 0;
        }
        let mut reg_of = vec![NONE; n];
        let mut free: Vec<u32> = Vec::new();
        let mut registers = 0u32;
        let mut program = Vec::new();
        let src = |i: u32, reg_of: &[u32]| match keys[i as usize] {
            Key::Var(slot) => Src::Col(slot),
            _ if vector[i as usize] => Src::Reg(reg_of[i as usize]),
            _ => Src::Scalar(i),
        };
        for (i, k) in keys.iter().enumerate() {
            let Key::Op(op, a, b) = *k else { continue };
            if !is_instr(i) {
                continue;
            }
            // A data-only value gets a register of its own: one used earlier in the program
            // would be overwritten on every call before the kept value is read.
            let reused = if data_only(i) { None } else { free.pop() };
            let out = reused.unwrap_or_else(|| {
                registers += 1;
                registers - 1
            });
            reg_of[i] = out;
            let sa = src(a, &reg_of);
            let sb = if b == NONE {
                Src::Scalar(NONE)
            } else {
                src(b, &reg_of)
            };
            program.push(Instr {
                op,
                out,
                a: sa,
                b: sb,
                data_only: data_only(i),
                check: check[i],
            });
            // Free operands whose last use is this instruction (after choosing `out`,
            // so an instruction never writes a register it reads); the registers of
            // data-only values are kept.
            let here = instr_index[i];
            for operand in [a, b] {
                if operand != NONE
                    && is_instr(operand as usize)
                    && !data_only(operand as usize)
                    && last_use[operand as usize] == here
                    && !free.contains(&reg_of[operand as usize])
                {
                    free.push(reg_of[operand as usize]);
                }
            }
        }
        let scalar_order = (0..n as u32).filter(|&i| !vector[i as usize]).collect();
        let outputs: Vec<Src> = roots.iter().map(|&r| src(r, &reg_of)).collect();
        let mut home = vec![None; registers as usize];
        for (k, o) in outputs.iter().enumerate() {
            if let Src::Reg(r) = *o
                && home[r as usize].is_none()
            {
                home[r as usize] = u32::try_from(k).ok();
            }
        }
        let has_data_only = program.iter().any(|ins| ins.data_only);
        MultiTape {
            symbols,
            exprs,
            keys,
            scalar_order,
            program,
            registers: registers as usize,
            outputs,
            home,
            has_data_only,
            id: NEXT_TAPE_ID.fetch_add(1, std::sync::atomic::Ordering::Relaxed),
        }
    }

    /// Evaluates every output over the rows (`outs[k]` receives output `k`).
    pub fn eval(
        &self,
        columns: &[&[f64]],
        params: &[f64],
        outs: &mut [&mut [f64]],
    ) -> Result<(), EvalError> {
        self.run(&mut TapeScratch::default(), columns, params, outs, true)
    }

    /// [`MultiTape::eval`] with working memory kept by the caller between calls.
    pub fn eval_in(
        &self,
        scratch: &mut TapeScratch,
        columns: &[&[f64]],
        params: &[f64],
        outs: &mut [&mut [f64]],
    ) -> Result<(), EvalError> {
        self.run(scratch, columns, params, outs, true)
    }

    fn run(
        &self,
        scratch: &mut TapeScratch,
        columns: &[&[f64]],
        params: &[f64],
        outs: &mut [&mut [f64]],
        checked: bool,
    ) -> Result<(), EvalError> {
        if params.len() != self.symbols.parameters.len() {
            return Err(shape_error(format!(
                "expected {} parameter values, got {}",
                self.symbols.parameters.len(),
                params.len()
            )));
        }
        if outs.len() != self.outputs.len() {
            return Err(shape_error(format!(
                "expected {} output slices, got {}",
                self.outputs.len(),
                outs.len()
            )));
        }
        let rows = match outs.first() {
            Some(o) => o.len(),
            None => return Ok(()),
        };
        if columns.len() != self.symbols.variables.len() {
            return Err(shape_error(format!(
                "expected {} data columns, got {}",
                self.symbols.variables.len(),
                columns.len()
            )));
        }
        if columns.iter().any(|c| c.len() != rows) || outs.iter().any(|o| o.len() != rows) {
            return Err(shape_error(
                "data columns and outputs must all have the same number of rows".to_string(),
            ));
        }
        let parts = parallel_parts(rows);
        if parts <= 1 {
            return self.run_rows(scratch, columns, params, outs, checked);
        }
        // Large inputs: contiguous blocks of whole chunks on the rayon pool. Each row is
        // computed by the same instructions as in one pass (the ops are elementwise and the
        // chunk boundaries do not move), so the values are identical; the first error in row
        // order is reported.
        let per = rows.div_ceil(parts).div_ceil(CHUNK) * CHUNK;
        let mut rest: Vec<&mut [f64]> = outs.iter_mut().map(|o| &mut **o).collect();
        let mut jobs = Vec::with_capacity(parts);
        let mut lo = 0;
        while lo < rows {
            let len = per.min(rows - lo);
            let mut mine = Vec::with_capacity(rest.len());
            for r in rest.iter_mut() {
                let (a, b) = std::mem::take(r).split_at_mut(len);
                mine.push(a);
                *r = b;
            }
            let cols: Vec<&[f64]> = columns.iter().map(|c| &c[lo..lo + len]).collect();
            jobs.push((lo, cols, mine));
            lo += len;
        }
        let results: Vec<Result<(), EvalError>> = jobs
            .into_par_iter()
            .map(|(lo, cols, mut outs)| {
                self.run_rows(
                    &mut TapeScratch::default(),
                    &cols,
                    params,
                    &mut outs,
                    checked,
                )
                .map_err(|e| EvalError {
                    row: e.row + lo,
                    ..e
                })
            })
            .collect();
        results.into_iter().collect()
    }

    /// [`MultiTape::run`] on one thread (shapes already checked). On x86-64 processors with
    /// AVX2 the loop runs as compiled for AVX2 ([`crate::vector::dispatch`]): the
    /// operations are elementwise IEEE arithmetic (and [`super::exp`], written in such
    /// arithmetic), which give the same bits at any vector width, and fused multiply-add is
    /// not enabled, so the results do not depend on the machine (tested below against the
    /// baseline build of the same loop).
    fn run_rows(
        &self,
        scratch: &mut TapeScratch,
        columns: &[&[f64]],
        params: &[f64],
        outs: &mut [&mut [f64]],
        checked: bool,
    ) -> Result<(), EvalError> {
        crate::vector::dispatch(
            #[inline(always)]
            || self.run_rows_body(scratch, columns, params, outs, checked),
        )
    }

    #[inline(always)]
    fn run_rows_body(
        &self,
        scratch: &mut TapeScratch,
        columns: &[&[f64]],
        params: &[f64],
        outs: &mut [&mut [f64]],
        checked: bool,
    ) -> Result<(), EvalError> {
        let rows = outs.first().map_or(0, |o| o.len());
        self.scalars(params, &mut scratch.scalars);
        let scalars = scratch.scalars.as_slice();
        let scalars_bad = self
            .scalar_order
            .iter()
            .any(|&i| !scalars[i as usize].is_finite());
        let width = CHUNK.min(rows.max(1));
        // The data-only values of one chunk, kept by a fixed-columns scratch: computed on the
        // first call (and checked whatever else is bad, so that a later call knows), reused
        // on the next ones. A kept value that is not finite makes every call check its rows,
        // as computing it would.
        let keep = scratch.fixed_columns && self.has_data_only && rows <= CHUNK;
        let kept = keep && scratch.holds(self, columns, rows);
        let mut kept_bad = kept && scratch.kept_bad;
        if !kept {
            // The data-only registers are about to be written: until this call records
            // them, they hold nothing to reuse.
            scratch.kept_for = None;
        }
        let regs = &mut scratch.regs;
        if regs.len() < self.registers {
            regs.resize(self.registers, Vec::new());
        }
        for (r, home) in regs.iter_mut().zip(&self.home) {
            if home.is_none() && r.len() < width {
                r.resize(width, 0.0);
            }
        }
        let mut lo = 0;
        while lo < rows {
            let hi = (lo + CHUNK).min(rows);
            let len = hi - lo;
            let mut bad = scalars_bad || kept_bad;
            for ins in &self.program {
                if kept && ins.data_only {
                    continue;
                }
                // An output's register is the output slice itself: no copy at the end.
                let finite = match self.home[ins.out as usize] {
                    None => {
                        let mut out = std::mem::take(&mut regs[ins.out as usize]);
                        let (a, b) = (
                            operand(ins.a, regs, outs, &self.home, columns, scalars, lo, hi),
                            operand(ins.b, regs, outs, &self.home, columns, scalars, lo, hi),
                        );
                        exec(ins.op, &mut out[..len], a, b);
                        let finite = if keep && ins.data_only {
                            let finite = all_finite(&out[..len]);
                            kept_bad |= !finite;
                            !checked || finite
                        } else {
                            !checked || bad || !ins.check || all_finite(&out[..len])
                        };
                        regs[ins.out as usize] = out;
                        finite
                    }
                    Some(k) => {
                        let k = k as usize;
                        let dest = std::mem::take(&mut outs[k]);
                        let (a, b) = (
                            operand(ins.a, regs, outs, &self.home, columns, scalars, lo, hi),
                            operand(ins.b, regs, outs, &self.home, columns, scalars, lo, hi),
                        );
                        exec(ins.op, &mut dest[lo..hi], a, b);
                        let finite = !checked || bad || !ins.check || all_finite(&dest[lo..hi]);
                        outs[k] = dest;
                        finite
                    }
                };
                bad |= !finite;
            }
            for (k, src) in self.outputs.iter().enumerate() {
                if matches!(*src, Src::Reg(r) if self.home[r as usize] == Some(k as u32)) {
                    continue;
                }
                let dest = std::mem::take(&mut outs[k]);
                match operand(*src, regs, outs, &self.home, columns, scalars, lo, hi) {
                    V::S(s) => dest[lo..hi].copy_from_slice(s),
                    V::C(c) => dest[lo..hi].fill(c),
                }
                outs[k] = dest;
            }
            // Outputs copied from registers were checked as instructions; only those taken
            // straight from a data column or a once-per-call value are checked here.
            if checked
                && (bad
                    || self
                        .outputs
                        .iter()
                        .zip(outs.iter())
                        .any(|(src, o)| !matches!(src, Src::Reg(_)) && !all_finite(&o[lo..hi])))
            {
                self.locate(columns, params, lo, hi, outs)?;
            }
            lo = hi;
        }
        if keep && !kept && rows > 0 {
            scratch.kept_for = Some(TapeScratch::key(self, columns, rows));
            scratch.kept_bad = kept_bad;
        }
        Ok(())
    }

    /// The once-per-call values, into `vals` (indexed by key). Only their entries are ever
    /// read (operands `Src::Scalar` and the scalar operations here, in dependency order), so
    /// the others are not cleared between calls.
    fn scalars(&self, params: &[f64], vals: &mut Vec<f64>) {
        if vals.len() != self.keys.len() {
            vals.clear();
            vals.resize(self.keys.len(), 0.0);
        }
        for &i in &self.scalar_order {
            vals[i as usize] = match self.keys[i as usize] {
                Key::Const(bits) => f64::from_bits(bits),
                Key::Param(slot) => params.get(slot as usize).copied().unwrap_or(f64::NAN),
                Key::Var(_) => f64::NAN,
                Key::Op(op, a, b) => {
                    let mut out = [0.0];
                    let b = if b == NONE { 0.0 } else { vals[b as usize] };
                    exec(op, &mut out, V::C(vals[a as usize]), V::C(b));
                    out[0]
                }
            };
        }
    }

    /// Re-evaluates rows `lo..hi` with the checked reference evaluator and returns the
    /// first genuine domain error.
    #[cold]
    #[inline(never)]
    fn locate(
        &self,
        columns: &[&[f64]],
        params: &[f64],
        lo: usize,
        hi: usize,
        outs: &[&mut [f64]],
    ) -> Result<(), EvalError> {
        for row in lo..hi {
            let lookup = self.symbols.lookup(columns, params, row);
            for e in &self.exprs {
                if let Err(d) = eval_checked(e, &lookup) {
                    return Err(EvalError {
                        row,
                        message: d.message,
                        subexpr: d.subexpr,
                    });
                }
            }
            for (k, o) in outs.iter().enumerate() {
                if !o[row].is_finite() {
                    return Err(EvalError {
                        row,
                        message: format!("the result is {}", o[row]),
                        subexpr: self.exprs[k].to_string(),
                    });
                }
            }
        }
        Ok(())
    }
}

/// Rows from which evaluation is split across the rayon pool: below, one thread is faster
/// than handing out work (about 32 chunks; common practice, not tuned per machine).
const PARALLEL_FROM: usize = 32 * CHUNK;

/// Into how many blocks to split `rows` rows: up to four per pool thread, each at least
/// [`PARALLEL_FROM`]/2 rows.
fn parallel_parts(rows: usize) -> usize {
    if rows < PARALLEL_FROM {
        return 1;
    }
    (rayon::current_num_threads() * 4).min(rows / (PARALLEL_FROM / 2))
}

/// Whether `op` can give a finite value when its operand `which` (0 the first, 1 the second)
/// is not finite (±∞ or NaN). False only where IEEE arithmetic and the functions keep it
/// non-finite whatever the other operand: x ± ∞, x·∞ (∞ or NaN), ∞/x, −∞, √∞, ∞ᵏ (k ≥ 1),
/// ln, log₁₀, log₂, |·|, sin, cos, tan, asin, acos, sinh, cosh of ±∞ or NaN. Everything else
/// may absorb it (x/∞ = 0, e^(−∞) = 0, atan(∞) = π/2, comparisons, …) and has its operand
/// checked, so the checked evaluation still sees every non-finite intermediate value.
fn may_absorb(op: Op, which: usize) -> bool {
    match op {
        Op::Add | Op::Sub | Op::Mul | Op::Neg | Op::Sqrt => false,
        Op::Div => which == 1,
        Op::PowI(k) => k < 1,
        Op::F1(f) => !matches!(
            f,
            Func::Ln
                | Func::Log10
                | Func::Log2
                | Func::Sqrt
                | Func::Abs
                | Func::Sin
                | Func::Cos
                | Func::Tan
                | Func::Asin
                | Func::Acos
                | Func::Sinh
                | Func::Cosh
        ),
        _ => true,
    }
}

#[derive(Clone, Copy)]
enum V<'a> {
    S(&'a [f64]),
    C(f64),
}

/// The value of `src` for rows `lo..hi`: a register lives in `regs`, or in the output slice
/// it is the home of (`home`, see [`MultiTape::home`]).
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn operand<'a>(
    src: Src,
    regs: &'a [Vec<f64>],
    outs: &'a [&mut [f64]],
    home: &[Option<u32>],
    columns: &'a [&[f64]],
    scalars: &[f64],
    lo: usize,
    hi: usize,
) -> V<'a> {
    match src {
        Src::Reg(r) => match home[r as usize] {
            None => V::S(&regs[r as usize][..hi - lo]),
            Some(k) => V::S(&outs[k as usize][lo..hi]),
        },
        Src::Col(c) => V::S(&columns[c as usize][lo..hi]),
        Src::Scalar(NONE) => V::C(0.0),
        Src::Scalar(i) => V::C(scalars[i as usize]),
    }
}

#[inline(always)]
fn un(out: &mut [f64], a: V, f: impl Fn(f64) -> f64) {
    match a {
        V::S(x) => out.iter_mut().zip(x).for_each(|(o, &x)| *o = f(x)),
        V::C(c) => out.fill(f(c)),
    }
}

#[inline(always)]
fn bin(out: &mut [f64], a: V, b: V, f: impl Fn(f64, f64) -> f64) {
    match (a, b) {
        (V::S(x), V::S(y)) => out
            .iter_mut()
            .zip(x.iter().zip(y))
            .for_each(|(o, (&x, &y))| *o = f(x, y)),
        (V::S(x), V::C(c)) => out.iter_mut().zip(x).for_each(|(o, &x)| *o = f(x, c)),
        (V::C(c), V::S(y)) => out.iter_mut().zip(y).for_each(|(o, &y)| *o = f(c, y)),
        (V::C(c), V::C(d)) => out.fill(f(c, d)),
    }
}

/// Booleans are 1.0/0.0; a NaN operand gives NaN so that a bad value under a
/// comparison is never silently read as "false".
fn truth(b: bool) -> f64 {
    f64::from(u8::from(b))
}

fn cmp(x: f64, y: f64, r: bool) -> f64 {
    if x.is_nan() || y.is_nan() {
        f64::NAN
    } else {
        truth(r)
    }
}

#[inline(always)]
fn exec(op: Op, out: &mut [f64], a: V, b: V) {
    match op {
        Op::Add => bin(out, a, b, |x, y| x + y),
        Op::Sub => bin(out, a, b, |x, y| x - y),
        Op::Mul => bin(out, a, b, |x, y| x * y),
        Op::Div => bin(out, a, b, |x, y| x / y),
        Op::Pow => bin(out, a, b, f64::powf),
        Op::Neg => un(out, a, |x| -x),
        Op::PowI(2) => un(out, a, |x| x * x),
        Op::PowI(-1) => un(out, a, |x| 1.0 / x),
        Op::PowI(k) => un(out, a, |x| x.powi(k)),
        Op::Sqrt => un(out, a, f64::sqrt),
        Op::F1(f) => match f {
            Func::Exp => match a {
                V::S(x) => super::exp::exp_slice_inline(x, out),
                V::C(c) => out.fill(super::exp::exp(c)),
            },
            Func::Ln => un(out, a, f64::ln),
            Func::Log10 => un(out, a, f64::log10),
            Func::Log2 => un(out, a, f64::log2),
            Func::Sqrt => un(out, a, f64::sqrt),
            Func::Abs => un(out, a, f64::abs),
            Func::Sin => un(out, a, f64::sin),
            Func::Cos => un(out, a, f64::cos),
            Func::Tan => un(out, a, f64::tan),
            Func::Asin => un(out, a, f64::asin),
            Func::Acos => un(out, a, f64::acos),
            Func::Atan => un(out, a, f64::atan),
            Func::Sinh => un(out, a, f64::sinh),
            Func::Cosh => un(out, a, f64::cosh),
            Func::Tanh => un(out, a, f64::tanh),
            two => un(out, a, |x| two.apply(x, 0.0)),
        },
        Op::F2(f) => match f {
            Func::Atan2 => bin(out, a, b, f64::atan2),
            Func::Min => bin(out, a, b, |x, y| Func::Min.apply(x, y)),
            Func::Max => bin(out, a, b, |x, y| Func::Max.apply(x, y)),
            other => bin(out, a, b, |x, y| other.apply(x, y)),
        },
        Op::Cmp(c) => match c {
            CmpOp::Lt => bin(out, a, b, |x, y| cmp(x, y, x < y)),
            CmpOp::Le => bin(out, a, b, |x, y| cmp(x, y, x <= y)),
            CmpOp::Gt => bin(out, a, b, |x, y| cmp(x, y, x > y)),
            CmpOp::Ge => bin(out, a, b, |x, y| cmp(x, y, x >= y)),
            CmpOp::Eq => bin(out, a, b, |x, y| cmp(x, y, x == y)),
            CmpOp::Ne => bin(out, a, b, |x, y| cmp(x, y, x != y)),
        },
        // Short-circuit semantics as in the reference evaluator: a false left side
        // decides `&&` whatever the right side is (even NaN).
        Op::And => bin(out, a, b, |x, y| {
            if x.is_nan() {
                f64::NAN
            } else if x == 0.0 {
                0.0
            } else if y.is_nan() {
                f64::NAN
            } else {
                truth(y != 0.0)
            }
        }),
        Op::Or => bin(out, a, b, |x, y| {
            if x.is_nan() {
                f64::NAN
            } else if x != 0.0 {
                1.0
            } else if y.is_nan() {
                f64::NAN
            } else {
                truth(y != 0.0)
            }
        }),
        Op::Not => un(out, a, |x| {
            if x.is_nan() {
                f64::NAN
            } else {
                truth(x == 0.0)
            }
        }),
    }
}

struct Builder<'s> {
    symbols: &'s Symbols,
    keys: Vec<Key>,
    memo: HashMap<Key, u32>,
}

impl Builder<'_> {
    fn value(&mut self, key: Key) -> u32 {
        if let Some(&id) = self.memo.get(&key) {
            return id;
        }
        let id = self.keys.len() as u32;
        self.keys.push(key);
        self.memo.insert(key, id);
        id
    }

    fn op(&mut self, op: Op, a: u32, b: u32) -> u32 {
        self.value(Key::Op(op, a, b))
    }

    /// Lowers `root` to graph values by an explicit post-order walk (no recursion, so
    /// tree depth never matters here).
    fn lower(&mut self, root: &Expr) -> Result<u32, ExprError> {
        enum Task<'e> {
            Visit(&'e Expr),
            Build(&'e Expr),
        }
        let mut tasks = vec![Task::Visit(root)];
        let mut values: Vec<u32> = Vec::new();
        while let Some(task) = tasks.pop() {
            match task {
                Task::Visit(e) => match &e.kind {
                    ExprKind::Number(v) => values.push(self.value(Key::Const(v.to_bits()))),
                    ExprKind::Name(n) => values.push(self.name(n, e)?),
                    _ => {
                        tasks.push(Task::Build(e));
                        for child in operands(e).into_iter().rev() {
                            tasks.push(Task::Visit(child));
                        }
                    }
                },
                Task::Build(e) => {
                    let n = operands(e).len();
                    let at = values.len().checked_sub(n).ok_or_else(|| {
                        ExprError::new(e.span, "internal error: operand stack underflow")
                    })?;
                    let args = values.split_off(at);
                    let v = self.build(e, &args)?;
                    values.push(v);
                }
            }
        }
        values
            .pop()
            .ok_or_else(|| ExprError::new(root.span, "internal error: empty expression"))
    }

    fn name(&mut self, n: &str, e: &Expr) -> Result<u32, ExprError> {
        if let Some(i) = self.symbols.variables.iter().position(|v| v == n) {
            Ok(self.value(Key::Var(i as u32)))
        } else if let Some(i) = self.symbols.parameters.iter().position(|p| p == n) {
            Ok(self.value(Key::Param(i as u32)))
        } else if n == "pi" {
            Ok(self.value(Key::Const(std::f64::consts::PI.to_bits())))
        } else {
            let vars: Vec<&str> = self.symbols.variables.iter().map(String::as_str).collect();
            let pars: Vec<&str> = self.symbols.parameters.iter().map(String::as_str).collect();
            Err(super::resolve::unknown_name(n, e.span, &vars, &pars))
        }
    }

    /// Builds the value of `e` from the values of its [`operands`].
    fn build(&mut self, e: &Expr, args: &[u32]) -> Result<u32, ExprError> {
        let arg = |i: usize| args.get(i).copied().unwrap_or(NONE);
        Ok(match &e.kind {
            ExprKind::Number(_) | ExprKind::Name(_) => arg(0),
            ExprKind::Neg(_) => self.op(Op::Neg, arg(0), NONE),
            ExprKind::Not(_) => self.op(Op::Not, arg(0), NONE),
            ExprKind::Sum { rest, .. } => {
                let mut acc = arg(0);
                for (i, (op, _)) in rest.iter().enumerate() {
                    let op = match op {
                        AddOp::Add => Op::Add,
                        AddOp::Sub => Op::Sub,
                    };
                    acc = self.op(op, acc, arg(i + 1));
                }
                acc
            }
            ExprKind::Product { rest, .. } => {
                let mut acc = arg(0);
                for (i, (op, _)) in rest.iter().enumerate() {
                    let op = match op {
                        MulOp::Mul => Op::Mul,
                        MulOp::Div => Op::Div,
                    };
                    acc = self.op(op, acc, arg(i + 1));
                }
                acc
            }
            ExprKind::Pow(_, exponent) => self.power(arg(0), exponent, arg(1)),
            ExprKind::Call {
                func,
                args: call_args,
            } => match (func, call_args.len()) {
                (Func::Pow, 2) => self.power(arg(0), &call_args[1], arg(1)),
                (Func::Sqrt, 1) => self.op(Op::Sqrt, arg(0), NONE),
                (f, 1) => self.op(Op::F1(*f), arg(0), NONE),
                (f, 2) => self.op(Op::F2(*f), arg(0), arg(1)),
                _ => {
                    return Err(ExprError::new(
                        e.span,
                        format!("`{func}` called with {} arguments", call_args.len()),
                    ));
                }
            },
            ExprKind::Compare(op, ..) => self.op(Op::Cmp(*op), arg(0), arg(1)),
            ExprKind::Logic { op, .. } => {
                let op = match op {
                    LogicOp::And => Op::And,
                    LogicOp::Or => Op::Or,
                };
                let mut acc = arg(0);
                for i in 1..args.len() {
                    acc = self.op(op, acc, arg(i));
                }
                acc
            }
        })
    }

    /// Constant exponents get cheaper instructions: `x^2` is `x*x`, `x^0.5` is `sqrt(x)`
    /// (`exponent_value` is `NONE` when the exponent is such a literal and not lowered).
    fn power(&mut self, base: u32, exponent: &Expr, exponent_value: u32) -> u32 {
        match cheap_power(exponent) {
            Some(op) => self.op(op, base, NONE),
            None => self.op(Op::Pow, base, exponent_value),
        }
    }
}

/// The instruction for a literal exponent that has one.
fn cheap_power(exponent: &Expr) -> Option<Op> {
    let k = literal(exponent)?;
    if k == 0.5 {
        Some(Op::Sqrt)
    } else if k.fract() == 0.0 && k.abs() <= 64.0 {
        Some(Op::PowI(k as i32))
    } else {
        None
    }
}

/// The sub-expressions whose values an instruction for `e` needs: all children, except
/// a literal exponent that becomes part of the instruction.
fn operands(e: &Expr) -> Vec<&Expr> {
    match &e.kind {
        ExprKind::Pow(base, exponent) if cheap_power(exponent).is_some() => vec![base],
        ExprKind::Call {
            func: Func::Pow,
            args,
        } if args.len() == 2 && cheap_power(&args[1]).is_some() => vec![&args[0]],
        _ => e.children(),
    }
}

/// The value of a literal number or negated literal.
fn literal(e: &Expr) -> Option<f64> {
    match &e.kind {
        ExprKind::Number(v) => Some(*v),
        ExprKind::Neg(inner) => literal(inner).map(|v| -v),
        _ => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::expr::{parse_expression, parse_filter};

    /// Outputs are computed in place; an output repeated, a bare column and a constant are
    /// still filled, over several chunks.
    #[test]
    fn outputs_sharing_a_value_columns_and_constants_are_all_filled() {
        let exprs: Vec<Expr> = ["a*exp(x)", "a*exp(x)", "x", "2*a", "exp(x) - a*exp(x)"]
            .iter()
            .map(|s| parse_expression(s).expect("test expression parses"))
            .collect();
        let tape = MultiTape::compile(&exprs, &Symbols::new(&["x"], &["a"])).expect("compiles");
        let rows = 2 * CHUNK + 5;
        let x: Vec<f64> = (0..rows).map(|i| i as f64 * 1e-3).collect();
        let mut outs = vec![vec![f64::NAN; rows]; exprs.len()];
        let mut views: Vec<&mut [f64]> = outs.iter_mut().map(|o| o.as_mut_slice()).collect();
        tape.eval(&[&x], &[1.5], &mut views).expect("finite");
        for (i, &xi) in x.iter().enumerate() {
            let e = super::super::exp::exp(xi);
            assert_eq!(outs[0][i].to_bits(), (1.5 * e).to_bits());
            assert_eq!(outs[1][i].to_bits(), (1.5 * e).to_bits());
            assert_eq!(outs[2][i].to_bits(), xi.to_bits());
            assert_eq!(outs[3][i], 3.0);
            assert_eq!(outs[4][i].to_bits(), (e - 1.5 * e).to_bits());
        }
    }

    /// The run-time choice of the AVX2 build and the portable build give the same bits, for
    /// every kind of operation, over rows that include overflow, NaN and out-of-domain values.
    #[test]
    fn the_vector_build_gives_the_bits_of_the_portable_build() {
        let sources = [
            "exp(-a*x)/(b + x*y)",
            "exp(x*a) - exp(-y*b*100)",
            "a*x^b + sqrt(abs(y)) - ln(abs(x) + 1)",
            "log10(abs(x)+b) * log2(abs(y)+a) + x^3 + y^-1 + x^2.5",
            "sin(x)*cos(y) + tan(a*x) + atan(y) + atan2(x, y) + sinh(a) + cosh(y/100) + tanh(x)",
            "asin(x/1000) + acos(y/1000) + min(x, y) - max(x, a) + pow(abs(x), b)",
        ];
        let filters = ["x < y && y > a || x >= b && !(y <= a) || x == y || x != a"];
        let exprs: Vec<Expr> = sources
            .iter()
            .map(|s| parse_expression(s).expect("test expression parses"))
            .chain(
                filters
                    .iter()
                    .map(|s| parse_filter(s).expect("test filter parses")),
            )
            .collect();
        let sources: Vec<&str> = sources.iter().chain(&filters).copied().collect();
        let symbols = Symbols::new(&["x", "y"], &["a", "b"]);
        let tape = MultiTape::compile(&exprs, &symbols).expect("compiles");
        let rows = 3 * CHUNK + 17;
        let x: Vec<f64> = (0..rows)
            .map(|i| match i % 97 {
                0 => 800.0,
                1 => -800.0,
                2 => f64::NAN,
                _ => (i as f64 - 3000.0) * 0.173,
            })
            .collect();
        let y: Vec<f64> = (0..rows)
            .map(|i| ((i * 37) % 1000) as f64 - 499.5)
            .collect();
        let params = [0.7, 1.3];
        let eval = |portable: bool| {
            let mut outs = vec![vec![0.0; rows]; exprs.len()];
            let mut views: Vec<&mut [f64]> = outs.iter_mut().map(|o| o.as_mut_slice()).collect();
            let mut scratch = TapeScratch::default();
            let cols: [&[f64]; 2] = [&x, &y];
            let result = if portable {
                crate::vector::run_baseline(|| {
                    tape.run_rows_body(&mut scratch, &cols, &params, &mut views, false)
                })
            } else {
                tape.run_rows(&mut scratch, &cols, &params, &mut views, false)
            };
            result.expect("unchecked run");
            outs
        };
        let (a, b) = (eval(true), eval(false));
        for (k, (oa, ob)) in a.iter().zip(&b).enumerate() {
            for (row, (va, vb)) in oa.iter().zip(ob).enumerate() {
                assert_eq!(va.to_bits(), vb.to_bits(), "{} at row {row}", sources[k]);
            }
        }
    }
}
