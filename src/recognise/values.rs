//! The value graph: what the recogniser knows of every value in a function, shared.
//!
//! A walk over a function body (`walk`) puts each value it computes into one `Graph`:
//! literals, names (globals, parameters, macro constants), places (`f->y`, `buf[i]`),
//! operators over other values, and the values of local temporaries. Nodes are hash-consed,
//! so a value is built once and every use of it is a `V` (a number), never a copy: a local
//! that feeds a thousand statements costs one node, and equal places are equal numbers.
//!
//! The graph has a node budget. Past it, a new value becomes a `Huge` atom (opaque to the
//! algebra, counted, and noted by the walk), so no file can make the graph grow without
//! bound. Everything that reads the graph (printing, conversion back to the IR, reachability)
//! is iterative or depth-limited and has a size limit of its own.
//!
//! It knows nothing of smoothers; `affine` reads it as algebra, `judge` decides.

use crate::ir::*;
use rustc_hash::FxHashMap;
use std::collections::HashMap;

/// A value in one graph.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct V(pub u32);

/// An interned name.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Sym(pub u32);

/// An interned C type (for casts and the declared types of locals).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct TypeId(pub u32);

/// Where the names of a part of the graph are to be looked up: the function (or macro
/// body) whose walk made it. Values imported from a filter function keep the home of that
/// function, so its statics and locals are not confused with the caller's.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub struct Home(pub u32);

#[derive(Debug, Clone, PartialEq, Eq, Hash)]
pub enum Node {
    Int {
        value: u64,
        unsigned: bool,
        long: bool,
    },
    /// A floating constant, by its bits (so that equal constants are equal nodes).
    Float {
        bits: u64,
        single: bool,
    },
    /// An identifier that is not a local temporary: a global, a static local, a parameter's
    /// value on entry, a macro or enum constant. As a place it is the variable itself.
    Name {
        name: Sym,
        home: Home,
    },
    /// A local object used as memory (`acc.x`, `buf[i]`, `&tmp`): the base of places.
    LocalObject {
        name: Sym,
        home: Home,
    },
    /// A local temporary whose value is known: transparent to the algebra when its value
    /// carries the state, a named atom otherwise; printed as its name.
    Local {
        name: Sym,
        home: Home,
        version: u32,
        value: V,
    },
    /// A value stored into a place earlier in the same body and read back: transparent
    /// like `Local`, printed as the place it was stored into.
    Stored {
        name: Sym,
        version: u32,
        value: V,
    },
    /// The value a place holds after something may have changed it (a call, the start of
    /// a loop's iteration): a leaf, printed as the place. Version 0 is the place itself.
    Version {
        place: V,
        version: u32,
    },
    /// A local temporary whose value is not known here: set in a loop (`carried`: the
    /// value at the start of an iteration), in branches, or never set.
    Opaque {
        name: Sym,
        home: Home,
        version: u32,
        carried: bool,
    },
    Field {
        base: V,
        arrow: bool,
        field: Sym,
    },
    Index {
        base: V,
        index: V,
    },
    Deref(V),
    AddrOf(V),
    Unary(UnaryOp, V),
    Binary(BinaryOp, V, V),
    Cast(TypeId, V),
    Call {
        callee: Sym,
        args: Box<[V]>,
    },
    /// A call through an expression (a function pointer): never evaluated.
    CallIndirect {
        callee: V,
        args: Box<[V]>,
    },
    /// `c ? a : b` as written.
    Cond(V, V, V),
    /// The value after two branches of control flow: `cond` true gives `then`.
    Phi {
        cond: V,
        then: V,
        otherwise: V,
    },
    /// A construct kept as its text (sizeof, strings, `#if` conditions).
    Text(Sym),
    /// A value past the graph's budget: an atom standing for something too large to keep.
    Huge(u32),
}

/// Default number of nodes one graph may hold.
pub const NODE_BUDGET: usize = 200_000;

#[derive(Debug, Clone)]
pub struct HomeInfo {
    pub function: Option<crate::index::FuncRef>,
    pub file: usize,
}

#[derive(Debug, Clone)]
pub struct Graph {
    nodes: Vec<Node>,
    /// The graph's own tables are hashed with `FxHash` (a walk adds a node per value it
    /// reads; nothing here is iterated, so the order of the tables never shows).
    index: FxHashMap<Node, V>,
    names: Vec<String>,
    name_index: FxHashMap<String, Sym>,
    types: Vec<CType>,
    type_index: FxHashMap<String, TypeId>,
    homes: Vec<HomeInfo>,
    budget: usize,
    huge: u32,
}

