//! The exponential moving average with its state in output units: `y += a*(u - y)`,
//! `y = a*u + (1-a)*y`, `y = (y*(N-1) + u)/N`, `y += (u - y) >> k`, Q15 products, and
//! every reordering of them.
//!
//! When the input weights sum to alpha identically (the weights are written so that a
//! constant input comes out unchanged) the update is a smoother whatever the coefficient's
//! value: unknown, out of range (listed for `coefficient-out-of-range`), or truncated to
//! zero by C arithmetic. When they do not, the numbers decide: an alpha between 0 and 2
//! with a finite gain is listed with its DC gain (`dc-gain-not-one` reports it); unknown
//! weights that do not sum to alpha are a different recursion (a leaky integrator with an
//! independent gain, a rotation), not a smoother.

use super::super::judge::Reading;
use super::super::values::{Node, V};
use super::super::Form;
use super::Verdict;
use crate::context;

/// Why the reading is a recursion that is never a smoother, whatever its numbers.
pub fn reject(r: &Reading) -> Result<(), &'static str> {
    let g = r.g();
    let file = r.walk.graph.home_info(r.walk.home).file;
    // A weight that shrinks with a sample counter makes a cumulative mean, not a smoother
    // with a time constant (`m += (u - m) / n` with `n++`).
    let counter = r.weight_atoms().iter().any(|&a| {
        let leaves = match &r.affine.atoms[a as usize] {
            super::super::affine::AtomKind::Pow2 { .. } => Vec::new(),
            _ => r.affine.values_of(a),
        };
        leaves.iter().any(|&v| {
            // A place stepped by a constant somewhere (`n++`), read here directly or as
            // what this body just stored into it (`n++; m += (u - m) / n;`).
            g.any_within(
                v,
                &|x| {
                    let x = g.place_of(g.strip_aliases(x));
                    g.is_place(x) && r.program.is_counter(&g.display(x, 200), file)
                },
                500,
            ) || matches!(g.node(g.strip_aliases(v)), Node::Opaque { .. }) && {
                // A local counter: `n` stepped by one in this body.
                let name = g.display(v, 60);
                r.walk.candidates.iter().any(|c| {
                    matches!(g.node(c.state), Node::Opaque { .. }) && g.display(c.state, 60) == name
                })
            }
        })
    });
    if counter {
        return Err("the weight shrinks with a counter (a cumulative mean)");
    }
    // The places the other updates of this body write.
    let others: Vec<_> = r
        .walk
        .candidates
        .iter()
        .filter(|c| {
            c.place != r.candidate.place && matches!(c.kind, super::super::walk::StateKind::Place)
        })
        .map(|c| c.place)
        .collect();
    if !others.is_empty() {
        // An input that another update of this body writes, where that update reads this
        // state's value from before this update: the pair is one second-order recursion
        // (a rotation, an oscillator, a tracker of position and speed), not a smoother of
        // an input. (A copy of the new value out to the input's place is no such pair.)
        let me = r.candidate.place;
        // The places the inputs read, gathered once (at most 2,000 nodes an input).
        let reached = std::cell::RefCell::new(std::collections::HashSet::new());
        for (a, _) in &r.affine.inputs {
            for v in r.affine.values_of(*a) {
                g.any_within(
                    v,
                    &|x| {
                        reached.borrow_mut().insert(g.place_of(x));
                        false
                    },
                    2000,
                );
            }
        }
        let input_places = reached.into_inner();
        let reads_old_me = |v: V| {
            g.any_within_avoiding(
                v,
                &|x| g.place_of(x) == me && !matches!(g.node(x), Node::Stored { .. }),
                r.candidate.value,
                2000,
            )
        };
        let paired = r.walk.candidates.iter().any(|c| {
            c.place != me
                && matches!(c.kind, super::super::walk::StateKind::Place)
                && input_places.contains(&c.place)
                && reads_old_me(c.value)
        });
        if paired {
            return Err("its input is updated from its own state (a coupled pair)");
        }
        // A coefficient that reads what another update of the same body writes is part of
        // a coupled recursion (a Kalman gain from a covariance updated each step, a
        // projection whose ratio comes from the other coordinates being moved), not a
        // smoother's constant.
        let coupled = r.weight_atoms().iter().any(|&a| {
            r.affine
                .values_of(a)
                .into_iter()
                .any(|v| g.any_within(v, &|x| others.contains(&g.place_of(x)), 2000))
        });
        if coupled {
            return Err("its coefficient reads another update of the same body");
        }
    }
    Ok(())
}

pub fn judge(r: &Reading) -> Option<Verdict> {
    let a = &r.affine;
    if a.structural {
        // A coefficient that is not a finite number has no filter to describe.
        if r.alpha.is_some_and(|x| !x.is_finite()) {
            return None;
        }
        let mut v = Verdict::new(Form::Ema);
        v.dc_gain = match (r.alpha, r.input_weight) {
            (Some(alpha), Some(w)) if alpha != 0.0 => Some(w / alpha),
            _ => Some(1.0),
        };
        return Some(v);
    }
    // Weights that do not sum to alpha: only numbers can say what it is.
    let (alpha, w) = (r.alpha?, r.input_weight?);
    // A gain of the wrong sign turns the input around: a rotation or a coupled pair, not
    // a smoother.
    let low_pass = alpha > 0.0 && alpha < 2.0 && w.is_finite() && w / alpha > 0.0;
    if !low_pass {
        return None;
    }
    // An input weighted by the time step is being integrated, even when the numbers
    // happen to sum to one (`pos = 0.995*pos + vel*DT` with DT = 0.005).
    let step_weighted = a.inputs.iter().any(|(_, wp)| {
        wp.atoms()
            .iter()
            .any(|&x| context::is_time_step_name(&r.atom_text(x)))
    });
    if step_weighted {
        return None;
    }
    // A leak with an input gain of its own: every input's weight is a named quantity that
    // shares nothing with the decay, and the two do not make a unity gain (a leaky integral
    // of a control loop, `i = i*0.9995f + KI*err`). A blend written with the wrong numbers
    // (`y = 0.9f*y + 0.3f*u`) is still listed, for `dc-gain-not-one`.
    let decay_atoms = a.alpha.atoms();
    let own_gain = (w / alpha - 1.0).abs() > 0.02
        && a.inputs.iter().all(|(_, wp)| {
            let atoms = wp.atoms();
            !atoms.is_empty() && atoms.iter().all(|x| !decay_atoms.contains(x))
        });
    if own_gain {
        return None;
    }
    let mut v = Verdict::new(Form::Ema);
    v.dc_gain = Some(w / alpha);
    Some(v)
}
