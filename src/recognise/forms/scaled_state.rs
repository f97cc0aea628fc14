//! An accumulator that holds the output times a factor: `acc += u - acc/N` (the state is
//! N times the output), `acc += (u << 3) - (acc >> 4)` (128 times), `sa += m` with
//! `m = rtt - (sa >> 3)` (8 times). The state's weight is `1 - alpha` as for any
//! smoother; the input's weight is alpha times the scale, so the DC gain of the state is
//! the scale, and the output is read by dividing or shifting it back.
//!
//! Told from a blend whose weights are simply wrong (`y = 0.9f*y + 0.3f*u`, gain 3) by the
//! arithmetic: an integer state, or a float one whose inputs come in with weight one (the
//! written `acc += u - ...` shape). A scale of at least 1.5 is required; below it, a gain
//! that misses one is a bug to report, not a design.

use super::super::affine::AtomKind;
use super::super::judge::Reading;
use super::super::Form;
use super::Verdict;

pub fn judge(r: &Reading) -> Option<Verdict> {
    let a = &r.affine;
    if a.structural {
        return None;
    }
    let unit_weights = a
        .inputs
        .iter()
        .all(|(_, w)| w.as_constant().is_some_and(|c| c > 0.0 && c.fract() == 0.0));
    let integer = r.state_type.as_ref().is_some_and(|t| t.is_integer());
    match (r.alpha, r.input_weight) {
        (Some(alpha), Some(w)) => {
            if !(alpha > 0.0 && alpha <= 1.0) {
                return None;
            }
            let gain = w / alpha;
            let whole_inputs = (w - w.round()).abs() < 1e-9 && w >= 1.0;
            if gain >= 1.5 && (integer || (unit_weights && whole_inputs)) {
                let mut v = Verdict::new(Form::ScaledState);
                v.scale = Some(gain);
                v.dc_gain = Some(1.0);
                return Some(v);
            }
            None
        }
        _ => {
            // `acc += u - acc/N` (or `- (acc >> k)`) with N set at run time: whole-number
            // input weights and an alpha that is one over something. The scale is N,
            // unknown here. (`val = val*base + digit` has alpha 1 - base: no.)
            let one_over = a.alpha.terms.len() == 1
                && a.alpha.terms.iter().all(|(m, c)| {
                    *c > 0.0
                        && !m.is_empty()
                        && m.iter().all(|x| {
                            matches!(
                                a.atoms[*x as usize],
                                AtomKind::Inverse(..) | AtomKind::Pow2 { negative: true, .. }
                            )
                        })
                });
            if unit_weights && one_over {
                let mut v = Verdict::new(Form::ScaledState);
                v.dc_gain = Some(1.0);
                return Some(v);
            }
            None
        }
    }
}
