//! The one door to tree-sitter: C bytes in, the project's IR (`ir`) out.
//!
//! Only this module names tree-sitter types or node-kind strings. It lowers the parts of a
//! translation unit that smoothers need (preprocessor definitions with the `#if` branch they
//! sit in, declarations with types, struct and enum definitions, functions and their
//! statements and expressions) and records what it could not read as `ParseProblem`s.
//! It never fails: broken C gives a partial IR plus problems. It does not expand macros
//! or resolve names; `index` and `recognise` do that.

use crate::ir::*;
use tree_sitter::{Node, Parser, Tree};

/// Deeper nesting than this is lowered as an opaque expression, so that hostile input
/// cannot overflow the stack of the recursive lowering.
const MAX_DEPTH: u32 = 200;
/// Most function prototypes kept per file (a header of a vendor library declares
/// thousands; only their return types are wanted).
const MAX_PROTOTYPES: usize = 20_000;

mod kind {
    pub const PREPROC_DEF: &str = "preproc_def";
    pub const PREPROC_FUNCTION_DEF: &str = "preproc_function_def";
    pub const PREPROC_IF: &str = "preproc_if";
    pub const PREPROC_IFDEF: &str = "preproc_ifdef";
    pub const PREPROC_ELSE: &str = "preproc_else";
    pub const PREPROC_ELIF: &str = "preproc_elif";
    pub const PREPROC_INCLUDE: &str = "preproc_include";
    pub const FUNCTION_DEFINITION: &str = "function_definition";
    pub const DECLARATION: &str = "declaration";
    pub const TYPE_DEFINITION: &str = "type_definition";
    pub const STRUCT_SPECIFIER: &str = "struct_specifier";
    pub const UNION_SPECIFIER: &str = "union_specifier";
    pub const ENUM_SPECIFIER: &str = "enum_specifier";
    pub const ENUMERATOR: &str = "enumerator";
    pub const FIELD_DECLARATION: &str = "field_declaration";
    pub const INIT_DECLARATOR: &str = "init_declarator";
    pub const POINTER_DECLARATOR: &str = "pointer_declarator";
    pub const ARRAY_DECLARATOR: &str = "array_declarator";
    pub const FUNCTION_DECLARATOR: &str = "function_declarator";
    pub const PARENTHESIZED_DECLARATOR: &str = "parenthesized_declarator";
    pub const ABSTRACT_POINTER_DECLARATOR: &str = "abstract_pointer_declarator";
    pub const ABSTRACT_ARRAY_DECLARATOR: &str = "abstract_array_declarator";
    pub const PARAMETER_DECLARATION: &str = "parameter_declaration";
    pub const STORAGE_CLASS: &str = "storage_class_specifier";
    pub const TYPE_QUALIFIER: &str = "type_qualifier";
    pub const PRIMITIVE_TYPE: &str = "primitive_type";
    pub const SIZED_TYPE: &str = "sized_type_specifier";
    pub const TYPE_IDENTIFIER: &str = "type_identifier";
    pub const COMPOUND_STATEMENT: &str = "compound_statement";
    pub const EXPRESSION_STATEMENT: &str = "expression_statement";
    pub const IF_STATEMENT: &str = "if_statement";
    pub const ELSE_CLAUSE: &str = "else_clause";
    pub const FOR_STATEMENT: &str = "for_statement";
    pub const WHILE_STATEMENT: &str = "while_statement";
    pub const DO_STATEMENT: &str = "do_statement";
    pub const SWITCH_STATEMENT: &str = "switch_statement";
    pub const CASE_STATEMENT: &str = "case_statement";
    pub const LABELED_STATEMENT: &str = "labeled_statement";
    pub const RETURN_STATEMENT: &str = "return_statement";
    pub const INITIALIZER_LIST: &str = "initializer_list";
    pub const INITIALIZER_PAIR: &str = "initializer_pair";
    pub const FIELD_DESIGNATOR: &str = "field_designator";
    pub const IDENTIFIER: &str = "identifier";
    pub const FIELD_IDENTIFIER: &str = "field_identifier";
    pub const NUMBER_LITERAL: &str = "number_literal";
    pub const CHAR_LITERAL: &str = "char_literal";
    pub const TRUE: &str = "true";
    pub const FALSE: &str = "false";
    pub const PARENTHESIZED_EXPRESSION: &str = "parenthesized_expression";
    pub const BINARY_EXPRESSION: &str = "binary_expression";
    pub const UNARY_EXPRESSION: &str = "unary_expression";
    pub const POINTER_EXPRESSION: &str = "pointer_expression";
    pub const ASSIGNMENT_EXPRESSION: &str = "assignment_expression";
    pub const UPDATE_EXPRESSION: &str = "update_expression";
    pub const CAST_EXPRESSION: &str = "cast_expression";
    pub const CALL_EXPRESSION: &str = "call_expression";
    pub const FIELD_EXPRESSION: &str = "field_expression";
    pub const SUBSCRIPT_EXPRESSION: &str = "subscript_expression";
    pub const CONDITIONAL_EXPRESSION: &str = "conditional_expression";
    pub const COMMA_EXPRESSION: &str = "comma_expression";
    pub const TYPE_DESCRIPTOR: &str = "type_descriptor";
    pub const COMMENT: &str = "comment";
}

/// The grammar's field names, looked up once: `child_by_field_name` compares the name with
/// every field of the language on each call, which showed in profiles of large trees.
mod field {
    pub const ALTERNATIVE: usize = 0;
    pub const ARGUMENT: usize = 1;
    pub const ARGUMENTS: usize = 2;
    pub const BODY: usize = 3;
    pub const CONDITION: usize = 4;
    pub const CONSEQUENCE: usize = 5;
    pub const DECLARATOR: usize = 6;
    pub const DESIGNATOR: usize = 7;
    pub const FIELD: usize = 8;
    pub const FUNCTION: usize = 9;
    pub const INDEX: usize = 10;
    pub const INITIALIZER: usize = 11;
    pub const LABEL: usize = 12;
    pub const LEFT: usize = 13;
    pub const NAME: usize = 14;
    pub const OPERATOR: usize = 15;
    pub const PARAMETERS: usize = 16;
    pub const RIGHT: usize = 17;
    pub const SIZE: usize = 18;
    pub const TYPE: usize = 19;
    pub const UPDATE: usize = 20;
    pub const VALUE: usize = 21;
    pub const PATH: usize = 22;
    pub const NAMES: [&str; 23] = [
        "alternative",
        "argument",
        "arguments",
        "body",
        "condition",
        "consequence",
        "declarator",
        "designator",
        "field",
        "function",
        "index",
        "initializer",
        "label",
        "left",
        "name",
        "operator",
        "parameters",
        "right",
        "size",
        "type",
        "update",
        "value",
        "path",
    ];
}

/// The child of `node` in grammar field `field` (one of `field::*`).
fn field_child<'t>(node: Node<'t>, field: usize) -> Option<Node<'t>> {
    static IDS: std::sync::OnceLock<[u16; field::NAMES.len()]> = std::sync::OnceLock::new();
    let ids = IDS.get_or_init(|| {
        let language: tree_sitter::Language = tree_sitter_c::LANGUAGE.into();
        // A name the grammar lacks gets 0, for which tree-sitter finds no child.
        field::NAMES.map(|name| language.field_id_for_name(name).map_or(0, |id| id.get()))
    });
    node.child_by_field_id(ids[field])
}

fn new_parser() -> Option<Parser> {
    let mut parser = Parser::new();
    parser.set_language(&tree_sitter_c::LANGUAGE.into()).ok()?;
    Some(parser)
}

thread_local! {
    /// One parser per thread, reused: making a parser costs more than parsing a snippet.
    static PARSER: std::cell::RefCell<Option<Parser>> = std::cell::RefCell::new(new_parser());
}

fn parse_tree(source: &[u8]) -> Option<Tree> {
    PARSER.with(|cell| {
        let mut parser = cell.borrow_mut();
        let parser = parser.as_mut()?;
        parser.reset();
        parser.parse(source, None)
    })
}

/// Parses `after`, the file `before` with some bytes changed and every length and newline
/// kept (the variants below blank text in place), reusing the parts of `tree`, the tree
/// of `before`, that no change touches: tree-sitter's incremental parse, told where each
/// run of changed bytes lies. Tree-sitter means the result to be the fresh parse of
/// `after`, which its error recovery does not promise for any edit (blanking every fifth
/// line of a fixture gave another tree); for the variants' edits it held on every fixture
/// (a unit test) and on all 125 variants of the seven development trees.
fn parse_edited(before: &[u8], after: &[u8], tree: &Tree) -> Option<Tree> {
    if before.len() != after.len() {
        return parse_tree(after);
    }
    let mut edited = tree.clone();
    let (mut row, mut line_start) = (0usize, 0usize);
    let mut i = 0;
    let n = before.len();
    while i < n {
        if before[i] == after[i] {
            if before[i] == b'\n' {
                row += 1;
                line_start = i + 1;
            }
            i += 1;
            continue;
        }
        let start = i;
        let start_position = tree_sitter::Point {
            row,
            column: start - line_start,
        };
        while i < n && before[i] != after[i] {
            if before[i] == b'\n' || after[i] == b'\n' {
                // No variant changes a line break; if one did, the rows would be wrong.
                return parse_tree(after);
            }
            i += 1;
        }
        // A run of changes stops at a newline, which no variant changes.
        let end_position = tree_sitter::Point {
            row,
            column: i - line_start,
        };
        edited.edit(&tree_sitter::InputEdit {
            start_byte: start,
            old_end_byte: i,
            new_end_byte: i,
            start_position,
            old_end_position: end_position,
            new_end_position: end_position,
        });
    }
    PARSER.with(|cell| {
        let mut parser = cell.borrow_mut();
        let parser = parser.as_mut()?;
        parser.reset();
        parser.parse(after, Some(&edited))
    })
}

/// Parses `source` with tree-sitter and keeps nothing: no rewriting, no lowering. The
/// benchmark's floor (what any tool built on this grammar pays). Whether a tree came out.
pub fn bare_parse(source: &[u8]) -> bool {
    parse_tree(source).is_some()
}

/// Parses only `range` of `source` (byte offsets and lines stay those of the file).
fn parse_range(source: &[u8], range: std::ops::Range<usize>) -> Option<Tree> {
    let point = |offset: usize| {
        let before = &source[..offset];
        let row = before.iter().filter(|b| **b == b'\n').count();
        let column = offset
            - before
                .iter()
                .rposition(|b| *b == b'\n')
                .map_or(0, |p| p + 1);
        tree_sitter::Point { row, column }
    };
    let ts_range = tree_sitter::Range {
        start_byte: range.start,
        end_byte: range.end,
        start_point: point(range.start),
        end_point: point(range.end),
    };
    PARSER.with(|cell| {
        let mut parser = cell.borrow_mut();
        let parser = parser.as_mut()?;
        parser.reset();
        parser.set_included_ranges(&[ts_range]).ok()?;
        let tree = parser.parse(source, None);
        // Back to whole files for the next parse on this thread.
        let _ = parser.set_included_ranges(&[]);
        tree
    })
}