impl Graph {
    pub fn new(budget: usize) -> Graph {
        Graph {
            nodes: Vec::new(),
            index: FxHashMap::default(),
            names: Vec::new(),
            name_index: FxHashMap::default(),
            types: Vec::new(),
            type_index: FxHashMap::default(),
            homes: Vec::new(),
            budget,
            huge: 0,
        }
    }

    pub fn len(&self) -> usize {
        self.nodes.len()
    }

    pub fn is_empty(&self) -> bool {
        self.nodes.is_empty()
    }

    /// How many values fell past the budget.
    pub fn over_budget(&self) -> u32 {
        self.huge
    }

    pub fn node(&self, v: V) -> &Node {
        &self.nodes[v.0 as usize]
    }

    pub fn sym(&mut self, name: &str) -> Sym {
        if let Some(s) = self.name_index.get(name) {
            return *s;
        }
        let s = Sym(self.names.len() as u32);
        self.names.push(name.to_string());
        self.name_index.insert(name.to_string(), s);
        s
    }

    pub fn name(&self, s: Sym) -> &str {
        &self.names[s.0 as usize]
    }

    pub fn type_id(&mut self, ty: &CType) -> TypeId {
        // A type without an array is equal to another exactly when their texts are (no
        // float in it), and a graph holds few: found by comparison, without the text.
        fn has_array(ty: &CType) -> bool {
            match ty {
                CType::Array(..) => true,
                CType::Pointer(inner) => has_array(inner),
                _ => false,
            }
        }
        // Every type is also under its text, so that a graph with many types is searched
        // by it instead (the comparison is linear).
        if !has_array(ty) && self.types.len() <= 32 {
            if let Some(i) = self.types.iter().position(|t| t == ty) {
                return TypeId(i as u32);
            }
        }
        let key = format!("{ty:?}");
        if let Some(t) = self.type_index.get(&key) {
            return *t;
        }
        let t = TypeId(self.types.len() as u32);
        self.types.push(ty.clone());
        self.type_index.insert(key, t);
        t
    }

    pub fn ty(&self, t: TypeId) -> &CType {
        &self.types[t.0 as usize]
    }

    pub fn home(&mut self, info: HomeInfo) -> Home {
        if let Some(i) = self
            .homes
            .iter()
            .position(|h| h.function == info.function && h.file == info.file)
        {
            return Home(i as u32);
        }
        self.homes.push(info);
        Home(self.homes.len() as u32 - 1)
    }

    pub fn home_info(&self, h: Home) -> &HomeInfo {
        &self.homes[h.0 as usize]
    }

    /// Adds a node (or finds the equal one already there).
    fn add(&mut self, node: Node) -> V {
        if let Some(v) = self.index.get(&node) {
            return *v;
        }
        if self.nodes.len() >= self.budget {
            // One atom per refusal: each stands for a different unknown value.
            self.huge += 1;
            let atom = Node::Huge(self.huge);
            let v = V(self.nodes.len() as u32);
            self.nodes.push(atom.clone());
            self.index.insert(atom, v);
            return v;
        }
        let v = V(self.nodes.len() as u32);
        self.nodes.push(node.clone());
        self.index.insert(node, v);
        v
    }

    // ----- constructors (they normalise, so equal C meanings meet in one node) -----

    pub fn int(&mut self, value: u64) -> V {
        self.add(Node::Int {
            value,
            unsigned: false,
            long: false,
        })
    }

    pub fn int_literal(&mut self, value: u64, unsigned: bool, long: bool) -> V {
        self.add(Node::Int {
            value,
            unsigned,
            long,
        })
    }

    pub fn float(&mut self, value: f64, single: bool) -> V {
        self.add(Node::Float {
            bits: value.to_bits(),
            single,
        })
    }

    pub fn name_node(&mut self, name: &str, home: Home) -> V {
        let name = self.sym(name);
        self.add(Node::Name { name, home })
    }

    pub fn local_object(&mut self, name: Sym, home: Home) -> V {
        self.add(Node::LocalObject { name, home })
    }

    pub fn local(&mut self, name: Sym, home: Home, version: u32, value: V) -> V {
        self.add(Node::Local {
            name,
            home,
            version,
            value,
        })
    }

