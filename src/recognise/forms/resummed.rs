//! A moving average summed afresh on every call: the body stores the new sample into a
//! buffer that outlives the call, at a ring position, then sums the buffer in a loop over
//! its first N elements (`for (i = 0; i < N; i++) acc += buf[i];`). The window is the
//! loop's bound. A buffer filled and summed in the same call (a block mean, a checksum of
//! a frame) is not this form: the walk only proposes buffers written at a position of
//! their own and not local to the call.

use super::super::judge::eval_value;
use super::super::walk::{Candidate, Resummed, WalkResult};
use super::super::Form;
use super::Verdict;
use crate::eval::Evaluator;
use crate::index::Program;

pub fn judge(program: &Program, walk: &WalkResult, c: &Candidate, r: &Resummed) -> Option<Verdict> {
    let mut ev = Evaluator::new(program);
    let n = eval_value(&mut ev, walk, r.bound, c.span).ok()?.as_f64();
    if !(n >= 1.0 && n <= u32::MAX as f64 && n.fract() == 0.0) {
        return None;
    }
    let mut v = Verdict::new(Form::MovingAverage);
    v.window = Some(n as u32);
    v.dc_gain = Some(1.0);
    v.chain = ev.chain;
    v.window_terms = walk
        .graph
        .to_expr(r.bound, c.span, true, 2000)
        .into_iter()
        .collect();
    Some(v)
}