/// The top-level function definitions of a file found by their braces alone: the text from
/// after the previous top-level `;`, `}` or directive up to the `}` that closes a brace
/// opened at depth 0, when the text before the brace has parentheses and no `=`. Each comes
/// with the `#if` branches around it. Comments, strings and directives are skipped.
fn function_regions(source: &[u8]) -> Vec<(std::ops::Range<usize>, Condition)> {
    let mut out = Vec::new();
    let mut depth = 0usize;
    let mut item_start = 0usize;
    let mut open_at = 0usize;
    let mut conds: Vec<(CondBranch, Vec<CondBranch>)> = Vec::new();
    // Braces are counted in the first branch of each `#if` group only: the branches after
    // it repeat the same structure (`#if X  if (a) {  #else  if (b) {  #endif`).
    let mut skipping_from: Option<usize> = None;
    let mut i = 0;
    let mut line_start = true;
    let n = source.len();
    while i < n {
        let c = source[i];
        if line_start {
            let mut j = i;
            while j < n && (source[j] == b' ' || source[j] == b'\t') {
                j += 1;
            }
            line_start = false;
            if j < n && source[j] == b'#' {
                // A directive, with its continuation lines.
                let mut k = j;
                while k < n && !(source[k] == b'\n' && source[k - 1] != b'\\') {
                    k += 1;
                }
                let text = String::from_utf8_lossy(source.get(j + 1..k).unwrap_or(&[])).to_string();
                let text = text.trim();
                let (word, rest) = text
                    .split_once(|ch: char| ch.is_whitespace())
                    .unwrap_or((text, ""));
                let rest = rest.trim().to_string();
                match word {
                    "if" => conds.push((CondBranch::If(rest), Vec::new())),
                    "ifdef" => conds.push((CondBranch::Ifdef(rest), Vec::new())),
                    "ifndef" => conds.push((CondBranch::Ifndef(rest), Vec::new())),
                    "elif" => {
                        if let Some((b, earlier)) = conds.last_mut() {
                            earlier.push(b.clone());
                            *b = CondBranch::If(rest);
                        }
                        if depth > 0 && skipping_from.is_none() {
                            skipping_from = Some(conds.len());
                        }
                    }
                    "else" => {
                        if let Some((b, earlier)) = conds.last_mut() {
                            earlier.push(b.clone());
                            *b = CondBranch::Else;
                        }
                        if depth > 0 && skipping_from.is_none() {
                            skipping_from = Some(conds.len());
                        }
                    }
                    "endif" => {
                        if skipping_from == Some(conds.len()) {
                            skipping_from = None;
                        }
                        conds.pop();
                    }
                    _ => {}
                }
                if depth == 0 {
                    item_start = k;
                }
                i = k;
                continue;
            }
        }
        if skipping_from.is_some() && c != b'\n' {
            i += 1;
            continue;
        }
        match c {
            b'\n' => {
                line_start = true;
                i += 1;
            }
            b'/' if source.get(i + 1) == Some(&b'*') => {
                let mut j = i + 2;
                while j + 1 < n && !(source[j] == b'*' && source[j + 1] == b'/') {
                    j += 1;
                }
                i = (j + 2).min(n);
            }
            b'/' if source.get(i + 1) == Some(&b'/') => {
                while i < n && source[i] != b'\n' {
                    i += 1;
                }
            }
            b'"' | b'\'' => {
                let quote = c;
                i += 1;
                while i < n && source[i] != quote && source[i] != b'\n' {
                    if source[i] == b'\\' {
                        i += 1;
                    }
                    i += 1;
                }
                i += 1;
            }
            b'{' => {
                if depth == 0 {
                    open_at = i;
                }
                depth += 1;
                i += 1;
            }
            b'}' => {
                depth = depth.saturating_sub(1);
                i += 1;
                if depth == 0 {
                    // A function's header ends with its parameter list (a struct's with its
                    // name, an initialiser has `=`).
                    let header = source.get(item_start..open_at).unwrap_or(&[]);
                    let trimmed = header
                        .iter()
                        .rposition(|b| !b.is_ascii_whitespace())
                        .map(|p| &header[..=p])
                        .unwrap_or(&[]);
                    let looks_like_function = trimmed.ends_with(b")")
                        && trimmed.contains(&b'(')
                        && !header.contains(&b'=');
                    if looks_like_function {
                        let condition = Condition {
                            levels: std::sync::Arc::new(
                                conds
                                    .iter()
                                    .map(|(b, earlier)| CondLevel {
                                        branch: b.clone(),
                                        earlier: earlier.clone(),
                                    })
                                    .collect(),
                            ),
                        };
                        out.push((item_start..i, condition));
                    }
                    item_start = i;
                }
            }
            b';' if depth == 0 => {
                item_start = i + 1;
                i += 1;
            }
            _ => i += 1,
        }
    }
    out
}

/// Blanks comments inside preprocessor directives (keeping every byte's position and the
/// newlines): the grammar reads `#define K (3 /* note */)` as an error, and firmware writes
/// such comments all the time. Comments elsewhere are kept (they carry `tauscan:` tags).
fn blank_directive_comments(source: &[u8]) -> std::borrow::Cow<'_, [u8]> {
    if !source.contains(&b'#') || !source.windows(2).any(|w| w == b"/*" || w == b"//") {
        return std::borrow::Cow::Borrowed(source);
    }
    let mut out = source.to_vec();
    let mut i = 0;
    let mut line_start = true;
    let mut in_directive = false;
    while i < out.len() {
        let c = out[i];
        if line_start {
            let mut j = i;
            while j < out.len() && (out[j] == b' ' || out[j] == b'\t') {
                j += 1;
            }
            in_directive = j < out.len() && out[j] == b'#';
            line_start = false;
        }
        match c {
            b'\n' => {
                // A continued directive goes on after a backslash-newline.
                let continued = i > 0 && out[i - 1] == b'\\';
                line_start = true;
                if continued && in_directive {
                    line_start = false;
                }
                i += 1;
            }
            b'"' | b'\'' => {
                let quote = c;
                i += 1;
                while i < out.len() && out[i] != quote && out[i] != b'\n' {
                    if out[i] == b'\\' {
                        i += 1;
                    }
                    i += 1;
                }
                i += 1;
            }
            b'/' if in_directive && out.get(i + 1) == Some(&b'*') => {
                let mut j = i + 2;
                while j + 1 < out.len() && !(out[j] == b'*' && out[j + 1] == b'/') {
                    j += 1;
                }
                let end = (j + 2).min(out.len());
                for b in &mut out[i..end] {
                    if *b != b'\n' {
                        *b = b' ';
                    }
                }
                i = end;
            }
            b'/' if in_directive && out.get(i + 1) == Some(&b'/') => {
                while i < out.len() && out[i] != b'\n' {
                    out[i] = b' ';
                    i += 1;
                }
            }
            _ => i += 1,
        }
    }
    std::borrow::Cow::Owned(out)
}

/// Blanks `#include MACRO_NAME` lines (keeping every byte's position): the grammar reads
/// only quoted and bracketed paths, and an include it cannot read can make the whole `#if`
/// group around it (often the whole file) one error. The file a macro names is not known
/// here anyway.
fn blank_computed_includes(source: &[u8]) -> std::borrow::Cow<'_, [u8]> {
    if !source
        .windows(8)
        .any(|w| w == b"#include" || w == b"include ")
    {
        return std::borrow::Cow::Borrowed(source);
    }
    let mut out: Option<Vec<u8>> = None;
    let mut start = 0;
    while start < source.len() {
        let end = source[start..]
            .iter()
            .position(|b| *b == b'\n')
            .map_or(source.len(), |p| start + p);
        let line = &source[start..end];
        let text = line
            .iter()
            .position(|b| *b != b' ' && *b != b'\t')
            .map_or(&line[line.len()..], |p| &line[p..]);
        if let Some(rest) = text.strip_prefix(b"#") {
            let rest = trim_blank(rest);
            if let Some(after) = rest.strip_prefix(b"include") {
                let path = trim_blank(after);
                let computed = path
                    .first()
                    .is_some_and(|c| c.is_ascii_alphabetic() || *c == b'_');
                if computed && after.first().is_some_and(|c| *c == b' ' || *c == b'\t') {
                    let buffer = out.get_or_insert_with(|| source.to_vec());
                    for b in &mut buffer[start..end] {
                        *b = b' ';
                    }
                }
            }
        }
        start = end + 1;
    }
    match out {
        Some(v) => std::borrow::Cow::Owned(v),
        None => std::borrow::Cow::Borrowed(source),
    }
}

/// The offsets of each `(name)` followed by a `+`, `-` or `&` that is not part of `++`,
/// `--`, `->`, `&&` or an assignment: the only spelling `variable_casts_variant` changes.
fn variable_cast_openings(source: &[u8]) -> Vec<usize> {
    let n = source.len();
    let mut out = Vec::new();
    let mut i = 0;
    while i < n {
        if source[i] != b'(' {
            i += 1;
            continue;
        }
        let mut j = i + 1;
        while j < n && (source[j].is_ascii_alphanumeric() || source[j] == b'_') {
            j += 1;
        }
        if j > i + 1 && j < n && source[j] == b')' && !source[i + 1].is_ascii_digit() {
            let mut k = j + 1;
            while k < n && (source[k] == b' ' || source[k] == b'\t') {
                k += 1;
            }
            if k + 1 < n
                && matches!(source[k], b'+' | b'-' | b'&')
                && !matches!(source[k + 1], b'+' | b'-' | b'>' | b'&' | b'=')
            {
                out.push(i);
            }
        }
        i = j.max(i + 1);
    }
    out
}

/// The identifier a declarator declares (`x` in `*x[4] = ...`).
fn declared_identifier(node: Node) -> Option<Node> {
    let mut node = node;
    for _ in 0..32 {
        match node.kind() {
            "identifier" | "type_identifier" | "field_identifier" => return Some(node),
            _ => node = field_child(node, field::DECLARATOR)?,
        }
    }
    None
}

/// The file with the parentheses of each `(name) + x`, `(name) - x`, `(name) & x` that the
/// grammar read as a cast blanked, where `name` is declared in this file as a variable, a
/// parameter or an object-like macro and not as a type; and its tree. None when there is
/// no such cast.
fn variable_casts_variant(source: &[u8], tree: &Tree) -> Option<(Vec<u8>, Tree)> {
    let text = |n: Node| source.get(n.start_byte()..n.end_byte()).unwrap_or(&[]);
    // The casts of that shape, found from the text's candidates (most files have none).
    let casts: Vec<Node> = variable_cast_openings(source)
        .into_iter()
        .filter_map(|at| {
            let open = tree.root_node().descendant_for_byte_range(at, at + 1)?;
            let cast = open.parent().filter(|p| p.kind() == "cast_expression")?;
            if cast.start_byte() != at {
                return None;
            }
            let ty = field_child(cast, field::TYPE)?;
            let lone_name = ty.named_child_count() == 1
                && ty
                    .named_child(0)
                    .is_some_and(|c| c.kind() == "type_identifier");
            let value = field_child(cast, field::VALUE)?;
            let signed = matches!(value.kind(), "unary_expression" | "pointer_expression")
                && field_child(value, field::OPERATOR)
                    .is_some_and(|o| matches!(text(o), b"+" | b"-" | b"&"));
            (lone_name && signed).then_some(cast)
        })
        .collect();
    if casts.is_empty() {
        return None;
    }
    let mut variables: std::collections::HashSet<&[u8]> = std::collections::HashSet::new();
    let mut types: std::collections::HashSet<&[u8]> = std::collections::HashSet::new();
    let mut stack = vec![tree.root_node()];
    let mut visited = 0usize;
    while let Some(node) = stack.pop() {
        visited += 1;
        if visited > 4_000_000 {
            return None;
        }
        match node.kind() {
            "init_declarator" | "parameter_declaration" | "declaration" | "field_declaration" => {
                let mut cursor = node.walk();
                for d in node.children_by_field_name("declarator", &mut cursor) {
                    if let Some(name) = declared_identifier(d) {
                        variables.insert(text(name));
                    }
                }
            }
            kind::PREPROC_DEF => {
                // A macro is a value unless its body names a type (`#define REAL float`).
                if let Some(name) = field_child(node, field::NAME) {
                    let body = field_child(node, field::VALUE).map(text).unwrap_or(&[]);
                    let first = body
                        .split(|b| !(b.is_ascii_alphanumeric() || *b == b'_'))
                        .find(|w| !w.is_empty())
                        .unwrap_or(&[]);
                    let names_type = first.is_empty()
                        || first.ends_with(b"_t")
                        || matches!(
                            first,
                            b"float"
                                | b"double"
                                | b"int"
                                | b"char"
                                | b"short"
                                | b"long"
                                | b"signed"
                                | b"unsigned"
                                | b"struct"
                                | b"union"
                                | b"enum"
                                | b"const"
                                | b"volatile"
                                | b"_Bool"
                                | b"bool"
                                | b"void"
                        );
                    if names_type {
                        types.insert(text(name));
                    } else {
                        variables.insert(text(name));
                    }
                }
            }
            kind::TYPE_DEFINITION => {
                let mut cursor = node.walk();
                for d in node.children_by_field_name("declarator", &mut cursor) {
                    if let Some(name) = declared_identifier(d) {
                        types.insert(text(name));
                    }
                }
            }
            _ => {}
        }
        // Expressions hold no declarations.
        if !node.kind().ends_with("_expression") {
            let mut cursor = node.walk();
            stack.extend(node.named_children(&mut cursor));
        }
    }
    let mut out: Option<Vec<u8>> = None;
    for cast in casts {
        let Some(name) = field_child(cast, field::TYPE).and_then(|t| t.named_child(0)) else {
            continue;
        };
        let name_text = text(name);
        if !variables.contains(name_text) || types.contains(name_text) {
            continue;
        }
        // The cast's own parentheses: the first child `(` and the `)` after the type.
        let Some(open) = cast.child(0).filter(|c| c.kind() == "(") else {
            continue;
        };
        let Some(close) = cast.child(2).filter(|c| c.kind() == ")") else {
            continue;
        };
        let buffer = out.get_or_insert_with(|| source.to_vec());
        buffer[open.start_byte()] = b' ';
        buffer[close.start_byte()] = b' ';
    }
    let out = out?;
    let tree = parse_edited(source, &out, tree)?;
    Some((out, tree))
}

/// The number of error and missing nodes in a tree (subtrees without errors are skipped).
fn error_count(tree: &Tree) -> usize {
    let mut count = 0;
    for_each_error(tree, &mut |_| {
        count += 1;
        true
    });
    count
}

/// Calls `visit` on each error and missing node of a tree, in no set order, until it
/// returns false; subtrees without errors are skipped.
fn for_each_error(tree: &Tree, visit: &mut dyn FnMut(Node) -> bool) {
    let mut stack = vec![tree.root_node()];
    while let Some(node) = stack.pop() {
        if node.is_error() || node.is_missing() {
            if !visit(node) {
                return;
            }
            continue;
        }
        if !node.has_error() {
            continue;
        }
        let mut cursor = node.walk();
        stack.extend(node.children(&mut cursor));
    }
}