    pub fn stored(&mut self, name: &str, version: u32, value: V) -> V {
        let name = self.sym(name);
        self.add(Node::Stored {
            name,
            version,
            value,
        })
    }

    /// A place's value at a later epoch of the walk (version 0 is the place itself).
    pub fn version(&mut self, place: V, version: u32) -> V {
        if version == 0 {
            return place;
        }
        self.add(Node::Version { place, version })
    }

    /// The place a value read from memory stands for (itself for a place).
    pub fn place_of(&self, v: V) -> V {
        match self.node(v) {
            Node::Version { place, .. } => *place,
            _ => v,
        }
    }

    pub fn opaque(&mut self, name: Sym, home: Home, version: u32, carried: bool) -> V {
        self.add(Node::Opaque {
            name,
            home,
            version,
            carried,
        })
    }

    pub fn text(&mut self, text: &str) -> V {
        let s = self.sym(text);
        self.add(Node::Text(s))
    }

    /// Looks through the wrappers that do not change a value as memory sees it: locals
    /// with a known value and casts (a pointer local that holds `&x` is `&x`).
    pub fn strip_aliases(&self, mut v: V) -> V {
        for _ in 0..256 {
            match self.node(v) {
                Node::Local { value, .. } | Node::Stored { value, .. } => v = *value,
                Node::Cast(_, inner) => v = *inner,
                _ => return v,
            }
        }
        v
    }

    /// `base.field` or `base->field`; `(&x)->f` is `x.f`.
    pub fn field(&mut self, base: V, arrow: bool, field: Sym) -> V {
        let base = self.strip_aliases(base);
        if arrow {
            if let Node::AddrOf(inner) = *self.node(base) {
                return self.add(Node::Field {
                    base: inner,
                    arrow: false,
                    field,
                });
            }
            // `(*p).f` is written `p->f`.
        }
        if !arrow {
            if let Node::Deref(p) = *self.node(base) {
                return self.add(Node::Field {
                    base: p,
                    arrow: true,
                    field,
                });
            }
        }
        self.add(Node::Field { base, arrow, field })
    }

    pub fn index_node(&mut self, base: V, index: V) -> V {
        let base = self.strip_aliases(base);
        let index = self.strip_aliases(index);
        // `(&x)[0]` is `x`.
        if let (Node::AddrOf(inner), Node::Int { value: 0, .. }) =
            (self.node(base).clone(), self.node(index).clone())
        {
            return inner;
        }
        self.add(Node::Index { base, index })
    }

    /// `*p`; `*&x` is `x`, `*(p + k)` is `p[k]`.
    pub fn deref(&mut self, pointer: V) -> V {
        let p = self.strip_aliases(pointer);
        match self.node(p).clone() {
            Node::AddrOf(inner) => inner,
            Node::Binary(BinaryOp::Add, a, b) if self.is_integer_constant(b) => {
                self.index_node(a, b)
            }
            _ => self.add(Node::Deref(p)),
        }
    }

    pub fn addr_of(&mut self, place: V) -> V {
        if let Node::Deref(p) = *self.node(place) {
            return p;
        }
        self.add(Node::AddrOf(place))
    }

    fn is_integer_constant(&self, v: V) -> bool {
        matches!(self.node(v), Node::Int { .. })
    }

    pub fn unary(&mut self, op: UnaryOp, arg: V) -> V {
        match op {
            UnaryOp::Plus => arg,
            UnaryOp::Deref => self.deref(arg),
            UnaryOp::AddrOf => self.addr_of(arg),
            _ => self.add(Node::Unary(op, arg)),
        }
    }

    pub fn binary(&mut self, op: BinaryOp, a: V, b: V) -> V {
        self.add(Node::Binary(op, a, b))
    }

    pub fn cast(&mut self, ty: &CType, arg: V) -> V {
        let t = self.type_id(ty);
        self.add(Node::Cast(t, arg))
    }

    pub fn cast_id(&mut self, t: TypeId, arg: V) -> V {
        self.add(Node::Cast(t, arg))
    }

    pub fn call(&mut self, callee: &str, args: Vec<V>) -> V {
        let callee = self.sym(callee);
        self.add(Node::Call {
            callee,
            args: args.into_boxed_slice(),
        })
    }

    pub fn call_indirect(&mut self, callee: V, args: Vec<V>) -> V {
        self.add(Node::CallIndirect {
            callee,
            args: args.into_boxed_slice(),
        })
    }

