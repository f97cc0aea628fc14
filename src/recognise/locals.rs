//! The walk's environment: the current value of every local temporary and of every place
//! written earlier in the same body, with an undo trail for branches.
//!
//! Values are `V`s of the walk's graph, so setting, saving and restoring costs a number,
//! never a copy of an expression. Branches do not clone the environment: the walk marks the
//! trail, walks one branch, undoes back to the mark collecting what the branch changed,
//! walks the other, and merges the two change sets. The cost of a branch is the number of
//! names it changes, not the number of names in scope, so a function with ten thousand
//! locals and as many `if`s stays linear.

use super::values::{Sym, V};
use crate::ir::Span;
use std::collections::HashMap;

/// What the environment holds a value for.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Key {
    /// A local temporary (a parameter once assigned, or a declared local).
    Local(Sym),
    /// A place in memory written earlier in this body (store forwarding).
    Place(V),
}

/// A value bound to a key, with the statement that gave it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Binding {
    pub value: V,
    /// The assignment that set it (the update line to report when a place is stored from
    /// this local), and the macro definition it came through.
    pub origin: Option<(Span, Option<Span>)>,
}

#[derive(Debug, Default)]
pub struct Locals {
    map: HashMap<Key, Binding>,
    trail: Vec<(Key, Option<Binding>)>,
    version: u32,
}

/// A point of the trail to come back to.
#[derive(Debug, Clone, Copy)]
pub struct Mark(usize);

impl Locals {
    pub fn get(&self, key: Key) -> Option<Binding> {
        self.map.get(&key).copied()
    }

    pub fn set(&mut self, key: Key, binding: Binding) {
        let old = self.map.insert(key, binding);
        self.trail.push((key, old));
    }

    pub fn remove(&mut self, key: Key) {
        if let Some(old) = self.map.remove(&key) {
            self.trail.push((key, Some(old)));
        }
    }

    /// A fresh version number (for opaque values of locals).
    pub fn next_version(&mut self) -> u32 {
        self.version += 1;
        self.version
    }

    pub fn mark(&self) -> Mark {
        Mark(self.trail.len())
    }

    /// Undoes every change made since `mark` and returns the final binding of each key
    /// changed (None where the key was removed), in the order first changed.
    pub fn undo(&mut self, mark: Mark) -> Vec<(Key, Option<Binding>)> {
        let mut changed: Vec<Key> = Vec::new();
        let mut seen = std::collections::HashSet::new();
        for (key, _) in &self.trail[mark.0..] {
            if seen.insert(*key) {
                changed.push(*key);
            }
        }
        let finals: Vec<(Key, Option<Binding>)> = changed
            .iter()
            .map(|k| (*k, self.map.get(k).copied()))
            .collect();
        while self.trail.len() > mark.0 {
            let Some((key, old)) = self.trail.pop() else {
                break;
            };
            match old {
                Some(b) => {
                    self.map.insert(key, b);
                }
                None => {
                    self.map.remove(&key);
                }
            }
        }
        finals
    }

    /// Every place with a forwarded value.
    pub fn places(&self) -> Vec<V> {
        let mut out: Vec<V> = self
            .map
            .keys()
            .filter_map(|k| match k {
                Key::Place(v) => Some(*v),
                Key::Local(_) => None,
            })
            .collect();
        out.sort_unstable();
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn undo_restores_and_reports_the_branch_changes() {
        let mut l = Locals::default();
        let a = Key::Local(Sym(1));
        let b = Key::Local(Sym(2));
        l.set(
            a,
            Binding {
                value: V(1),
                origin: None,
            },
        );
        let m = l.mark();
        l.set(
            a,
            Binding {
                value: V(2),
                origin: None,
            },
        );
        l.set(
            b,
            Binding {
                value: V(3),
                origin: None,
            },
        );
        l.set(
            a,
            Binding {
                value: V(4),
                origin: None,
            },
        );
        let changes = l.undo(m);
        assert_eq!(changes.len(), 2);
        assert_eq!(changes[0].1.map(|b| b.value), Some(V(4)));
        assert_eq!(l.get(a).map(|b| b.value), Some(V(1)));
        assert!(l.get(b).is_none());
    }
}
