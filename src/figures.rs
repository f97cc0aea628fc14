//! Figures of each recognised smoother: its coefficient turned into `metrics` stages, and
//! for the last stage of a cascade the figures of the whole chain.
//!
//! This is the seam between recognition (which knows C) and `metrics` (which knows only
//! numbers): it decides which smoothers have figures at all (a coefficient outside (0, 1]
//! has none; an unknown or adaptive one has none) and never invents a rate.

use crate::metrics::{Figures, Stage};
use crate::recognise::{Form, Smoother};
use crate::units::{Alpha, Hertz};

#[derive(Debug, Clone, PartialEq)]
pub struct SmootherFigures {
    /// The smoother's own stage, when its coefficient is known and valid.
    pub stage: Option<Stage>,
    pub own: Option<Figures>,
    /// For the last stage of a cascade: the indexes of the stages, first to last, and the
    /// combined figures.
    pub cascade: Option<(Vec<usize>, Figures)>,
}

/// The stage a smoother is, when its coefficient allows figures.
pub fn stage_of(s: &Smoother) -> Option<Stage> {
    match s.form {
        Form::MovingAverage => s.window.filter(|n| *n >= 1).map(Stage::MovingAverage),
        Form::Ema | Form::ScaledState => s.alpha.value().and_then(Alpha::new).map(Stage::Ema),
    }
}

fn rate(s: &Smoother) -> Option<Hertz> {
    s.rate.hz.filter(|r| r.is_finite() && *r > 0.0).map(Hertz)
}

pub fn for_all(smoothers: &[Smoother]) -> Vec<SmootherFigures> {
    // Which smoothers feed another (one pass: marking each one's upstream).
    let mut downstream = vec![false; smoothers.len()];
    for s in smoothers {
        if let Some(slot) = s.upstream.and_then(|u| downstream.get_mut(u)) {
            *slot = true;
        }
    }
    smoothers
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let stage = stage_of(s);
            let own = stage.map(|st| Figures::for_stages(&[st], rate(s)));
            let cascade = if s.upstream.is_some() && !downstream[i] {
                cascade_of(smoothers, i)
            } else {
                None
            };
            SmootherFigures {
                stage,
                own,
                cascade,
            }
        })
        .collect()
}

fn cascade_of(smoothers: &[Smoother], last: usize) -> Option<(Vec<usize>, Figures)> {
    let mut chain = vec![last];
    let mut current = last;
    while let Some(up) = smoothers[current].upstream {
        if chain.contains(&up) || chain.len() > 16 {
            return None;
        }
        chain.push(up);
        current = up;
    }
    chain.reverse();
    let stages: Option<Vec<Stage>> = chain.iter().map(|&i| stage_of(&smoothers[i])).collect();
    let stages = stages?;
    // The cascade runs at the rate of its stages when they agree.
    let rates: Vec<Option<Hertz>> = chain.iter().map(|&i| rate(&smoothers[i])).collect();
    let rate = match rates.first().copied().flatten() {
        Some(r) if rates.iter().all(|x| *x == Some(r)) => Some(r),
        _ => None,
    };
    Some((chain, Figures::for_stages(&stages, rate)))
}