    pub fn cond(&mut self, c: V, a: V, b: V) -> V {
        if a == b {
            return a;
        }
        self.add(Node::Cond(c, a, b))
    }

    pub fn phi(&mut self, cond: V, then: V, otherwise: V) -> V {
        if then == otherwise {
            return then;
        }
        self.add(Node::Phi {
            cond,
            then,
            otherwise,
        })
    }

    /// The values a node reads directly.
    pub fn children(&self, v: V) -> Vec<V> {
        match self.node(v) {
            Node::Int { .. }
            | Node::Float { .. }
            | Node::Name { .. }
            | Node::LocalObject { .. }
            | Node::Opaque { .. }
            | Node::Text(_)
            | Node::Version { .. }
            | Node::Huge(_) => Vec::new(),
            Node::Local { value, .. } | Node::Stored { value, .. } => vec![*value],
            Node::Field { base, .. } => vec![*base],
            Node::Index { base, index } => vec![*base, *index],
            Node::Deref(a) | Node::AddrOf(a) | Node::Unary(_, a) | Node::Cast(_, a) => vec![*a],
            Node::Binary(_, a, b) => vec![*a, *b],
            Node::Call { args, .. } => args.to_vec(),
            Node::CallIndirect { callee, args } => {
                let mut out = vec![*callee];
                out.extend(args.iter().copied());
                out
            }
            Node::Cond(a, b, c)
            | Node::Phi {
                cond: a,
                then: b,
                otherwise: c,
            } => vec![*a, *b, *c],
        }
    }

    /// Every node a node refers to: its children, and for a version the place it is of
    /// (a leaf for the algebra, but part of the value's spelling).
    pub fn deps(&self, v: V) -> Vec<V> {
        match self.node(v) {
            Node::Version { place, .. } => vec![*place],
            _ => self.children(v),
        }
    }

    /// Like `reaches_any`, following the places of versions too ("is spelled with").
    pub fn spelled_with(&self, from: V, hit: &dyn Fn(V) -> bool, limit: usize) -> bool {
        let mut seen = std::collections::HashSet::new();
        let mut stack = vec![from];
        while let Some(v) = stack.pop() {
            if !seen.insert(v) {
                continue;
            }
            if hit(v) {
                return true;
            }
            if seen.len() > limit {
                return true;
            }
            stack.extend(self.deps(v));
        }
        false
    }

    /// Whether `target` is reachable from `from` (the value reads it). At most `limit`
    /// nodes are visited; past that the answer is `true` (unknown counts as "may read").
    pub fn reaches(&self, from: V, target: V, limit: usize) -> bool {
        self.reaches_any(from, &|v| v == target, limit)
    }

    /// Whether any node reachable from `from` satisfies `hit`, visiting at most `limit`
    /// nodes (past that: `true`).
    pub fn reaches_any(&self, from: V, hit: &dyn Fn(V) -> bool, limit: usize) -> bool {
        let mut seen = std::collections::HashSet::new();
        let mut stack = vec![from];
        while let Some(v) = stack.pop() {
            if !seen.insert(v) {
                continue;
            }
            if hit(v) {
                return true;
            }
            if seen.len() > limit {
                return true;
            }
            stack.extend(self.children(v));
        }
        false
    }

    /// Whether a node reachable from `from` satisfies `hit`, looking at no more than `limit`
    /// nodes (past that: `false`, for questions where "not found" is the safe answer).
    pub fn any_within(&self, from: V, hit: &dyn Fn(V) -> bool, limit: usize) -> bool {
        self.search(from, hit, None, limit)
    }

    /// Like `any_within`, without looking inside `avoid` (nor a stored copy of it).
    pub fn any_within_avoiding(
        &self,
        from: V,
        hit: &dyn Fn(V) -> bool,
        avoid: V,
        limit: usize,
    ) -> bool {
        self.search(from, hit, Some(avoid), limit)
    }

    fn search(&self, from: V, hit: &dyn Fn(V) -> bool, avoid: Option<V>, limit: usize) -> bool {
        let mut seen = std::collections::HashSet::new();
        let mut stack = vec![from];
        while let Some(v) = stack.pop() {
            let avoided = avoid.is_some_and(|a| {
                v == a || matches!(self.node(v), Node::Stored { value, .. } if *value == a)
            });
            if avoided || !seen.insert(v) {
                continue;
            }
            if hit(v) {
                return true;
            }
            if seen.len() > limit {
                return false;
            }
            stack.extend(self.children(v));
        }
        false
    }