/// The file with each function body that holds a parse error read through the first
/// branch of each conditional that splits a statement (the directives and the other
/// branches blanked, every line kept), its tree, and the offsets of the groups read so,
/// when that has fewer errors than `tree`.
fn first_branches_variant(source: &[u8], tree: &Tree) -> Option<(Vec<u8>, Tree, Vec<usize>)> {
    let mut errors: Vec<usize> = Vec::new();
    for_each_error(tree, &mut |node| {
        errors.push(node.start_byte());
        errors.len() <= 4096
    });
    let regions: Vec<std::ops::Range<usize>> = function_regions(source)
        .into_iter()
        .map(|(r, _)| r)
        .filter(|r| errors.iter().any(|e| r.contains(e)))
        .collect();
    let mut out = source.to_vec();
    let mut groups = Vec::new();
    for r in &regions {
        groups.extend(keep_first_branches(&mut out, r.clone()));
    }
    if groups.is_empty() {
        return None;
    }
    let variant = parse_edited(source, &out, tree)?;
    (error_count(&variant) < error_count(tree)).then_some((out, variant, groups))
}

/// Blanks, inside `range`, each outermost conditional group that splits a statement (a
/// branch that opens more braces than it closes or the reverse, or a line of it that
/// starts or ends with `else`): its directives and every branch but the first (nested
/// groups inside a kept branch likewise; after `#if 0`, the second branch). Groups that
/// hold whole statements are left to the grammar, which reads them. The offsets of the
/// groups blanked.
fn keep_first_branches(out: &mut [u8], range: std::ops::Range<usize>) -> Vec<usize> {
    // The lines of the range: (start, end, directive word).
    let end = range.end.min(out.len());
    let mut lines: Vec<(usize, usize, Option<Vec<u8>>)> = Vec::new();
    let mut i = range.start;
    while i < end && lines.len() < 100_000 {
        let mut k = i;
        while k < end && !(out[k] == b'\n' && (k == 0 || out[k - 1] != b'\\')) {
            k += 1;
        }
        let text = trim_blank(&out[i..k]);
        let directive = (text.first() == Some(&b'#')).then(|| {
            let rest = trim_blank(&text[1..]);
            let word_len = rest
                .iter()
                .position(|b| !b.is_ascii_alphabetic())
                .unwrap_or(rest.len());
            // `#if 0` is told apart: its first branch is never built.
            if &rest[..word_len] == b"if" && trim_blank(&rest[word_len..]).trim_ascii_end() == b"0"
            {
                b"if0".to_vec()
            } else {
                rest[..word_len].to_vec()
            }
        });
        lines.push((i, k, directive));
        i = k + 1;
    }
    // Outermost groups: (first line, last line, splits).
    let mut groups: Vec<(usize, usize, bool)> = Vec::new();
    let mut depth = 0usize;
    let mut start = 0usize;
    let mut splits = false;
    let mut delta = 0i64;
    for (n, (a, b, directive)) in lines.iter().enumerate() {
        match directive.as_deref() {
            Some(b"if" | b"if0" | b"ifdef" | b"ifndef") => {
                if depth == 0 {
                    start = n;
                    splits = false;
                    delta = 0;
                }
                depth += 1;
            }
            Some(b"elif" | b"else") if depth > 0 => {
                splits |= delta != 0;
                delta = 0;
            }
            Some(b"endif") if depth > 0 => {
                depth -= 1;
                if depth == 0 {
                    splits |= delta != 0;
                    groups.push((start, n, splits));
                }
            }
            _ if depth > 0 => {
                let text = trim_blank(&out[*a..*b]).trim_ascii_end();
                for c in text {
                    match c {
                        b'{' => delta += 1,
                        b'}' => delta -= 1,
                        _ => {}
                    }
                }
                splits |= text.starts_with(b"else") || text.ends_with(b"else");
            }
            _ => {}
        }
    }
    let mut changed = Vec::new();
    for (first, last, splits) in groups {
        if !splits {
            continue;
        }
        changed.push(lines[first].0);
        // Per open group: (the branch being read, the branch kept). The first branch is
        // kept, the second after `#if 0`.
        let mut keep: Vec<(usize, usize)> = Vec::new();
        for (a, b, directive) in &lines[first..=last] {
            let kept = keep.iter().all(|(at, chosen)| at == chosen);
            let blank = match directive.as_deref() {
                Some(w @ (b"if" | b"if0" | b"ifdef" | b"ifndef")) => {
                    keep.push((0, usize::from(w == b"if0")));
                    true
                }
                Some(b"elif" | b"else") => {
                    if let Some((at, _)) = keep.last_mut() {
                        *at += 1;
                    }
                    true
                }
                Some(b"endif") => {
                    keep.pop();
                    true
                }
                _ => !kept,
            };
            if blank {
                for byte in &mut out[*a..*b] {
                    if *byte != b'\n' {
                        *byte = b' ';
                    }
                }
            }
        }
    }
    changed
}

/// Ends with a `;` each line of a function body that is only a macro's name or call
/// (`SMOOTH_FLOW`, `ENTER_CRITICAL()`) with no semicolon, where the macro supplies its own
/// or is a statement prefix: the grammar otherwise reads it as the type of the next
/// statement. The line keeps its length (the name moves one column left into its
/// indentation), so every line keeps its number.
fn terminate_bare_macro_lines(source: &[u8]) -> std::borrow::Cow<'_, [u8]> {
    // Lines: (start, end) byte ranges, and the kind of block each line starts in.
    let mut lines: Vec<(usize, usize, bool)> = Vec::new();
    let mut kinds: Vec<bool> = Vec::new(); // per open brace: a block of code
    let mut i = 0;
    let mut line_start = 0;
    let mut line_code = false;
    let mut last_sig: u8 = b';';
    // Words are byte ranges of the source: the last whole word, the one being read.
    let mut last_word = (0usize, 0usize);
    let mut word: Option<usize> = None;
    // The word before each open parenthesis, and before the one last closed.
    let mut paren_words: Vec<(usize, usize)> = Vec::new();
    let mut closed_word = (0usize, 0usize);
    let n = source.len();
    let is_word = |b: u8| b.is_ascii_alphanumeric() || b == b'_';
    // Whether an `enum`, `struct` or `union` keyword came since the last `;` or brace.
    let mut aggregate = false;
    while i < n {
        let b = source[i];
        if !is_word(b) {
            if let Some(start) = word.take() {
                last_word = (start, i);
                // `enum {`, `struct tag {` in a body open data, not code.
                if matches!(&source[start..i], b"enum" | b"struct" | b"union") {
                    aggregate = true;
                }
            }
            if b == b';' {
                aggregate = false;
            }
        }
        match b {
            b'\n' => {
                lines.push((line_start, i, line_code));
                line_start = i + 1;
                line_code = kinds.last().copied().unwrap_or(false);
                i += 1;
                continue;
            }
            b'/' if source.get(i + 1) == Some(&b'/') => {
                while i < n && source[i] != b'\n' {
                    i += 1;
                }
                continue;
            }
            b'/' if source.get(i + 1) == Some(&b'*') => {
                i += 2;
                while i + 1 < n && !(source[i] == b'*' && source[i + 1] == b'/') {
                    if source[i] == b'\n' {
                        lines.push((line_start, i, false));
                        line_start = i + 1;
                    }
                    i += 1;
                }
                i += 2;
                continue;
            }
            b'"' | b'\'' => {
                i += 1;
                while i < n && source[i] != b && source[i] != b'\n' {
                    if source[i] == b'\\' {
                        i += 1;
                    }
                    i += 1;
                }
                last_sig = b;
                i += 1;
                continue;
            }
            b'(' => {
                paren_words.push(std::mem::take(&mut last_word));
                if paren_words.len() > 4096 {
                    return std::borrow::Cow::Borrowed(source);
                }
            }
            b')' => {
                closed_word = paren_words.pop().unwrap_or_default();
            }
            b'{' => {
                let in_code = kinds.last().copied().unwrap_or(false);
                // `name(...) {` opens code (a function, a control statement); `(T){` is a
                // compound literal, `= {` an initialiser.
                let closed = &source[closed_word.0..closed_word.1];
                let after_call = last_sig == b')'
                    && !closed.is_empty()
                    && !matches!(closed, b"return" | b"sizeof");
                let code = !aggregate
                    && ((in_code && !matches!(last_sig, b'=' | b')' | b','))
                        || after_call
                        || matches!(&source[last_word.0..last_word.1], b"else" | b"do"));
                aggregate = false;
                kinds.push(code);
                if kinds.len() > 256 {
                    return std::borrow::Cow::Borrowed(source);
                }
            }
            b'}' => {
                kinds.pop();
            }
            _ => {}
        }
        if is_word(b) && word.is_none() {
            word = Some(i);
        }
        if !b.is_ascii_whitespace() {
            last_sig = b;
            if !is_word(b) {
                last_word = (0, 0);
            }
        }
        i += 1;
    }
    lines.push((line_start, n, line_code));
    let text = |k: usize| -> &[u8] {
        let (a, b, _) = lines[k];
        trim_blank(&source[a..b])
    };
    let bare = |t: &[u8]| -> bool {
        let t = t.trim_ascii_end();
        let name_len = t
            .iter()
            .position(|c| !(c.is_ascii_uppercase() || c.is_ascii_digit() || *c == b'_'))
            .unwrap_or(t.len());
        if name_len < 2 || !t[0].is_ascii_uppercase() {
            return false;
        }
        let rest = trim_blank(&t[name_len..]);
        if rest.is_empty() {
            return true;
        }
        // A call with balanced parentheses and nothing after it.
        if rest[0] != b'(' || rest.last() != Some(&b')') {
            return false;
        }
        let mut depth = 0i32;
        for (k, c) in rest.iter().enumerate() {
            match c {
                b'(' => depth += 1,
                b')' => {
                    depth -= 1;
                    if depth == 0 && k + 1 != rest.len() {
                        return false;
                    }
                }
                b';' | b'{' | b'}' | b'"' => return false,
                _ => {}
            }
        }
        depth == 0
    };
    let mut out: Option<Vec<u8>> = None;
    for k in 0..lines.len() {
        let (a, b, code) = lines[k];
        if !code || b <= a || !matches!(source[a], b' ' | b'\t') || !bare(text(k)) {
            continue;
        }
        // The line before ends a statement or opens a block; the line after starts one.
        let before = (0..k).rev().map(text).find(|t| !t.is_empty());
        let after = (k + 1..lines.len()).map(text).find(|t| !t.is_empty());
        let ends = before.is_none_or(|t| {
            matches!(
                t.trim_ascii_end().last(),
                Some(b';' | b'{' | b'}' | b':' | b')')
            )
        });
        let starts = after.is_some_and(|t| {
            t[0].is_ascii_alphabetic() || matches!(t[0], b'_' | b'}' | b'#' | b'*')
        });
        if !(ends && starts) {
            continue;
        }
        let buffer = out.get_or_insert_with(|| source.to_vec());
        let end = a + (source[a..b].trim_ascii_end().len());
        buffer.copy_within(a + 1..end, a);
        buffer[end - 1] = b';';
    }
    match out {
        Some(v) => std::borrow::Cow::Owned(v),
        None => std::borrow::Cow::Borrowed(source),
    }
}

fn trim_blank(bytes: &[u8]) -> &[u8] {
    let skip = bytes
        .iter()
        .position(|b| *b != b' ' && *b != b'\t')
        .unwrap_or(bytes.len());
    &bytes[skip..]
}

/// Whether `source` is only a table of constants: numbers, character and string literals,
/// commas, braces and signs, with comments and blanks (at least one literal and one comma;
/// their order is not checked, as nothing in such a file can declare anything). Such
/// a file (a font, a lookup table) is written to be `#include`d inside an array's
/// initialiser; it declares, defines and runs nothing. The grammar reads a file as
/// declarations and takes seconds to recover from the one long error it sees there (2.5 s
/// for a 180 KB font table), so it is not parsed.
pub fn is_constant_table(source: &[u8]) -> bool {
    let n = source.len();
    let mut i = 0;
    let mut commas = 0usize;
    let mut literals = 0usize;
    while i < n {
        let c = source[i];
        match c {
            b' ' | b'\t' | b'\r' | b'\n' | 0x0b | 0x0c => i += 1,
            b'/' if source.get(i + 1) == Some(&b'*') => {
                let mut j = i + 2;
                while j + 1 < n && !(source[j] == b'*' && source[j + 1] == b'/') {
                    j += 1;
                }
                if j + 1 >= n {
                    return false;
                }
                i = j + 2;
            }
            b'/' if source.get(i + 1) == Some(&b'/') => {
                while i < n && source[i] != b'\n' {
                    i += 1;
                }
            }
            b',' => {
                commas += 1;
                i += 1;
            }
            b'{' | b'}' | b'-' | b'+' => i += 1,
            b'0'..=b'9' => {
                // A number with its prefix, digits, point, exponent and suffix letters.
                while i < n
                    && (source[i].is_ascii_alphanumeric() || matches!(source[i], b'.' | b'_'))
                {
                    let exponent = matches!(source[i], b'e' | b'E' | b'p' | b'P');
                    i += 1;
                    if exponent && i < n && matches!(source[i], b'+' | b'-') {
                        i += 1;
                    }
                }
                literals += 1;
            }
            b'\'' | b'"' => {
                let mut j = i + 1;
                while j < n && source[j] != c {
                    if source[j] == b'\n' {
                        return false;
                    }
                    if source[j] == b'\\' {
                        j += 1;
                    }
                    j += 1;
                }
                if j >= n {
                    return false;
                }
                i = j + 1;
                literals += 1;
            }
            _ => return false,
        }
    }
    literals > 0 && commas > 0
}

