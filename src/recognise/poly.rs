//! Polynomials over opaque atoms, for putting an update in affine form in its state.
//!
//! An update's new value is read as a sum of monomials: a real coefficient times a product
//! of atoms. Atoms are the places and opaque sub-expressions of the update (the state, the
//! input, a coefficient variable, `exp(-dt/tau)`), plus inverses of denominators that are
//! not constants. Truncation of integer division and shifts is ignored here on purpose:
//! the affine form describes the intended filter; `sim` measures what truncation does.
//! Identities that need algebra beyond this (`1 - rc/(rc+dt) == dt/(rc+dt)`) are decided
//! numerically by `evaluate` at random points.

use std::collections::BTreeMap;

pub type AtomId = u16;

/// A product of atoms, kept sorted so that equal products compare equal.
pub type Monomial = Vec<AtomId>;

#[derive(Debug, Clone, PartialEq, Default)]
pub struct Poly {
    pub terms: BTreeMap<Monomial, f64>,
}

/// Monomials with more factors than this make the update "not affine" for our purposes.
const MAX_DEGREE: usize = 8;
/// Polynomials with more terms than this are not a smoother anyone writes by hand.
const MAX_TERMS: usize = 64;

impl Poly {
    pub fn constant(c: f64) -> Poly {
        let mut terms = BTreeMap::new();
        if c != 0.0 {
            terms.insert(Vec::new(), c);
        }
        Poly { terms }
    }

    pub fn atom(id: AtomId) -> Poly {
        let mut terms = BTreeMap::new();
        terms.insert(vec![id], 1.0);
        Poly { terms }
    }

    pub fn as_constant(&self) -> Option<f64> {
        match self.terms.len() {
            0 => Some(0.0),
            1 => self.terms.get(&Vec::new()).copied(),
            _ => None,
        }
    }

    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }

    pub fn add(&self, other: &Poly) -> Poly {
        let mut out = self.clone();
        for (m, c) in &other.terms {
            out.add_term(m.clone(), *c);
        }
        out
    }

    pub fn sub(&self, other: &Poly) -> Poly {
        self.add(&other.scale(-1.0))
    }

    pub fn scale(&self, k: f64) -> Poly {
        let mut out = Poly::default();
        for (m, c) in &self.terms {
            out.add_term(m.clone(), c * k);
        }
        out
    }

    fn add_term(&mut self, m: Monomial, c: f64) {
        let entry = self.terms.entry(m).or_insert(0.0);
        *entry += c;
        // Cancellation to within rounding is cancellation: `a*y - a*y` leaves nothing.
        if entry.abs() < 1e-15 {
            let key: Vec<Monomial> = self
                .terms
                .iter()
                .filter(|(_, v)| v.abs() < 1e-15)
                .map(|(k, _)| k.clone())
                .collect();
            for k in key {
                self.terms.remove(&k);
            }
        }
    }

    /// The product, or None when it grows past what a hand-written smoother has.
    pub fn mul(&self, other: &Poly, cancel: &dyn Fn(&mut Monomial)) -> Option<Poly> {
        let mut out = Poly::default();
        for (ma, ca) in &self.terms {
            for (mb, cb) in &other.terms {
                let mut m: Monomial = ma.iter().chain(mb.iter()).copied().collect();
                m.sort_unstable();
                cancel(&mut m);
                if m.len() > MAX_DEGREE {
                    return None;
                }
                out.add_term(m, ca * cb);
            }
        }
        if out.terms.len() > MAX_TERMS {
            return None;
        }
        Some(out)
    }

    /// How many times `atom` appears in the monomial where it appears most.
    pub fn degree_in(&self, atom: AtomId) -> usize {
        self.terms
            .keys()
            .map(|m| m.iter().filter(|a| **a == atom).count())
            .max()
            .unwrap_or(0)
    }

    /// Splits into (coefficient of `atom`, the rest): `self = coef * atom + rest`.
    pub fn split_on(&self, atom: AtomId) -> (Poly, Poly) {
        let mut coef = Poly::default();
        let mut rest = Poly::default();
        for (m, c) in &self.terms {
            if let Some(pos) = m.iter().position(|a| *a == atom) {
                let mut reduced = m.clone();
                reduced.remove(pos);
                coef.add_term(reduced, *c);
            } else {
                rest.add_term(m.clone(), *c);
            }
        }
        (coef, rest)
    }

    pub fn atoms(&self) -> Vec<AtomId> {
        let mut all: Vec<AtomId> = self.terms.keys().flatten().copied().collect();
        all.sort_unstable();
        all.dedup();
        all
    }

    /// Value at an assignment of the atoms.
    pub fn evaluate(&self, value_of: &dyn Fn(AtomId) -> f64) -> f64 {
        self.terms
            .iter()
            .map(|(m, c)| c * m.iter().map(|a| value_of(*a)).product::<f64>())
            .sum()
    }
}

/// A small deterministic generator for the random points of identity tests; the same
/// update always gets the same verdict.
pub struct Lcg(u64);

impl Lcg {
    pub fn new(seed: u64) -> Lcg {
        Lcg(seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407))
    }
    /// A value in [0.2, 1.7), away from the zeros and poles of typical coefficient formulas.
    pub fn next_value(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        0.2 + ((self.0 >> 11) as f64 / (1u64 << 53) as f64) * 1.5
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn none(_: &mut Monomial) {}

    #[test]
    fn ema_update_splits_into_state_and_rest() {
        // y + k*(u - y), with y = 0, u = 1, k = 2.
        let y = Poly::atom(0);
        let u = Poly::atom(1);
        let k = Poly::atom(2);
        let update = y.add(&k.mul(&u.sub(&y), &none).unwrap());
        let (cy, rest) = update.split_on(0);
        assert_eq!(cy, Poly::constant(1.0).sub(&k));
        assert_eq!(rest, k.mul(&u, &none).unwrap());
    }

    #[test]
    fn cancellation_removes_terms() {
        let a = Poly::atom(3).scale(0.1);
        assert!(a.sub(&a).is_zero());
    }

    #[test]
    fn products_are_bounded() {
        let mut p = Poly::atom(0).add(&Poly::atom(1));
        let mut grew_too_far = false;
        for _ in 0..10 {
            match p.mul(&p, &none) {
                Some(next) => p = next,
                None => {
                    grew_too_far = true;
                    break;
                }
            }
        }
        assert!(grew_too_far);
    }
}