    /// Copies `root` of `other` into this graph, replacing the nodes of `substitute` (keyed
    /// by `other`'s values) on the way, through the normalising constructors (so an
    /// argument `&x` for a parameter `p` makes `p->f` read `x.f`). `homes` maps the homes
    /// of `other` to homes here. Returns None past `limit` nodes.
    pub fn import(
        &mut self,
        other: &Graph,
        root: V,
        substitute: &HashMap<V, V>,
        limit: usize,
        memo: &mut HashMap<V, V>,
    ) -> Option<V> {
        // Post-order over the part of `other` that `root` reads, without recursion.
        let mut order = Vec::new();
        let mut stack = vec![(root, false)];
        let mut seen = std::collections::HashSet::new();
        while let Some((v, done)) = stack.pop() {
            if memo.contains_key(&v) || substitute.contains_key(&v) {
                continue;
            }
            if done {
                order.push(v);
                continue;
            }
            if !seen.insert(v) {
                continue;
            }
            if seen.len() > limit {
                return None;
            }
            stack.push((v, true));
            for c in other.deps(v) {
                stack.push((c, false));
            }
        }
        let map = |v: V, memo: &HashMap<V, V>| -> V {
            substitute
                .get(&v)
                .or_else(|| memo.get(&v))
                .copied()
                .unwrap_or(v)
        };
        for v in order {
            if memo.contains_key(&v) {
                continue;
            }
            let home_of = |this: &mut Graph, h: Home| this.home(other.home_info(h).clone());
            let new = match other.node(v).clone() {
                Node::Int {
                    value,
                    unsigned,
                    long,
                } => self.int_literal(value, unsigned, long),
                Node::Float { bits, single } => self.add(Node::Float { bits, single }),
                Node::Name { name, home } => {
                    let h = home_of(self, home);
                    let n = self.sym(other.name(name));
                    self.add(Node::Name { name: n, home: h })
                }
                Node::LocalObject { name, home } => {
                    let h = home_of(self, home);
                    let n = self.sym(other.name(name));
                    self.add(Node::LocalObject { name: n, home: h })
                }
                Node::Local {
                    name,
                    home,
                    version,
                    value,
                } => {
                    let h = home_of(self, home);
                    let n = self.sym(other.name(name));
                    let value = map(value, memo);
                    self.add(Node::Local {
                        name: n,
                        home: h,
                        version,
                        value,
                    })
                }
                Node::Stored {
                    name,
                    version,
                    value,
                } => {
                    let n = other.name(name).to_string();
                    let value = map(value, memo);
                    self.stored(&n, version, value)
                }
                Node::Version { place, version } => {
                    let place = map(place, memo);
                    self.version(place, version)
                }
                Node::Opaque {
                    name,
                    home,
                    version,
                    carried,
                } => {
                    let h = home_of(self, home);
                    let n = self.sym(other.name(name));
                    self.add(Node::Opaque {
                        name: n,
                        home: h,
                        version,
                        carried,
                    })
                }
                Node::Field { base, arrow, field } => {
                    let f = self.sym(other.name(field));
                    let b = map(base, memo);
                    self.field(b, arrow, f)
                }
                Node::Index { base, index } => {
                    let b = map(base, memo);
                    let i = map(index, memo);
                    self.index_node(b, i)
                }
                Node::Deref(a) => {
                    let a = map(a, memo);
                    self.deref(a)
                }
                Node::AddrOf(a) => {
                    let a = map(a, memo);
                    self.addr_of(a)
                }
                Node::Unary(op, a) => {
                    let a = map(a, memo);
                    self.unary(op, a)
                }
                Node::Binary(op, a, b) => {
                    let a = map(a, memo);
                    let b = map(b, memo);
                    self.binary(op, a, b)
                }
                Node::Cast(t, a) => {
                    let a = map(a, memo);
                    let ty = other.ty(t).clone();
                    self.cast(&ty, a)
                }
                Node::Call { callee, args } => {
                    let args = args.iter().map(|a| map(*a, memo)).collect();
                    let name = other.name(callee).to_string();
                    self.call(&name, args)
                }
                Node::CallIndirect { callee, args } => {
                    let c = map(callee, memo);
                    let args = args.iter().map(|a| map(*a, memo)).collect();
                    self.call_indirect(c, args)
                }
                Node::Cond(a, b, c) => {
                    let (a, b, c) = (map(a, memo), map(b, memo), map(c, memo));
                    self.cond(a, b, c)
                }
                Node::Phi {
                    cond,
                    then,
                    otherwise,
                } => {
                    let (a, b, c) = (map(cond, memo), map(then, memo), map(otherwise, memo));
                    self.phi(a, b, c)
                }
                Node::Text(s) => {
                    let t = other.name(s).to_string();
                    self.text(&t)
                }
                Node::Huge(_) => {
                    self.huge += 1;
                    let atom = Node::Huge(self.huge);
                    self.add(atom)
                }
            };
            memo.insert(v, new);
        }
        Some(map(root, memo))
    }

