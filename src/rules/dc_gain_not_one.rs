//! `dc-gain-not-one`: a blend whose weights do not sum to one (`y = 0.9f*y + 0.2f*u`), so a
//! constant input settles at a multiple of itself. Reads `Smoother::dc_gain`, which the
//! recogniser computes as the input weights over alpha; the help names the weight that
//! would make the sum one, on either side.

use super::{Context, Finding, RuleInfo};
use crate::recognise::{Arithmetic, Smoother};
use crate::report::table::sig3;
use crate::spec::Severity;

pub const RULE: RuleInfo = RuleInfo {
    id: "dc-gain-not-one",
    severity: Severity::Error,
    summary: "The smoother's weights do not sum to one: a constant input settles off itself.",
    doc: include_str!("../../rules/dc-gain-not-one.md"),
    check,
};

/// The gain may differ from one by this much before it is a finding.
const TOLERANCE: f64 = 1e-6;

/// How far from one the gain may be for `alpha`: the tolerance, widened for float weights
/// by what rounding the written constants to binary32 alone can do. `0.999f` is stored as
/// 0.99900001287, which moves alpha = 1 - 0.999 by about 1.3e-8, a relative 1.3e-5: a
/// weight written exactly right must not be reported for that.
fn tolerance(s: &Smoother, alpha: f64) -> f64 {
    if s.arithmetic == Arithmetic::Float && alpha > 0.0 {
        TOLERANCE + f32::EPSILON as f64 / alpha
    } else {
        TOLERANCE
    }
}

fn check(ctx: &Context, out: &mut Vec<Finding>) {
    for (i, s, _) in ctx.smoothers() {
        let (Some(gain), Some(alpha)) = (s.dc_gain, s.alpha.value()) else {
            continue;
        };
        if !(gain.is_finite() && alpha > 0.0 && alpha.is_finite()) {
            continue;
        }
        if (gain - 1.0).abs() <= tolerance(s, alpha) {
            continue;
        }
        let state_weight = 1.0 - alpha;
        let input_weight = alpha * gain;
        let inputs = if s.inputs.len() > 1 {
            "input weights"
        } else {
            "input weight"
        };
        let error = (gain - 1.0) * 100.0;
        let mut message = format!(
            "DC gain {}: the state weight {} and the {inputs} {} sum to {}, not 1, so a \
             constant input settles at {} times its value (a steady-state error of {}{} % \
             of the input)",
            sig3(gain),
            sig3(state_weight),
            sig3(input_weight),
            sig3(state_weight + input_weight),
            sig3(gain),
            if error > 0.0 { "+" } else { "" },
            sig3(error)
        );
        if let Some((lo, hi)) = ctx.inputs[i].range {
            let top = if hi.abs() >= lo.abs() { hi } else { lo };
            message.push_str(&format!(
                "; at {} it settles at {}",
                sig3(top),
                sig3(top * gain)
            ));
        }
        let mut finding = Finding::at(&RULE, i, s, message);
        let make = if s.inputs.len() > 1 {
            "make the input weights sum to"
        } else {
            "make the input weight"
        };
        finding.help = Some(format!(
            "{make} {} (1 - {}), or the state weight {} (1 - {}), so the weights sum to one",
            sig3(alpha),
            sig3(state_weight),
            sig3(1.0 - input_weight),
            sig3(input_weight)
        ));
        out.push(finding);
    }
}

#[cfg(test)]
mod tests {
    use super::super::coefficient_truncated::findings_in;
    use super::*;

    #[test]
    fn weights_summing_to_one_point_one_give_gain_two() {
        // Source: DOMAIN section 1, the DC gain c_u / (1 - c_y) = 0.2 / 0.1 = 2 (algebra
        // of the affine form, no outside value).
        let f = findings_in(
            "static float y;\nvoid f(float u) { y = 0.9f*y + 0.2f*u; }\n",
            "",
            RULE.id,
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(
            f[0].message
                .starts_with("DC gain 2: the state weight 0.9 and the input weight 0.2 sum to 1.1"),
            "{}",
            f[0].message
        );
        assert!(f[0].message.contains("error of +100 %"), "{}", f[0].message);
        let help = f[0].help.as_deref().unwrap();
        assert!(
            help.starts_with("make the input weight 0.1 (1 - 0.9)"),
            "{help}"
        );
        assert!(help.contains("state weight 0.8 (1 - 0.2)"), "{help}");
    }

    #[test]
    fn a_gain_below_one_and_the_input_range_are_said() {
        let f = findings_in(
            "static float y;\nvoid f(float u) { y = 0.8f*y + 0.1f*u; }\n",
            "defaults:\n  input: { range: [0, 4095] }\n",
            RULE.id,
        );
        assert_eq!(f.len(), 1, "{f:?}");
        assert!(f[0].message.starts_with("DC gain 0.5"), "{}", f[0].message);
        assert!(f[0].message.contains("error of -50 %"), "{}", f[0].message);
        assert!(
            f[0].message.ends_with("at 4095 it settles at 2048"),
            "{}",
            f[0].message
        );
    }

    #[test]
    fn weights_that_sum_to_one_in_binary32_pass() {
        // 0.999f and 0.001f are not exact in binary32 (IEEE 754 rounding), which moves the
        // gain by about 1.3e-5; that is not a bug in the written weights.
        for body in [
            "y = 0.9f*y + 0.1f*u;",
            "y = 0.999f*y + 0.001f*u;",
            "y += 0.125f * (u - y);",
            "y = (y * 7 + u) / 8;",
        ] {
            let src = format!("static float y;\nvoid f(float u) {{ {body} }}\n");
            let f = findings_in(&src, "", RULE.id);
            assert!(f.is_empty(), "{body}: {f:?}");
        }
    }
}
