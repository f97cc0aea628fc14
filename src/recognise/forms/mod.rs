//! One file per written form the recogniser knows, each with its judge: what the affine
//! reading of an update must look like for the form, and what the form's figures are.
//!
//! - `ema`: a first-order smoother with the state in output units (any spelling whose
//!   weights make a low-pass, and blends whose weights do not sum to one, listed for the
//!   `dc-gain-not-one` rule);
//! - `scaled_state`: an accumulator holding the output times a factor, read out by a
//!   division or a shift (`acc += u - acc/N`, `acc += (u << 3) - (acc >> 4)`);
//! - `moving_average`: a running sum over a ring buffer that takes the new sample and gives
//!   back the one leaving;
//! - `resummed`: a buffer summed afresh after each new sample.
//!
//! Adding a form touches this folder, a fixture in `fixtures/forms/` and its execution
//! driver in `tests/exec/`.

pub mod ema;
pub mod moving_average;
pub mod resummed;
pub mod scaled_state;

use super::Form;
use crate::eval::ChainStep;

/// What a form's judge concluded.
#[derive(Debug, Clone)]
pub struct Verdict {
    pub form: Form,
    pub window: Option<u32>,
    /// Sum of the input weights over alpha: 1 for a correct smoother.
    pub dc_gain: Option<f64>,
    /// For a scaled state, the factor between state and output.
    pub scale: Option<f64>,
    /// Steps of the derivation found by the judge itself (the window's).
    pub chain: Vec<ChainStep>,
    /// The expressions whose smallest value is the window (a buffer's length, where its
    /// index wraps, a loop's bound), read in the update's function: evaluated again under
    /// another `#if` branch of a macro they use, they give the window's variants.
    pub window_terms: Vec<crate::ir::Expr>,
}

impl Verdict {
    pub fn new(form: Form) -> Verdict {
        Verdict {
            form,
            window: None,
            dc_gain: None,
            scale: None,
            chain: Vec::new(),
            window_terms: Vec::new(),
        }
    }
}