    // ----- reading values back -----

    /// Whether the value is a place (something that can be assigned).
    pub fn is_place(&self, v: V) -> bool {
        matches!(
            self.node(v),
            Node::Name { .. }
                | Node::Field { .. }
                | Node::Index { .. }
                | Node::Deref(_)
                | Node::Version { .. }
        )
    }

    /// The node a place is built on: the value left after stepping through fields,
    /// indexes, dereferences, addresses, casts, pointer offsets and the locals and stores
    /// that hold them (at most 256 steps).
    fn place_base(&self, v: V) -> Option<V> {
        let mut v = v;
        for _ in 0..256 {
            match self.node(v) {
                Node::Field { base, .. } | Node::Index { base, .. } | Node::Deref(base) => {
                    v = *base
                }
                Node::AddrOf(a) | Node::Cast(_, a) => v = *a,
                Node::Local { value, .. } | Node::Stored { value, .. } => v = *value,
                Node::Version { place, .. } => v = *place,
                Node::Binary(BinaryOp::Add | BinaryOp::Sub, a, _) => v = *a,
                _ => return Some(v),
            }
        }
        None
    }

    /// The root name of a place (`f` in `f->y[2]`), with whether it is a local object.
    pub fn place_root(&self, v: V) -> Option<(Sym, Home, bool)> {
        match self.node(self.place_base(v)?) {
            Node::Name { name, home } => Some((*name, *home, false)),
            Node::LocalObject { name, home } | Node::Opaque { name, home, .. } => {
                Some((*name, *home, true))
            }
            _ => None,
        }
    }

    /// The callee whose returned pointer a place is reached through (`get_zone(i)->level`),
    /// if its base is a call rather than a variable.
    pub fn place_call_root(&self, v: V) -> Option<Sym> {
        match self.node(self.place_base(v)?) {
            Node::Call { callee, .. } => Some(*callee),
            _ => None,
        }
    }

    /// The value as C text, at most about `limit` bytes (longer text ends in `…`). Locals
    /// print as their names.
    pub fn display(&self, v: V, limit: usize) -> String {
        let mut out = String::new();
        self.write(v, 0, &mut out, limit, 0);
        if out.len() > limit {
            let mut cut = limit;
            while !out.is_char_boundary(cut) {
                cut -= 1;
            }
            out.truncate(cut);
            out.push('…');
        }
        out
    }

    fn precedence(&self, v: V) -> u8 {
        match self.node(v) {
            Node::Cond(..) | Node::Phi { .. } => 3,
            // Above the conditional's level, as `ir`'s printing counts.
            Node::Binary(op, ..) => 3 + op.precedence(),
            Node::Unary(..) | Node::Cast(..) | Node::Deref(_) | Node::AddrOf(_) => 14,
            Node::Int { .. } | Node::Float { .. } => 16,
            _ => 16,
        }
    }

    fn write_operand(&self, v: V, parent: u8, out: &mut String, limit: usize, depth: u32) {
        let child = self.precedence(v);
        let readable = (4..=11).contains(&parent) && (12..=13).contains(&child);
        if child < parent || readable {
            out.push('(');
            self.write(v, 0, out, limit, depth + 1);
            out.push(')');
        } else {
            self.write(v, parent, out, limit, depth + 1);
        }
    }