/// Lowers one C file. Never fails; problems are returned inside the IR.
pub fn parse_file(file: FileId, source: &[u8]) -> FileIr {
    let mut ir = FileIr {
        file,
        ..FileIr::default()
    };
    if is_constant_table(source) {
        return ir;
    }
    let without_comments = blank_directive_comments(source);
    let without_includes = blank_computed_includes(&without_comments);
    let terminated = terminate_bare_macro_lines(&without_includes);
    let Some(first_tree) = parse_tree(&terminated) else {
        ir.problems.push(ParseProblem {
            span: Span {
                file,
                line: 1,
                column: 1,
                ..Span::default()
            },
            message: "the C parser gave no tree for this file".into(),
        });
        return ir;
    };
    // Conditionals that split a statement (`} else` / `#endif` / `{`, an `if (x) {` in each
    // branch) break the grammar; such function bodies are read with the first branch of
    // each of their conditionals, when that reads better.
    let reread = if first_tree.root_node().has_error() {
        first_branches_variant(&terminated, &first_tree)
    } else {
        None
    };
    let (source, tree): (&[u8], Tree) = match &reread {
        Some((bytes, tree, groups)) => {
            // What was not read is said, as for any region the grammar could not read.
            for at in groups {
                let before = &terminated[..*at];
                let line = before.iter().filter(|b| **b == b'\n').count() as u32 + 1;
                ir.problems.push(ParseProblem {
                    span: Span {
                        file,
                        start: *at as u32,
                        end: *at as u32,
                        line,
                        column: 1,
                    },
                    message:
                        "a conditional here splits a statement; only one of its branches was read"
                            .into(),
                });
            }
            (bytes, tree.clone())
        }
        None => (&terminated, first_tree),
    };
    // `u*(alpha) + y*(1 - alpha)`: the grammar reads `(alpha) + y` as a cast of `+y`, which
    // regroups the whole sum; where `alpha` is a variable or macro of this file, the
    // parentheses are dropped and the file read again.
    let uncast = variable_casts_variant(source, &tree);
    let (source, tree): (&[u8], Tree) = match &uncast {
        Some((bytes, tree)) => (bytes, tree.clone()),
        None => (source, tree),
    };
    let mut lower = Lower {
        src: source,
        file,
        ir: &mut ir,
        errors: 0,
        first_error: None,
        nesting: 0,
        too_deep: None,
        recovered: 0,
        names: std::collections::HashSet::new(),
    };
    let root = tree.root_node();
    lower.top_items(root, &Condition::default());
    // Where the grammar lost its way (a macro used as a statement prefix, an include it
    // cannot read), whole functions can vanish into an error: each top-level function
    // found by its braces that did not come out is parsed again on its own.
    if root.has_error() && lower.errors > 0 {
        let known: Vec<(u32, u32)> = lower
            .ir
            .functions
            .iter()
            .map(|f| (f.span.start, f.span.end))
            .collect();
        for (range, condition) in function_regions(source) {
            // Read already when a function lies inside the region (one that overran it,
            // swallowing what follows, does not count).
            let covered = known
                .iter()
                .any(|(a, b)| (*a as usize) >= range.start && (*b as usize) <= range.end);
            if covered {
                continue;
            }
            let Some(region) = parse_range(source, range) else {
                continue;
            };
            let before = lower.ir.functions.len();
            for child in named_children(region.root_node()) {
                if child.kind() == kind::FUNCTION_DEFINITION {
                    lower.function(child, &condition);
                }
            }
            if lower.ir.functions.len() > before {
                lower.recovered += 1;
            }
        }
    }
    let too_deep = lower.too_deep;
    let errors = lower.errors;
    let first_error = lower.first_error;
    if let Some(span) = too_deep {
        ir.problems.push(ParseProblem {
            span,
            message: format!(
                "nesting deeper than {MAX_DEPTH} levels; what is inside was not read, smoothers there may be missed"
            ),
        });
    }
    if errors > 0 {
        let span = first_error.unwrap_or_default();
        let count = errors;
        ir.problems.push(ParseProblem {
            span,
            message: format!(
                "{count} part(s) of this file could not be parsed as C; smoothers there may be missed"
            ),
        });
    }
    ir.macros.shrink_to_fit();
    ir.globals.shrink_to_fit();
    ir.functions.shrink_to_fit();
    ir
}

/// Parses `text` as one C expression (a macro body or a substituted macro call). The spans
/// of the result all point at `anchor`, the place in the real source the text stands for.
pub fn parse_expression(text: &str, anchor: Span) -> Option<Expr> {
    let wrapped = format!("void tauscan_snippet(void) {{ ({text}); }}");
    let stmts = parse_snippet(&wrapped, anchor)?;
    match stmts.into_iter().next()? {
        Stmt::Expr(expr) => Some(expr),
        _ => None,
    }
}

/// Parses `text` as a sequence of statements (the body of a statement-like macro).
pub fn parse_statements(text: &str, anchor: Span) -> Option<Vec<Stmt>> {
    let wrapped = format!("void tauscan_snippet(void) {{ {text}; }}");
    parse_snippet(&wrapped, anchor)
}

/// Snippets parsed once per text: a macro body written the same in many files (a vendor
/// header copied into every board's folder) is parsed by tree-sitter once, at no position,
/// then copied and moved to each definition. A copy moved so is the snippet parsed there:
/// the move puts the anchor's file in every span (array sizes and initialisers in types
/// too, which the relocation leaves) and the relocation the anchor's position.
#[derive(Default)]
pub struct Snippets {
    parsed: std::sync::RwLock<std::collections::HashMap<String, Option<Vec<Stmt>>>>,
}

impl Snippets {
    /// [`parse_expression`], once per text.
    pub fn expression(&self, text: &str, anchor: Span) -> Option<Expr> {
        let stmts = self.parse(
            format!("void tauscan_snippet(void) {{ ({text}); }}"),
            anchor,
        )?;
        match stmts.into_iter().next()? {
            Stmt::Expr(expr) => Some(expr),
            _ => None,
        }
    }

    /// [`parse_statements`], once per text.
    pub fn statements(&self, text: &str, anchor: Span) -> Option<Vec<Stmt>> {
        self.parse(format!("void tauscan_snippet(void) {{ {text}; }}"), anchor)
    }

    fn parse(&self, wrapped: String, anchor: Span) -> Option<Vec<Stmt>> {
        let known = self
            .parsed
            .read()
            .ok()
            .and_then(|m| m.get(&wrapped).cloned());
        let parsed = match known {
            Some(p) => p,
            None => {
                let p = parse_snippet(&wrapped, Span::default());
                if let Ok(mut m) = self.parsed.write() {
                    m.entry(wrapped).or_insert_with(|| p.clone());
                }
                p
            }
        };
        let mut stmts = parsed?;
        crate::ir::move_stmts_to(&mut stmts, anchor.file);
        relocate_stmts(&mut stmts, anchor);
        Some(stmts)
    }
}

fn parse_snippet(wrapped: &str, anchor: Span) -> Option<Vec<Stmt>> {
    let tree = parse_tree(wrapped.as_bytes())?;
    let mut ir = FileIr::default();
    let mut lower = Lower {
        src: wrapped.as_bytes(),
        file: anchor.file,
        ir: &mut ir,
        errors: 0,
        first_error: None,
        nesting: 0,
        too_deep: None,
        recovered: 0,
        names: std::collections::HashSet::new(),
    };
    lower.top_items(tree.root_node(), &Condition::default());
    if lower.errors > 0 || lower.too_deep.is_some() {
        return None;
    }
    let function = ir.functions.pop()?;
    let Body::Live(mut body) = function.body else {
        return None;
    };
    relocate_stmts(&mut body, anchor);
    Some(body)
}

pub fn relocate_stmts(stmts: &mut [Stmt], anchor: Span) {
    for stmt in stmts {
        relocate_stmt(stmt, anchor);
    }
}

fn relocate_stmt(stmt: &mut Stmt, anchor: Span) {
    match stmt {
        Stmt::Expr(e) => relocate_expr(e, anchor),
        Stmt::Decl(decls) => {
            for d in decls {
                d.span = anchor;
                if let Some(Initializer::Expr(e)) = &mut d.init {
                    relocate_expr(e, anchor);
                }
            }
        }
        Stmt::Block(items) => relocate_stmts(items, anchor),
        Stmt::If {
            cond,
            then,
            otherwise,
        } => {
            relocate_expr(cond, anchor);
            relocate_stmt(then, anchor);
            if let Some(o) = otherwise {
                relocate_stmt(o, anchor);
            }
        }
        Stmt::Loop {
            init,
            cond,
            step,
            body,
            span,
        } => {
            *span = anchor;
            relocate_stmts(init, anchor);
            if let Some(c) = cond {
                relocate_expr(c, anchor);
            }
            if let Some(s) = step {
                relocate_expr(s, anchor);
            }
            relocate_stmt(body, anchor);
        }
        Stmt::Switch { scrutinee, body } => {
            relocate_expr(scrutinee, anchor);
            relocate_stmt(body, anchor);
        }
        Stmt::Return(e, span) => {
            *span = anchor;
            if let Some(e) = e {
                relocate_expr(e, anchor);
            }
        }
        Stmt::Conditional(branches) => {
            for (_, body) in branches {
                relocate_stmts(body, anchor);
            }
        }
        Stmt::Other(span) => *span = anchor,
    }
}

/// Moves every span of `expr` to `anchor`.
pub fn relocate_expr(expr: &mut Expr, anchor: Span) {
    expr.span = anchor;
    expr.children_mut(&mut |c| relocate_expr(c, anchor));
}

/// Prints the tree-sitter syntax tree of a file, for `tauscan debug syntax`.
pub fn debug_syntax(source: &[u8]) -> String {
    match parse_tree(source) {
        Some(tree) => tree.root_node().to_sexp(),
        None => "no tree".into(),
    }
}

struct Lower<'a> {
    src: &'a [u8],
    file: FileId,
    ir: &'a mut FileIr,
    errors: u32,
    first_error: Option<Span>,
    /// Nesting of top-level items (preprocessor groups, struct definitions).
    nesting: u32,
    /// The first place where nesting went past a limit and the inside was not read.
    too_deep: Option<Span>,
    /// Functions read again on their own after the file's tree lost them.
    recovered: u32,
    /// The file's names so far: each name's text is allocated once per file.
    names: std::collections::HashSet<std::sync::Arc<str>>,
}

/// A node's named children, in order, read from a cursor as they are asked for (no list
/// is built: the lowering asks for the children of every node).
fn named_children(node: Node<'_>) -> NamedChildren<'_> {
    let mut cursor = node.walk();
    let done = !cursor.goto_first_child();
    NamedChildren { cursor, done }
}

struct NamedChildren<'t> {
    cursor: tree_sitter::TreeCursor<'t>,
    done: bool,
}

impl<'t> Iterator for NamedChildren<'t> {
    type Item = Node<'t>;

    fn next(&mut self) -> Option<Node<'t>> {
        while !self.done {
            let node = self.cursor.node();
            self.done = !self.cursor.goto_next_sibling();
            if node.is_named() {
                return Some(node);
            }
        }
        None
    }
}

fn all_children<'t>(node: Node<'t>) -> Vec<Node<'t>> {
    let mut cursor = node.walk();
    node.children(&mut cursor).collect()
}