    fn write(&self, v: V, _parent: u8, out: &mut String, limit: usize, depth: u32) {
        use std::fmt::Write as _;
        if out.len() > limit || depth > 200 {
            return;
        }
        let me = self.precedence(v);
        match self.node(v) {
            Node::Int {
                value,
                unsigned,
                long,
            } => {
                let _ = write!(
                    out,
                    "{value}{}{}",
                    if *unsigned { "u" } else { "" },
                    if *long { "L" } else { "" }
                );
            }
            Node::Float { bits, single } => {
                let value = f64::from_bits(*bits);
                let mut text = if *single {
                    format!("{}", value as f32)
                } else {
                    format!("{value}")
                };
                if !text.contains(['.', 'e', 'E']) && value.is_finite() {
                    text.push_str(".0");
                }
                out.push_str(&text);
                if *single {
                    out.push('f');
                }
            }
            Node::Name { name, .. }
            | Node::LocalObject { name, .. }
            | Node::Local { name, .. }
            | Node::Stored { name, .. }
            | Node::Opaque { name, .. } => out.push_str(self.name(*name)),
            Node::Field { base, arrow, field } => {
                self.write_operand(*base, 15, out, limit, depth);
                out.push_str(if *arrow { "->" } else { "." });
                out.push_str(self.name(*field));
            }
            Node::Index { base, index } => {
                self.write_operand(*base, 15, out, limit, depth);
                out.push('[');
                self.write(*index, 0, out, limit, depth + 1);
                out.push(']');
            }
            Node::Deref(a) => {
                out.push('*');
                self.write_operand(*a, 14, out, limit, depth);
            }
            Node::AddrOf(a) => {
                out.push('&');
                self.write_operand(*a, 14, out, limit, depth);
            }
            Node::Unary(op, a) => {
                out.push_str(match op {
                    UnaryOp::Neg => "-",
                    UnaryOp::Plus => "+",
                    UnaryOp::Not => "!",
                    UnaryOp::BitNot => "~",
                    UnaryOp::Deref => "*",
                    UnaryOp::AddrOf => "&",
                });
                self.write_operand(*a, 14, out, limit, depth);
            }
            Node::Binary(op, a, b) => {
                self.write_operand(*a, me, out, limit, depth);
                out.push(' ');
                out.push_str(op.text());
                out.push(' ');
                self.write_operand(*b, me + 1, out, limit, depth);
            }
            Node::Cast(t, a) => {
                let _ = write!(out, "({})", self.ty(*t));
                self.write_operand(*a, 14, out, limit, depth);
            }
            Node::Call { callee, args } => {
                out.push_str(self.name(*callee));
                self.write_args(args, out, limit, depth);
            }
            Node::CallIndirect { callee, args } => {
                self.write_operand(*callee, 15, out, limit, depth);
                self.write_args(args, out, limit, depth);
            }
            Node::Cond(c, a, b)
            | Node::Phi {
                cond: c,
                then: a,
                otherwise: b,
            } => {
                self.write_operand(*c, 4, out, limit, depth);
                out.push_str(" ? ");
                self.write_operand(*a, 2, out, limit, depth);
                out.push_str(" : ");
                self.write_operand(*b, 3, out, limit, depth);
            }
            Node::Text(s) => out.push_str(self.name(*s)),
            Node::Version { place, .. } => self.write(*place, _parent, out, limit, depth + 1),
            Node::Huge(n) => {
                let _ = write!(out, "<value {n} too large to follow>");
            }
        }
    }

    fn write_args(&self, args: &[V], out: &mut String, limit: usize, depth: u32) {
        out.push('(');
        for (i, a) in args.iter().enumerate() {
            if i > 0 {
                out.push_str(", ");
            }
            self.write_operand(*a, 2, out, limit, depth);
        }
        out.push(')');
    }

    /// The value as an IR expression, for the evaluator and the rules. Locals with a known
    /// value are put in (their value, not their name) when `expand_locals`; None past
    /// `limit` nodes or for a value with no C spelling (a merge of branches, an atom past
    /// the budget).
    pub fn to_expr(&self, v: V, span: Span, expand_locals: bool, limit: usize) -> Option<Expr> {
        let mut budget = limit;
        self.to_expr_inner(v, span, expand_locals, &mut budget, 0)
    }