impl Lower<'_> {
    fn text(&self, node: Node) -> String {
        let bytes = self
            .src
            .get(node.start_byte()..node.end_byte())
            .unwrap_or(&[]);
        String::from_utf8_lossy(bytes).into_owned()
    }

    /// A node's text as a shared name: the file's earlier allocation of the same text.
    fn name(&mut self, node: Node) -> std::sync::Arc<str> {
        let bytes = self
            .src
            .get(node.start_byte()..node.end_byte())
            .unwrap_or(&[]);
        let text = String::from_utf8_lossy(bytes);
        if let Some(name) = self.names.get(&*text) {
            return name.clone();
        }
        let name: std::sync::Arc<str> = text.into();
        self.names.insert(name.clone());
        name
    }

    fn span(&self, node: Node) -> Span {
        let point = node.start_position();
        Span {
            file: self.file,
            start: node.start_byte() as u32,
            end: node.end_byte() as u32,
            line: point.row as u32 + 1,
            column: point.column as u32 + 1,
        }
    }

    fn note_too_deep(&mut self, node: Node) {
        if self.too_deep.is_none() {
            self.too_deep = Some(self.span(node));
        }
    }

    fn note_error(&mut self, node: Node) {
        self.errors += 1;
        if self.first_error.is_none() {
            self.first_error = Some(self.span(node));
        }
    }

    fn comment(&mut self, node: Node) {
        let text = self.text(node);
        if let Some(pos) = text.find("tauscan:") {
            let rest = text[pos + "tauscan:".len()..]
                .trim_end_matches("*/")
                .trim()
                .to_string();
            let line = self.span(node).line;
            self.ir.tags.push((line, rest));
        }
    }

    fn top_items(&mut self, node: Node, cond: &Condition) {
        for child in named_children(node) {
            self.top_item(child, cond);
        }
    }

    fn top_item(&mut self, node: Node, cond: &Condition) {
        if self.nesting >= MAX_DEPTH {
            self.note_too_deep(node);
            return;
        }
        self.nesting += 1;
        self.top_item_inner(node, cond);
        self.nesting -= 1;
    }

    fn top_item_inner(&mut self, node: Node, cond: &Condition) {
        if node.is_error() || node.is_missing() {
            self.note_error(node);
            // Keep what tree-sitter could still make of the inside.
            self.top_items(node, cond);
            return;
        }
        match node.kind() {
            kind::PREPROC_DEF => self.macro_def(node, cond, false),
            kind::PREPROC_FUNCTION_DEF => self.macro_def(node, cond, true),
            kind::PREPROC_INCLUDE => self.include(node, cond),
            kind::PREPROC_IF | kind::PREPROC_IFDEF => {
                for (branch_cond, items) in self.preproc_branches(node, cond) {
                    for item in items {
                        self.top_item(item, &branch_cond);
                    }
                }
            }
            kind::FUNCTION_DEFINITION => self.function(node, cond),
            kind::DECLARATION => self.global_declaration(node, cond),
            kind::TYPE_DEFINITION => self.type_definition(node),
            kind::STRUCT_SPECIFIER | kind::UNION_SPECIFIER => {
                self.struct_specifier(node);
            }
            kind::ENUM_SPECIFIER => self.enum_specifier(node),
            kind::COMMENT => self.comment(node),
            "linkage_specification" | "declaration_list" => self.top_items(node, cond),
            _ => {
                if node.has_error() {
                    self.note_error(node);
                }
                self.find_comments(node);
            }
        }
    }

    fn find_comments(&mut self, node: Node) {
        for child in named_children(node) {
            if child.kind() == kind::COMMENT {
                self.comment(child);
            }
        }
    }

    /// Splits a `#if`/`#ifdef` group into its branches, each with the condition under which
    /// its items are compiled and the item nodes themselves.
    fn preproc_branches<'t>(
        &mut self,
        node: Node<'t>,
        outer: &Condition,
    ) -> Vec<(Condition, Vec<Node<'t>>)> {
        let mut result = Vec::new();
        let mut earlier: Vec<CondBranch> = Vec::new();
        let mut current = Some(node);
        let mut depth = 0;
        while let Some(group) = current.take() {
            depth += 1;
            if depth > 64 {
                break;
            }
            let branch = match group.kind() {
                kind::PREPROC_IFDEF => {
                    let name = field_child(group, field::NAME)
                        .map(|n| self.text(n))
                        .unwrap_or_default();
                    let negated = all_children(group)
                        .first()
                        .map(|n| self.text(*n).contains("ifndef"))
                        .unwrap_or(false);
                    if negated {
                        CondBranch::Ifndef(name)
                    } else {
                        CondBranch::Ifdef(name)
                    }
                }
                kind::PREPROC_IF | kind::PREPROC_ELIF => {
                    let text = field_child(group, field::CONDITION)
                        .map(|n| self.text(n))
                        .unwrap_or_default();
                    CondBranch::If(text.trim().to_string())
                }
                _ => CondBranch::Else,
            };
            let alternative = field_child(group, field::ALTERNATIVE);
            let mut items = Vec::new();
            for child in named_children(group) {
                if Some(child) == alternative {
                    continue;
                }
                if field_child(group, field::CONDITION) == Some(child)
                    || field_child(group, field::NAME) == Some(child)
                {
                    continue;
                }
                items.push(child);
            }
            let mut condition = outer.clone();
            std::sync::Arc::make_mut(&mut condition.levels).push(CondLevel {
                branch: branch.clone(),
                earlier: earlier.clone(),
            });
            result.push((condition, items));
            earlier.push(branch);
            current = alternative.filter(|alt| {
                matches!(alt.kind(), kind::PREPROC_ELSE | kind::PREPROC_ELIF)
                    || alt.kind().starts_with("preproc_elif")
            });
        }
        result
    }

    /// `#include "x.h"` or `#include <x.h>`: the path as written, for macro visibility.
    fn include(&mut self, node: Node, cond: &Condition) {
        let Some(path) = field_child(node, field::PATH) else {
            return;
        };
        let text = self.text(path);
        let trimmed = text
            .trim()
            .trim_start_matches(['"', '<'])
            .trim_end_matches(['"', '>'])
            .to_string();
        if trimmed.is_empty() {
            return;
        }
        let span = self.span(node);
        self.ir.includes.push(Include {
            path: trimmed,
            line: span.line,
            condition: cond.clone(),
        });
    }

    fn macro_def(&mut self, node: Node, cond: &Condition, function_like: bool) {
        let Some(name) = field_child(node, field::NAME).map(|n| self.text(n)) else {
            return;
        };
        let params = if function_like {
            field_child(node, field::PARAMETERS)
                .map(|p| named_children(p).map(|n| self.text(n)).collect::<Vec<_>>())
        } else {
            None
        };
        let params = if function_like {
            Some(params.unwrap_or_default())
        } else {
            None
        };
        let (body, span) = match field_child(node, field::VALUE) {
            Some(v) => (self.text(v), self.span(v)),
            None => (String::new(), self.span(node)),
        };
        // Line continuations and comments are not part of the value.
        let body = strip_macro_body(&body);
        self.ir.macros.push(MacroDef {
            name: name.into(),
            params,
            body: body.into(),
            span,
            condition: cond.clone(),
        });
    }

    fn function(&mut self, node: Node, cond: &Condition) {
        let specifiers = self.specifiers(node);
        let base_type = field_child(node, field::TYPE)
            .map(|t| self.type_of(t))
            .unwrap_or(CType::PlainInt { signed: true });
        let Some(declarator) = field_child(node, field::DECLARATOR) else {
            return;
        };
        let Some((name, ty, params, name_span)) = self.declarator(declarator, base_type) else {
            return;
        };
        let returns = match ty {
            CType::Unknown(_) => CType::Unknown("?".into()),
            other => other,
        };
        let body = field_child(node, field::BODY)
            .map(|b| self.block(b, 0))
            .unwrap_or_default();
        self.ir.functions.push(Function {
            name,
            params: params.unwrap_or_default(),
            returns,
            is_static: specifiers.is_static,
            body: body.into(),
            span: self.span(node),
            name_span,
            condition: cond.clone(),
        });
    }

    fn specifiers(&self, node: Node) -> Specifiers {
        let mut spec = Specifiers::default();
        for child in named_children(node) {
            match child.kind() {
                kind::STORAGE_CLASS => {
                    let t = self.text(child);
                    if t == "static" {
                        spec.is_static = true;
                    }
                    if t == "extern" {
                        spec.is_extern = true;
                    }
                }
                kind::TYPE_QUALIFIER if self.text(child) == "const" => spec.is_const = true,
                _ => {}
            }
        }
        spec
    }

    /// The C type a type-specifier node names. Struct and enum bodies met here are
    /// recorded as definitions too.
    fn type_of(&mut self, node: Node) -> CType {
        match node.kind() {
            kind::PRIMITIVE_TYPE | kind::SIZED_TYPE | kind::TYPE_IDENTIFIER => {
                type_from_name(&self.text(node))
            }
            kind::STRUCT_SPECIFIER | kind::UNION_SPECIFIER => {
                let name = self.struct_specifier(node);
                CType::Struct(name)
            }
            kind::ENUM_SPECIFIER => {
                self.enum_specifier(node);
                CType::PlainInt { signed: true }
            }
            _ => CType::Unknown(self.text(node)),
        }
    }

    /// Records a struct definition (when it has a body) and returns its name; anonymous
    /// structs get a name from their position so typedefs can point at them.
    fn struct_specifier(&mut self, node: Node) -> String {
        if self.nesting >= MAX_DEPTH {
            self.note_too_deep(node);
            return format!("<deep@{}>", node.start_byte());
        }
        self.nesting += 1;
        let name = self.struct_specifier_inner(node);
        self.nesting -= 1;
        name
    }

    fn struct_specifier_inner(&mut self, node: Node) -> String {
        let name = field_child(node, field::NAME)
            .map(|n| self.text(n))
            .unwrap_or_else(|| format!("<anon@{}>", node.start_byte()));
        if let Some(body) = field_child(node, field::BODY) {
            let mut fields = Vec::new();
            self.struct_fields(body, &mut fields, 0);
            let span = self.span(node);
            self.ir.structs.push(StructDef {
                name: name.clone(),
                fields,
                span,
            });
        }
        name
    }

    /// The fields of a struct body, including those under `#if` branches (every branch:
    /// the types matter, not which branch is built), and the macros defined among them.
    fn struct_fields(&mut self, body: Node, fields: &mut Vec<Param>, depth: u32) {
        if depth > 16 {
            return;
        }
        for field in named_children(body) {
            match field.kind() {
                kind::FIELD_DECLARATION => {}
                kind::PREPROC_DEF => {
                    self.macro_def(field, &Condition::default(), false);
                    continue;
                }
                kind::PREPROC_FUNCTION_DEF => {
                    self.macro_def(field, &Condition::default(), true);
                    continue;
                }
                kind::PREPROC_IF | kind::PREPROC_IFDEF => {
                    for (_, items) in self.preproc_branches(field, &Condition::default()) {
                        for item in items {
                            if item.kind() == kind::FIELD_DECLARATION {
                                self.field_declaration(item, fields);
                            } else if matches!(
                                item.kind(),
                                kind::PREPROC_IF | kind::PREPROC_IFDEF | kind::PREPROC_DEF
                            ) {
                                // Nested groups and definitions: read as the body is.
                                self.struct_fields_item(item, fields, depth + 1);
                            }
                        }
                    }
                    continue;
                }
                _ => continue,
            }
            self.field_declaration(field, fields);
        }
    }

    fn struct_fields_item(&mut self, item: Node, fields: &mut Vec<Param>, depth: u32) {
        match item.kind() {
            kind::PREPROC_DEF => self.macro_def(item, &Condition::default(), false),
            _ => {
                if depth > 16 {
                    return;
                }
                for (_, items) in self.preproc_branches(item, &Condition::default()) {
                    for inner in items {
                        if inner.kind() == kind::FIELD_DECLARATION {
                            self.field_declaration(inner, fields);
                        } else {
                            self.struct_fields_item(inner, fields, depth + 1);
                        }
                    }
                }
            }
        }
    }

    fn field_declaration(&mut self, field: Node, fields: &mut Vec<Param>) {
        let base = field_child(field, field::TYPE)
            .map(|t| self.type_of(t))
            .unwrap_or(CType::Unknown("?".into()));
        let mut cursor = field.walk();
        let declarators: Vec<Node> = field
            .children_by_field_name("declarator", &mut cursor)
            .collect();
        for d in declarators {
            if let Some((fname, fty, _, _)) = self.declarator(d, base.clone()) {
                fields.push(Param {
                    name: fname,
                    ty: fty,
                });
            }
        }
    }

    fn enum_specifier(&mut self, node: Node) {
        let Some(body) = field_child(node, field::BODY) else {
            return;
        };
        let mut previous: Option<String> = None;
        for e in named_children(body) {
            if e.kind() != kind::ENUMERATOR {
                continue;
            }
            let Some(name) = field_child(e, field::NAME).map(|n| self.text(n)) else {
                continue;
            };
            let value = field_child(e, field::VALUE).map(|v| self.expr(v, 0));
            let span = self.span(e);
            self.ir.enums.push(EnumConst {
                name: name.clone(),
                value,
                previous: previous.clone(),
                span,
            });
            previous = Some(name);
        }
    }

    fn type_definition(&mut self, node: Node) {
        let base = field_child(node, field::TYPE)
            .map(|t| self.type_of(t))
            .unwrap_or(CType::Unknown("?".into()));
        let mut cursor = node.walk();
        let declarators: Vec<Node> = node
            .children_by_field_name("declarator", &mut cursor)
            .collect();
        for d in declarators {
            if let Some((name, ty, _, _)) = self.declarator(d, base.clone()) {
                self.ir.typedefs.push((name, ty));
            }
        }
    }

    /// Walks a declarator down to its name, wrapping the base type in the pointers and
    /// arrays met on the way. Returns the parameters when it is a function declarator.
    fn declarator(
        &mut self,
        node: Node,
        base: CType,
    ) -> Option<(String, CType, Option<Vec<Param>>, Span)> {
        let mut ty = base;
        let mut current = node;
        let mut params = None;
        for _ in 0..32 {
            match current.kind() {
                kind::IDENTIFIER | kind::FIELD_IDENTIFIER | kind::TYPE_IDENTIFIER => {
                    return Some((self.text(current), ty, params, self.span(current)));
                }
                kind::POINTER_DECLARATOR => {
                    ty = CType::Pointer(Box::new(ty));
                    // `(*hook)(void)`: a pointer to a function is a variable, not a
                    // function's declaration.
                    params = None;
                    current = field_child(current, field::DECLARATOR)?;
                }
                kind::ARRAY_DECLARATOR => {
                    let size = field_child(current, field::SIZE).map(|s| Box::new(self.expr(s, 0)));
                    ty = CType::Array(Box::new(ty), size);
                    current = field_child(current, field::DECLARATOR)?;
                }
                kind::FUNCTION_DECLARATOR => {
                    if params.is_none() {
                        params = Some(self.parameters(current));
                    }
                    current = field_child(current, field::DECLARATOR)?;
                }
                kind::PARENTHESIZED_DECLARATOR => {
                    current = named_children(current).next()?;
                }
                kind::INIT_DECLARATOR => {
                    current = field_child(current, field::DECLARATOR)?;
                }
                _ => {
                    // Attributed or otherwise decorated declarators: look inside.
                    current = field_child(current, field::DECLARATOR)
                        .or_else(|| named_children(current).next())?;
                }
            }
        }
        None
    }

    fn parameters(&mut self, function_declarator: Node) -> Vec<Param> {
        let Some(list) = field_child(function_declarator, field::PARAMETERS) else {
            return Vec::new();
        };
        let mut params = Vec::new();
        for p in named_children(list) {
            if p.kind() != kind::PARAMETER_DECLARATION {
                continue;
            }
            let base = field_child(p, field::TYPE)
                .map(|t| self.type_of(t))
                .unwrap_or(CType::Unknown("?".into()));
            match field_child(p, field::DECLARATOR) {
                Some(d) => {
                    if let Some((name, ty, _, _)) = self.declarator(d, base) {
                        params.push(Param { name, ty });
                    }
                }
                None => {
                    if base != CType::Void {
                        params.push(Param {
                            name: String::new(),
                            ty: base,
                        });
                    }
                }
            }
        }
        params
    }

    fn declarations(&mut self, node: Node, depth: u32) -> Vec<LocalDecl> {
        let spec = self.specifiers(node);
        let base = field_child(node, field::TYPE)
            .map(|t| self.type_of(t))
            .unwrap_or(CType::Unknown("?".into()));
        let mut cursor = node.walk();
        let declarators: Vec<Node> = node
            .children_by_field_name("declarator", &mut cursor)
            .collect();
        let mut result = Vec::new();
        for d in declarators {
            let init = if d.kind() == kind::INIT_DECLARATOR {
                field_child(d, field::VALUE).map(|v| self.initializer(v, depth))
            } else {
                None
            };
            if let Some((name, ty, params, _)) = self.declarator(d, base.clone()) {
                if params.is_some() {
                    // A function prototype, not a variable: its return type is kept.
                    if self.ir.prototypes.len() < MAX_PROTOTYPES {
                        self.ir.prototypes.push((name, ty));
                    }
                    continue;
                }
                result.push(LocalDecl {
                    name,
                    ty,
                    is_static: spec.is_static,
                    is_const: spec.is_const,
                    init,
                    span: self.span(d),
                });
            }
        }
        result
    }

    fn initializer(&mut self, node: Node, depth: u32) -> Initializer {
        if depth > MAX_DEPTH {
            self.note_too_deep(node);
            return Initializer::List(Vec::new());
        }
        if node.kind() == kind::INITIALIZER_LIST {
            let mut items = Vec::new();
            for item in named_children(node) {
                if item.kind() == kind::COMMENT {
                    continue;
                }
                if item.kind() == kind::INITIALIZER_PAIR {
                    // `.k = ...` gives the field's name; `[2] = ...` keeps its brackets, so
                    // that no reader takes the item for the next in order.
                    let designator = field_child(item, field::DESIGNATOR).map(|d| {
                        if d.kind() == kind::FIELD_DESIGNATOR {
                            self.text(d).trim_start_matches('.').trim().to_string()
                        } else {
                            self.text(d).trim().to_string()
                        }
                    });
                    let value = field_child(item, field::VALUE)
                        .map(|v| self.initializer(v, depth + 1))
                        .unwrap_or(Initializer::List(Vec::new()));
                    items.push((designator, value));
                } else {
                    items.push((None, self.initializer(item, depth + 1)));
                }
            }
            Initializer::List(items)
        } else {
            Initializer::Expr(self.expr(node, depth))
        }
    }

    fn global_declaration(&mut self, node: Node, cond: &Condition) {
        let spec = self.specifiers(node);
        if spec.is_extern {
            // A declaration of something defined elsewhere: its definition is what counts.
            // Keep only the type, for globals defined in files not scanned.
        }
        for decl in self.declarations(node, 0) {
            self.ir.globals.push(GlobalDecl {
                decl,
                condition: cond.clone(),
            });
        }
    }

    fn block(&mut self, node: Node, depth: u32) -> Vec<Stmt> {
        let mut stmts = Vec::new();
        for child in named_children(node) {
            if let Some(stmt) = self.stmt(child, depth + 1) {
                stmts.push(stmt);
            }
        }
        // Kept for the whole scan: no spare capacity.
        stmts.shrink_to_fit();
        stmts
    }

    fn stmt(&mut self, node: Node, depth: u32) -> Option<Stmt> {
        if depth > MAX_DEPTH {
            self.note_too_deep(node);
            return Some(Stmt::Other(self.span(node)));
        }
        if node.is_error() {
            self.note_error(node);
            return Some(Stmt::Other(self.span(node)));
        }
        Some(match node.kind() {
            kind::COMMENT => {
                self.comment(node);
                return None;
            }
            kind::COMPOUND_STATEMENT => Stmt::Block(self.block(node, depth)),
            kind::EXPRESSION_STATEMENT => match named_children(node).next() {
                Some(e) if e.kind() != kind::COMMENT => Stmt::Expr(self.expr(e, depth)),
                _ => return None,
            },
            kind::DECLARATION => Stmt::Decl(self.declarations(node, depth)),
            kind::IF_STATEMENT => {
                let cond = field_child(node, field::CONDITION)
                    .map(|c| self.expr(c, depth))
                    .unwrap_or_else(|| self.opaque(node));
                let then = field_child(node, field::CONSEQUENCE)
                    .and_then(|c| self.stmt(c, depth + 1))
                    .unwrap_or(Stmt::Block(Vec::new()));
                let otherwise = field_child(node, field::ALTERNATIVE).and_then(|a| {
                    let inner = if a.kind() == kind::ELSE_CLAUSE {
                        named_children(a).next()?
                    } else {
                        a
                    };
                    self.stmt(inner, depth + 1)
                });
                Stmt::If {
                    cond,
                    then: Box::new(then),
                    otherwise: otherwise.map(Box::new),
                }
            }
            kind::FOR_STATEMENT => {
                let init = match field_child(node, field::INITIALIZER) {
                    Some(i) if i.kind() == kind::DECLARATION => {
                        vec![Stmt::Decl(self.declarations(i, depth))]
                    }
                    Some(i) => vec![Stmt::Expr(self.expr(i, depth))],
                    None => Vec::new(),
                };
                let cond = field_child(node, field::CONDITION).map(|c| self.expr(c, depth));
                let step = field_child(node, field::UPDATE).map(|u| self.expr(u, depth));
                let body = field_child(node, field::BODY)
                    .and_then(|b| self.stmt(b, depth + 1))
                    .unwrap_or(Stmt::Block(Vec::new()));
                Stmt::Loop {
                    init,
                    cond: cond.map(Box::new),
                    step: step.map(Box::new),
                    body: Box::new(body),
                    span: self.span(node),
                }
            }
            kind::WHILE_STATEMENT | kind::DO_STATEMENT => {
                let cond = field_child(node, field::CONDITION).map(|c| self.expr(c, depth));
                let body = field_child(node, field::BODY)
                    .and_then(|b| self.stmt(b, depth + 1))
                    .unwrap_or(Stmt::Block(Vec::new()));
                Stmt::Loop {
                    init: Vec::new(),
                    cond: cond.map(Box::new),
                    step: None,
                    body: Box::new(body),
                    span: self.span(node),
                }
            }
            kind::SWITCH_STATEMENT => {
                let scrutinee = field_child(node, field::CONDITION)
                    .map(|c| self.expr(c, depth))
                    .unwrap_or_else(|| self.opaque(node));
                let body = field_child(node, field::BODY)
                    .and_then(|b| self.stmt(b, depth + 1))
                    .unwrap_or(Stmt::Block(Vec::new()));
                Stmt::Switch {
                    scrutinee,
                    body: Box::new(body),
                }
            }
            kind::CASE_STATEMENT | kind::LABELED_STATEMENT => {
                // The statements after a case label belong to it; the label itself does
                // not matter to smoothers.
                let mut inner = Vec::new();
                for child in named_children(node) {
                    if field_child(node, field::VALUE) == Some(child)
                        || field_child(node, field::LABEL) == Some(child)
                    {
                        continue;
                    }
                    if let Some(s) = self.stmt(child, depth + 1) {
                        inner.push(s);
                    }
                }
                Stmt::Block(inner)
            }
            kind::RETURN_STATEMENT => {
                let value = named_children(node)
                    .find(|c| c.kind() != kind::COMMENT)
                    .map(|e| self.expr(e, depth));
                Stmt::Return(value, self.span(node))
            }
            kind::PREPROC_IF | kind::PREPROC_IFDEF => {
                let mut branches = Vec::new();
                for (cond, items) in self.preproc_branches(node, &Condition::default()) {
                    let branch = cond
                        .levels
                        .last()
                        .map(|l| l.branch.clone())
                        .unwrap_or(CondBranch::Else);
                    let mut body = Vec::new();
                    for item in items {
                        if let Some(s) = self.stmt(item, depth + 1) {
                            body.push(s);
                        }
                    }
                    branches.push((branch, body));
                }
                Stmt::Conditional(branches)
            }
            kind::PREPROC_DEF => {
                self.macro_def(node, &Condition::default(), false);
                return None;
            }
            kind::PREPROC_FUNCTION_DEF => {
                self.macro_def(node, &Condition::default(), true);
                return None;
            }
            _ => {
                if node.has_error() {
                    self.note_error(node);
                }
                Stmt::Other(self.span(node))
            }
        })
    }

    fn opaque(&self, node: Node) -> Expr {
        Expr::new(ExprKind::Opaque(self.text(node)), self.span(node))
    }

    fn expr(&mut self, node: Node, depth: u32) -> Expr {
        let span = self.span(node);
        if depth > MAX_DEPTH {
            self.note_too_deep(node);
            return self.opaque(node);
        }
        if node.is_error() {
            self.note_error(node);
            return self.opaque(node);
        }
        let child = |field: usize| field_child(node, field);
        let kind = match node.kind() {
            kind::IDENTIFIER => ExprKind::Ident(self.name(node)),
            kind::NUMBER_LITERAL => {
                let text = self.text(node);
                // The grammar folds a leading sign into the literal in some places;
                // C has no negative literals, so keep it as negation.
                let (negative, digits) = match text.strip_prefix('-') {
                    Some(rest) => (true, rest.trim_start()),
                    None => (false, text.trim_start_matches('+').trim_start()),
                };
                match parse_number(digits) {
                    Some(kind) if negative => ExprKind::Unary {
                        op: UnaryOp::Neg,
                        arg: Box::new(Expr::new(kind, span)),
                    },
                    Some(kind) => kind,
                    None => ExprKind::Opaque(text),
                }
            }
            kind::CHAR_LITERAL => {
                let text = self.text(node);
                let inner = text.trim_matches('\'');
                match inner.chars().next() {
                    Some(c) if inner.chars().count() == 1 => ExprKind::Int {
                        value: u64::from(c),
                        unsigned: false,
                        long: false,
                    },
                    _ => ExprKind::Opaque(text),
                }
            }
            kind::TRUE => ExprKind::Int {
                value: 1,
                unsigned: false,
                long: false,
            },
            kind::FALSE => ExprKind::Int {
                value: 0,
                unsigned: false,
                long: false,
            },
            kind::PARENTHESIZED_EXPRESSION => {
                return match named_children(node).find(|c| c.kind() != kind::COMMENT) {
                    Some(inner) => self.expr(inner, depth + 1),
                    None => self.opaque(node),
                };
            }
            kind::BINARY_EXPRESSION => {
                let op_text = child(field::OPERATOR)
                    .map(|o| self.text(o))
                    .unwrap_or_default();
                match (
                    BinaryOp::from_text(&op_text),
                    child(field::LEFT),
                    child(field::RIGHT),
                ) {
                    (Some(op), Some(l), Some(r)) => ExprKind::Binary {
                        op,
                        lhs: Box::new(self.expr(l, depth + 1)),
                        rhs: Box::new(self.expr(r, depth + 1)),
                    },
                    _ => ExprKind::Opaque(self.text(node)),
                }
            }
            kind::UNARY_EXPRESSION | kind::POINTER_EXPRESSION => {
                let op_text = child(field::OPERATOR)
                    .map(|o| self.text(o))
                    .unwrap_or_default();
                let op = match op_text.as_str() {
                    "-" => Some(UnaryOp::Neg),
                    "+" => Some(UnaryOp::Plus),
                    "!" => Some(UnaryOp::Not),
                    "~" => Some(UnaryOp::BitNot),
                    "*" => Some(UnaryOp::Deref),
                    "&" => Some(UnaryOp::AddrOf),
                    _ => None,
                };
                match (op, child(field::ARGUMENT)) {
                    (Some(op), Some(arg)) => ExprKind::Unary {
                        op,
                        arg: Box::new(self.expr(arg, depth + 1)),
                    },
                    _ => ExprKind::Opaque(self.text(node)),
                }
            }
            kind::ASSIGNMENT_EXPRESSION => {
                let op_text = child(field::OPERATOR)
                    .map(|o| self.text(o))
                    .unwrap_or_default();
                let op = if op_text == "=" {
                    None
                } else {
                    match BinaryOp::from_text(op_text.trim_end_matches('=')) {
                        Some(op) => Some(op),
                        None => return self.opaque(node),
                    }
                };
                match (child(field::LEFT), child(field::RIGHT)) {
                    (Some(l), Some(r)) => ExprKind::Assign {
                        op,
                        target: Box::new(self.expr(l, depth + 1)),
                        value: Box::new(self.expr(r, depth + 1)),
                    },
                    _ => ExprKind::Opaque(self.text(node)),
                }
            }
            kind::UPDATE_EXPRESSION => {
                let op_text = child(field::OPERATOR)
                    .map(|o| self.text(o))
                    .unwrap_or_default();
                match child(field::ARGUMENT) {
                    Some(arg) => ExprKind::IncDec {
                        target: Box::new(self.expr(arg, depth + 1)),
                        increment: op_text == "++",
                    },
                    None => ExprKind::Opaque(self.text(node)),
                }
            }
            kind::CAST_EXPRESSION => {
                let ty = child(field::TYPE)
                    .map(|t| self.type_descriptor(t))
                    .unwrap_or(CType::Unknown("?".into()));
                match child(field::VALUE) {
                    Some(v) => ExprKind::Cast {
                        ty,
                        arg: Box::new(self.expr(v, depth + 1)),
                    },
                    None => ExprKind::Opaque(self.text(node)),
                }
            }
            kind::CALL_EXPRESSION => {
                let callee = match child(field::FUNCTION) {
                    Some(f) => self.expr(f, depth + 1),
                    None => return self.opaque(node),
                };
                let args = child(field::ARGUMENTS)
                    .map(|a| {
                        named_children(a)
                            .filter(|c| c.kind() != kind::COMMENT)
                            .map(|c| self.expr(c, depth + 1))
                            .collect::<Vec<Expr>>()
                    })
                    .unwrap_or_default();
                let args = std::sync::Arc::new(args);
                ExprKind::Call {
                    callee: Box::new(callee),
                    args,
                }
            }
            kind::FIELD_EXPRESSION => {
                let arrow = child(field::OPERATOR)
                    .map(|o| self.text(o) == "->")
                    .unwrap_or(false);
                match (child(field::ARGUMENT), child(field::FIELD)) {
                    (Some(base), Some(field)) => ExprKind::Field {
                        base: Box::new(self.expr(base, depth + 1)),
                        arrow,
                        field: self.name(field),
                    },
                    _ => ExprKind::Opaque(self.text(node)),
                }
            }
            kind::SUBSCRIPT_EXPRESSION => match (child(field::ARGUMENT), child(field::INDEX)) {
                (Some(base), Some(index)) => ExprKind::Index {
                    base: Box::new(self.expr(base, depth + 1)),
                    index: Box::new(self.expr(index, depth + 1)),
                },
                _ => ExprKind::Opaque(self.text(node)),
            },
            kind::CONDITIONAL_EXPRESSION => {
                match (
                    child(field::CONDITION),
                    child(field::CONSEQUENCE),
                    child(field::ALTERNATIVE),
                ) {
                    (Some(c), Some(t), Some(o)) => ExprKind::Conditional {
                        cond: Box::new(self.expr(c, depth + 1)),
                        then: Box::new(self.expr(t, depth + 1)),
                        otherwise: Box::new(self.expr(o, depth + 1)),
                    },
                    _ => ExprKind::Opaque(self.text(node)),
                }
            }
            kind::COMMA_EXPRESSION => {
                let mut items = Vec::new();
                let mut current = node;
                for _ in 0..1000 {
                    match (
                        field_child(current, field::LEFT),
                        field_child(current, field::RIGHT),
                    ) {
                        (Some(l), Some(r)) => {
                            items.push(self.expr(l, depth + 1));
                            if r.kind() == kind::COMMA_EXPRESSION {
                                current = r;
                            } else {
                                items.push(self.expr(r, depth + 1));
                                break;
                            }
                        }
                        _ => break,
                    }
                }
                ExprKind::Comma(items)
            }
            _ => {
                if node.has_error() {
                    self.note_error(node);
                }
                ExprKind::Opaque(self.text(node))
            }
        };
        Expr::new(kind, span)
    }

    fn type_descriptor(&mut self, node: Node) -> CType {
        if node.kind() != kind::TYPE_DESCRIPTOR {
            return CType::Unknown(self.text(node));
        }
        let mut ty = field_child(node, field::TYPE)
            .map(|t| self.type_of(t))
            .unwrap_or(CType::Unknown("?".into()));
        let mut declarator = field_child(node, field::DECLARATOR);
        for _ in 0..16 {
            let Some(d) = declarator else { break };
            match d.kind() {
                kind::ABSTRACT_POINTER_DECLARATOR => ty = CType::Pointer(Box::new(ty)),
                kind::ABSTRACT_ARRAY_DECLARATOR => ty = CType::Array(Box::new(ty), None),
                _ => break,
            }
            declarator = field_child(d, field::DECLARATOR);
        }
        ty
    }
}

#[derive(Default)]
struct Specifiers {
    is_static: bool,
    is_const: bool,
    is_extern: bool,
}

/// Removes comments and line continuations from a macro's replacement text.
fn strip_macro_body(body: &str) -> String {
    let mut out = String::with_capacity(body.len());
    let bytes: Vec<char> = body.chars().collect();
    let mut i = 0;
    while i < bytes.len() {
        let c = bytes[i];
        if c == '/' && bytes.get(i + 1) == Some(&'*') {
            i += 2;
            while i + 1 < bytes.len() && !(bytes[i] == '*' && bytes[i + 1] == '/') {
                i += 1;
            }
            i += 2;
            out.push(' ');
            continue;
        }
        if c == '/' && bytes.get(i + 1) == Some(&'/') {
            while i < bytes.len() && bytes[i] != '\n' {
                i += 1;
            }
            continue;
        }
        if c == '\\' && matches!(bytes.get(i + 1), Some('\n') | Some('\r')) {
            i += 1;
            continue;
        }
        out.push(c);
        i += 1;
    }
    out.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Maps a type name to the type it means on the target. `int` keeps its target-dependent
/// width; typedef names are left for `index` to resolve.
pub fn type_from_name(text: &str) -> CType {
    let words: Vec<&str> = text.split_whitespace().collect();
    let fixed = |bits: u8, signed: bool| CType::FixedInt(IntType { bits, signed });
    let name = words.join(" ");
    match name.as_str() {
        "float" | "float32_t" | "float32" => return CType::Float,
        "double" | "long double" | "float64_t" => return CType::Double,
        "_Bool" | "bool" => return CType::Bool,
        "void" => return CType::Void,
        "int8_t" | "int_least8_t" | "int_fast8_t" | "s8" | "i8" => return fixed(8, true),
        "uint8_t" | "uint_least8_t" | "uint_fast8_t" | "u8" | "byte" => return fixed(8, false),
        "int16_t" | "int_least16_t" | "s16" | "i16" | "q15_t" => return fixed(16, true),
        "uint16_t" | "uint_least16_t" | "u16" => return fixed(16, false),
        "int32_t" | "int_least32_t" | "s32" | "i32" | "q31_t" => return fixed(32, true),
        "uint32_t" | "uint_least32_t" | "u32" => return fixed(32, false),
        "int64_t" | "int_least64_t" | "s64" | "i64" => return fixed(64, true),
        "uint64_t" | "uint_least64_t" | "u64" => return fixed(64, false),
        _ => {}
    }
    let unsigned = words.contains(&"unsigned");
    let longs = words.iter().filter(|w| **w == "long").count();
    if words.contains(&"char") {
        return fixed(8, !unsigned);
    }
    if words.contains(&"short") {
        return fixed(16, !unsigned);
    }
    if longs >= 2 {
        return fixed(64, !unsigned);
    }
    if longs == 1 {
        return fixed(32, !unsigned);
    }
    if words
        .iter()
        .all(|w| matches!(*w, "int" | "signed" | "unsigned"))
        && !words.is_empty()
    {
        return CType::PlainInt { signed: !unsigned };
    }
    if words.len() == 1 {
        return CType::Named(name);
    }
    CType::Unknown(name)
}

/// Parses a C integer literal: value, unsigned suffix, long suffix.
fn parse_int_literal(text: &str) -> Option<(u128, bool, bool)> {
    let t = text.replace('\'', "");
    let lower = t.to_ascii_lowercase();
    let digits_end = lower.trim_end_matches(['u', 'l']).len();
    let (digits, suffix) = lower.split_at(digits_end);
    let unsigned = suffix.contains('u');
    let long = suffix.contains('l');
    let value = if let Some(hex) = digits.strip_prefix("0x") {
        u128::from_str_radix(hex, 16).ok()?
    } else if let Some(bin) = digits.strip_prefix("0b") {
        u128::from_str_radix(bin, 2).ok()?
    } else if digits.len() > 1 && digits.starts_with('0') {
        u128::from_str_radix(&digits[1..], 8).ok()?
    } else {
        digits.parse::<u128>().ok()?
    };
    Some((value, unsigned, long))
}

pub(crate) fn parse_number(text: &str) -> Option<ExprKind> {
    let lower = text.to_ascii_lowercase().replace('\'', "");
    let is_hex = lower.starts_with("0x");
    let is_float = if is_hex {
        lower.contains('.') || lower.contains('p')
    } else {
        lower.contains('.') || lower.contains('e') || lower.ends_with('f')
    };
    if !is_float {
        let (value, unsigned, long) = parse_int_literal(&lower)?;
        // Wider than any C integer type: the constant has no type (C11 6.4.4.1p6).
        let value = u64::try_from(value).ok()?;
        return Some(ExprKind::Int {
            value,
            unsigned,
            long,
        });
    }
    let single = lower.ends_with('f');
    let body = lower.trim_end_matches(['f', 'l']);
    let value = if is_hex {
        parse_hex_float(body)?
    } else {
        body.parse::<f64>().ok()?
    };
    Some(ExprKind::Float { value, single })
}

fn parse_hex_float(text: &str) -> Option<f64> {
    let body = text.strip_prefix("0x")?;
    let (mantissa, exponent) = match body.split_once('p') {
        Some((m, e)) => (m, e.parse::<i32>().ok()?),
        None => (body, 0),
    };
    let (int_part, frac_part) = mantissa.split_once('.').unwrap_or((mantissa, ""));
    let mut value = 0f64;
    for c in int_part.chars() {
        value = value * 16.0 + c.to_digit(16)? as f64;
    }
    let mut scale = 1.0 / 16.0;
    for c in frac_part.chars() {
        value += c.to_digit(16)? as f64 * scale;
        scale /= 16.0;
    }
    Some(value * 2f64.powi(exponent))
}

#[cfg(test)]
mod tests {

    #[test]
    fn a_snippet_parsed_once_is_the_snippet_parsed_where_it_is_used() {
        let snippets = Snippets::default();
        let mut checked = 0;
        // Bodies with spans the relocation leaves (array sizes in types, initialisers).
        for text in [
            "int vent_buf[VENT_N] = {1, 2}",
            "vent_y = (float (*)[VENT_N])vent_p",
            "static const short vent_k[2][VENT_N] = {{1}, {2}}; vent_y += vent_k[0][1]",
        ] {
            for file in [FileId(3), FileId(5)] {
                let anchor = Span {
                    file,
                    start: 40,
                    end: 60,
                    line: 7,
                    column: 9,
                };
                assert_eq!(
                    format!("{:?}", snippets.statements(text, anchor)),
                    format!("{:?}", parse_statements(text, anchor)),
                    "{text}"
                );
                assert_eq!(
                    format!("{:?}", snippets.expression(text, anchor)),
                    format!("{:?}", parse_expression(text, anchor)),
                    "{text}"
                );
            }
        }
        for (path, bytes) in crate::fixture_sources() {
            let ir = parse_file(FileId(2), &bytes);
            // Each body at its own definition and again as another file's (a memo hit).
            for m in &ir.macros {
                let elsewhere = Span {
                    file: FileId(9),
                    line: m.span.line + 1,
                    ..m.span
                };
                for anchor in [m.span, elsewhere] {
                    assert_eq!(
                        format!("{:?}", snippets.expression(&m.body, anchor)),
                        format!("{:?}", parse_expression(&m.body, anchor)),
                        "{path}: {}",
                        m.name
                    );
                    assert_eq!(
                        format!("{:?}", snippets.statements(&m.body, anchor)),
                        format!("{:?}", parse_statements(&m.body, anchor)),
                        "{path}: {}",
                        m.name
                    );
                    checked += 1;
                }
            }
        }
        assert!(checked > 400, "only {checked} macro bodies");
    }

    #[test]
    fn each_variant_parsed_by_its_edits_is_the_fresh_parse_of_its_text() {
        // Every node with its kind and place, so that a tree with the same shape in other
        // places differs.
        fn nodes(tree: &Tree) -> Vec<(String, usize, usize, usize, usize)> {
            let mut out = Vec::new();
            let mut cursor = tree.walk();
            loop {
                let n = cursor.node();
                let p = n.start_position();
                out.push((
                    n.kind().to_string(),
                    n.start_byte(),
                    n.end_byte(),
                    p.row,
                    p.column,
                ));
                if cursor.goto_first_child() || cursor.goto_next_sibling() {
                    continue;
                }
                loop {
                    if !cursor.goto_parent() {
                        return out;
                    }
                    if cursor.goto_next_sibling() {
                        break;
                    }
                }
            }
        }
        let mut texts = crate::fixture_sources();
        // Written here too: conditionals that split statements, in a kiln's controller.
        texts.push((
            "kiln.c".into(),
            b"static float kiln_t;\nvoid kiln_step(float u, int mode)\n{\n#ifdef KILN_FAST\n    if (mode) {\n#else\n    if (mode > 1) {\n#endif\n        kiln_t += 0.2f * (u - kiln_t);\n    }\n    mode++;\n}\nint kiln_other(int a) { return a + 1; }\n"
                .to_vec(),
        ));
        texts.push((
            "kiln2.c".into(),
            b"static int kiln_raw;\nvoid kiln_read(int v)\n{\n    if (v > 0) {\n        kiln_raw = v;\n#if KILN_REV > 2\n    } else if (v < -5) {\n#else\n    } else {\n#endif\n        kiln_raw = 0;\n    }\n    kiln_raw += (v - kiln_raw) >> 2;\n}\n"
                .to_vec(),
        ));
        let (mut branches, mut casts) = (0, 0);
        for (name, bytes) in &texts {
            let Some(tree) = parse_tree(bytes) else {
                continue;
            };
            let fresh = |b: &[u8]| parse_tree(b).map(|t| nodes(&t));
            if let Some((out, edited, _)) = first_branches_variant(bytes, &tree) {
                assert_eq!(Some(nodes(&edited)), fresh(&out), "{name}");
                branches += 1;
            }
            if let Some((out, edited)) = variable_casts_variant(bytes, &tree) {
                assert_eq!(Some(nodes(&edited)), fresh(&out), "{name}");
                casts += 1;
            }
        }
        assert!(
            branches >= 2 && casts >= 1,
            "{branches} branch variants, {casts} cast variants"
        );
    }

    #[test]
    fn only_constants_commas_braces_and_comments_make_a_table() {
        let table = b"/* gains */\n  0x1F, -3, 2.5e-3f, 1e+2,\n  'a', \"b\\\"c\", // end\n  { 07, 0b101 }, 5u\n";
        assert!(is_constant_table(table));
        assert!(is_constant_table(b"1, 2"));
        let lowered = parse_file(FileId(4), table);
        assert!(lowered.problems.is_empty());
        assert!(lowered.functions.is_empty() && lowered.macros.is_empty());
        for not_table in [
            &b""[..],
            b"/* only a comment */\n",
            b"42\n",
            b"1, 2, THREE,\n",
            b"#define K 3\n1, 2,\n",
            b"1, 2;\n",
            b"int t[] = { 1, 2 };\n",
            b"1, (2), 3\n",
            b"1, 2 /* unclosed",
            b"'a, 2\n",
        ] {
            assert!(
                !is_constant_table(not_table),
                "{}",
                String::from_utf8_lossy(not_table)
            );
        }
    }

    #[test]
    fn bare_macro_lines_in_bodies_are_ended_and_nothing_else_moves() {
        let src = b"void f(void)\n{\n    ENTER_CRITICAL()\n    y += (u - y) >> 2;\n    SMOOTH_FLOW\n    n++;\n}\nstruct s {\n    FIELDS\n    int x;\n};\nint *p = (int[]){\n    ONE\n};\n";
        let out = terminate_bare_macro_lines(src);
        let text = String::from_utf8_lossy(&out);
        assert_eq!(out.len(), src.len());
        assert!(text.contains("\n   ENTER_CRITICAL();\n"), "{text}");
        assert!(text.contains("\n   SMOOTH_FLOW;\n"), "{text}");
        // A struct body and a compound literal are data, not code.
        assert!(text.contains("\n    FIELDS\n"), "{text}");
        assert!(text.contains("\n    ONE\n"), "{text}");
        assert_eq!(
            text.lines().count(),
            String::from_utf8_lossy(src).lines().count()
        );
    }
    use super::*;

    /// The right-hand side of the first assignment in `f`'s body, as C text.
    fn first_assigned(src: &str) -> String {
        let ir = parse_file(FileId(0), src.as_bytes());
        let f = ir.functions.iter().find(|f| f.name == "f").expect("f");
        let found = f.body().iter().find_map(|s| match s {
            Stmt::Expr(Expr {
                kind: ExprKind::Assign { value, .. },
                ..
            }) => Some(value.to_string()),
            _ => None,
        });
        found.expect("an assignment")
    }

    #[test]
    fn a_parenthesised_variable_before_a_sign_is_no_cast() {
        // C11 6.5.4: `(T) -x` is a cast only when T names a type.
        let src =
            "float y;\nvoid f(float u) {\n    float a = 0.1f;\n    y = u*(a) + y*(1.0f - a);\n}\n";
        assert_eq!(first_assigned(src), "u * a + y * (1.0f - a)");
        let src =
            "typedef int gain_t;\nint y;\nvoid f(int u) {\n    y = u*(gain_t) + y*(2 - u);\n}\n";
        let text = first_assigned(src);
        assert!(text.contains("(gain_t)"), "{text}");
    }

    #[test]
    fn a_conditional_that_splits_an_if_else_is_read_through_its_first_branch() {
        let src = "float y, z;\nvoid f(float u, int ok) {\n#ifdef HAVE_Z\n    if (ok) {\n        z = u;\n    } else\n#endif\n    {\n        y += 0.5f * (u - y);\n    }\n}\n";
        let ir = parse_file(FileId(0), src.as_bytes());
        // The branch not read is said, at the conditional's line.
        assert_eq!(ir.problems.len(), 1, "{:?}", ir.problems);
        assert_eq!(ir.problems[0].span.line, 3);
        let f = ir.functions.iter().find(|f| f.name == "f").expect("f");
        assert!(matches!(
            f.body().first(),
            Some(Stmt::If {
                otherwise: Some(_),
                ..
            })
        ));
        // After `#if 0` the second branch is the one built.
        let src = "float y;\nvoid f(float u, int ok) {\n#if 0\n    if (ok) { y = u;\n#else\n    if (ok) { y += 0.5f * (u - y);\n#endif\n    }\n}\n";
        let ir = parse_file(FileId(0), src.as_bytes());
        let f = ir.functions.iter().find(|f| f.name == "f").expect("f");
        let body = f.body();
        let Some(Stmt::If { then, .. }) = body.first() else {
            panic!("{:?}", f.body);
        };
        let text = format!("{then:?}");
        assert!(text.contains("Some(Add)"), "{text}");
    }

    #[test]
    fn enum_bodies_in_functions_and_type_macros_are_left_alone() {
        let src = b"void f(void)\n{\n    enum {\n        ONLY_MODE\n    };\n}\n";
        let out = terminate_bare_macro_lines(src);
        assert!(String::from_utf8_lossy(&out).contains("\n        ONLY_MODE\n"));
        // `(REAL) -raw` with `#define REAL float` stays a cast.
        let src = "#define REAL float\nfloat y;\nvoid f(float raw) {\n    y = y*0.9f + (REAL) -raw*0.1f;\n}\n";
        let text = first_assigned(src);
        assert!(text.contains("(REAL)"), "{text}");
    }

    #[test]
    fn an_integer_literal_wider_than_64_bits_has_no_value() {
        // C11 6.4.4.1p6: a constant no integer type can represent has no type.
        assert!(parse_number("18446744073709551615u").is_some());
        assert!(parse_number("18446744073709551616").is_none());
        assert!(parse_number("0x1ffffffffffffffff").is_none());
    }

    #[test]
    fn every_field_name_is_one_of_the_grammar() {
        let language: tree_sitter::Language = tree_sitter_c::LANGUAGE.into();
        for name in field::NAMES {
            assert!(
                language.field_id_for_name(name).is_some(),
                "`{name}` is not a field of tree-sitter-c"
            );
        }
    }

    fn one_function(src: &str) -> Function {
        let ir = parse_file(FileId(0), src.as_bytes());
        assert!(ir.problems.is_empty(), "{:?}", ir.problems);
        ir.functions.into_iter().next().unwrap()
    }

    #[test]
    fn lowers_compound_assignment_with_spans() {
        let f = one_function("void f(int u) {\n  static int y;\n  y += (u - y) >> 3;\n}\n");
        let Stmt::Expr(e) = &f.body()[1] else {
            panic!("expected expression, got {:?}", f.body()[1])
        };
        assert_eq!(e.to_string(), "y += (u - y) >> 3");
        assert_eq!(e.span.line, 3);
        assert_eq!(e.span.column, 3);
        let Stmt::Decl(d) = &f.body()[0] else {
            panic!()
        };
        assert!(d[0].is_static);
    }

    #[test]
    fn number_literals_follow_c_spelling() {
        assert_eq!(
            parse_number("0x10u"),
            Some(ExprKind::Int {
                value: 16,
                unsigned: true,
                long: false
            })
        );
        assert_eq!(
            parse_number("010"),
            Some(ExprKind::Int {
                value: 8,
                unsigned: false,
                long: false
            })
        );
        assert_eq!(
            parse_number("0.5f"),
            Some(ExprKind::Float {
                value: 0.5,
                single: true
            })
        );
        assert_eq!(
            parse_number("1e-3"),
            Some(ExprKind::Float {
                value: 0.001,
                single: false
            })
        );
        assert_eq!(
            parse_number("0x1p-3"),
            Some(ExprKind::Float {
                value: 0.125,
                single: false
            })
        );
    }

    #[test]
    fn macros_record_their_preprocessor_branch() {
        let src = "#ifdef FAST\n#define K 3\n#else\n#define K 5\n#endif\n#define SQ(x) ((x)*(x))\n";
        let ir = parse_file(FileId(0), src.as_bytes());
        assert_eq!(ir.macros.len(), 3);
        assert_eq!(ir.macros[0].condition.to_string(), "defined(FAST)");
        assert_eq!(ir.macros[1].condition.to_string(), "!(defined(FAST))");
        assert_eq!(ir.macros[2].params, Some(vec!["x".to_string()]));
        assert_eq!(&*ir.macros[2].body, "((x)*(x))");
    }

    #[test]
    fn struct_fields_and_typedefs_are_lowered() {
        let src = "typedef struct { float k; float y; } lpf_t;\nstruct kiln { int16_t t[4]; };\n";
        let ir = parse_file(FileId(0), src.as_bytes());
        assert_eq!(ir.structs.len(), 2);
        assert_eq!(ir.structs[0].fields.len(), 2);
        assert_eq!(ir.typedefs[0].0, "lpf_t");
        assert!(
            matches!(&ir.structs[1].fields[0].ty, CType::Array(_, Some(n)) if n.to_string() == "4")
        );
    }

    #[test]
    fn expression_snippets_parse() {
        let e = parse_expression("(y) += ((u) - (y)) >> (3)", Span::default()).unwrap();
        assert_eq!(e.to_string(), "y += (u - y) >> 3");
    }

    #[test]
    fn comments_inside_defines_do_not_break_them() {
        let src = "#define K (3 /* counts */)\n#define J 4 // per tick\n/* a tauscan: tag kept */\nint x;\n";
        let ir = parse_file(FileId(0), src.as_bytes());
        assert!(ir.problems.is_empty(), "{:?}", ir.problems);
        assert_eq!(&*ir.macros[0].body, "(3 )");
        assert_eq!(&*ir.macros[1].body, "4");
        assert_eq!(ir.tags.len(), 1);
    }

    #[test]
    fn broken_c_is_reported_not_fatal() {
        let ir = parse_file(
            FileId(0),
            b"void f( { y += ; }}}\n int g(void) { return 1; }",
        );
        assert!(!ir.problems.is_empty());
    }
}