    fn to_expr_inner(
        &self,
        v: V,
        span: Span,
        expand: bool,
        budget: &mut usize,
        depth: u32,
    ) -> Option<Expr> {
        if *budget == 0 || depth > 128 {
            return None;
        }
        *budget -= 1;
        let mut sub = |x: V| {
            self.to_expr_inner(x, span, expand, budget, depth + 1)
                .map(Box::new)
        };
        let kind = match self.node(v).clone() {
            Node::Int {
                value,
                unsigned,
                long,
            } => ExprKind::Int {
                value,
                unsigned,
                long,
            },
            Node::Float { bits, single } => ExprKind::Float {
                value: f64::from_bits(bits),
                single,
            },
            Node::Name { name, .. }
            | Node::LocalObject { name, .. }
            | Node::Opaque { name, .. } => ExprKind::Ident(self.name(name).into()),
            Node::Local { name, value, .. } => {
                if expand {
                    return sub(value).map(|b| *b);
                }
                ExprKind::Ident(self.name(name).into())
            }
            Node::Stored { value, .. } => return sub(value).map(|b| *b),
            Node::Version { place, .. } => return sub(place).map(|b| *b),
            Node::Field { base, arrow, field } => ExprKind::Field {
                base: sub(base)?,
                arrow,
                field: self.name(field).into(),
            },
            Node::Index { base, index } => ExprKind::Index {
                base: sub(base)?,
                index: sub(index)?,
            },
            Node::Deref(a) => ExprKind::Unary {
                op: UnaryOp::Deref,
                arg: sub(a)?,
            },
            Node::AddrOf(a) => ExprKind::Unary {
                op: UnaryOp::AddrOf,
                arg: sub(a)?,
            },
            Node::Unary(op, a) => ExprKind::Unary { op, arg: sub(a)? },
            Node::Binary(op, a, b) => ExprKind::Binary {
                op,
                lhs: sub(a)?,
                rhs: sub(b)?,
            },
            Node::Cast(t, a) => ExprKind::Cast {
                ty: self.ty(t).clone(),
                arg: sub(a)?,
            },
            Node::Call { callee, args } => {
                let mut out = Vec::with_capacity(args.len());
                for a in args.iter() {
                    out.push(*sub(*a)?);
                }
                ExprKind::Call {
                    callee: Box::new(Expr::new(ExprKind::Ident(self.name(callee).into()), span)),
                    args: std::sync::Arc::new(out),
                }
            }
            Node::CallIndirect { .. } | Node::Phi { .. } | Node::Huge(_) => return None,
            Node::Cond(c, a, b) => ExprKind::Conditional {
                cond: sub(c)?,
                then: sub(a)?,
                otherwise: sub(b)?,
            },
            Node::Text(s) => ExprKind::Opaque(self.name(s).to_string()),
        };
        Some(Expr::new(kind, span))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn equal_values_are_one_node() {
        let mut g = Graph::new(100);
        let h = g.home(HomeInfo {
            function: None,
            file: 0,
        });
        let y = g.name_node("y", h);
        let k = g.float(0.25, true);
        let a = g.binary(BinaryOp::Mul, k, y);
        let b = g.binary(BinaryOp::Mul, k, y);
        assert_eq!(a, b);
        assert_eq!(g.display(a, 100), "0.25f * y");
    }

    #[test]
    fn pointer_forms_of_one_place_meet() {
        let mut g = Graph::new(100);
        let h = g.home(HomeInfo {
            function: None,
            file: 0,
        });
        let x = g.name_node("g_vent", h);
        let f = g.sym("y");
        let direct = g.field(x, false, f);
        let p = g.addr_of(x);
        let through = g.field(p, true, f);
        assert_eq!(direct, through);
        let star = g.deref(p);
        assert_eq!(star, x);
    }

    #[test]
    fn the_budget_turns_new_values_into_atoms() {
        let mut g = Graph::new(4);
        let h = g.home(HomeInfo {
            function: None,
            file: 0,
        });
        let mut v = g.name_node("x", h);
        for i in 0..10 {
            let c = g.int(i);
            v = g.binary(BinaryOp::Add, v, c);
        }
        assert!(g.len() <= 4 + 20);
        assert!(g.over_budget() > 0);
        assert!(matches!(g.node(v), Node::Huge(_)));
    }

    #[test]
    fn a_deep_chain_prints_and_converts_within_limits() {
        let mut g = Graph::new(100_000);
        let h = g.home(HomeInfo {
            function: None,
            file: 0,
        });
        let mut v = g.name_node("x", h);
        let half = g.float(0.5, true);
        for _ in 0..20_000 {
            let m = g.binary(BinaryOp::Mul, v, half);
            v = g.binary(BinaryOp::Add, m, half);
        }
        let text = g.display(v, 200);
        assert!(text.len() < 260, "{}", text.len());
        assert!(g.to_expr(v, Span::default(), true, 1000).is_none());
        let x = g.name_node("x", h);
        assert!(g.reaches(v, x, 1_000_000));
    }
}
