//! From a byte offset in the file to the key path it lies in.
//!
//! toml reports a serde error (unknown key, wrong type, missing key) with the byte span of the key or
//! value at fault, but not with the path of keys that leads there. The file is therefore also read
//! into a schema-free tree that keeps the span of every key and value; the deepest entry whose span
//! holds the error's offset gives the path. The tree is built once per load and the files are small,
//! so a linear search is plenty.

use super::key::KeyPath;
use serde::de::{Deserialize, Deserializer, MapAccess, SeqAccess, Visitor};
use std::fmt;
use std::ops::Range;
use toml::Spanned;

/// A TOML value with the spans of its parts, and nothing else of its content but strings (used to
/// label machines with their ids).
#[derive(Debug)]
pub(super) enum Node {
    /// A table: its keys and values, each with its span.
    Table(Vec<(Spanned<String>, Spanned<Node>)>),
    /// An array.
    Array(Vec<Spanned<Node>>),
    /// A string.
    Str(String),
    /// Any other scalar.
    Other,
}

struct NodeVisitor;

impl<'de> Visitor<'de> for NodeVisitor {
    type Value = Node;

    fn expecting(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str("any TOML value")
    }

    fn visit_bool<E>(self, _: bool) -> Result<Node, E> {
        Ok(Node::Other)
    }

    fn visit_i64<E>(self, _: i64) -> Result<Node, E> {
        Ok(Node::Other)
    }

    fn visit_u64<E>(self, _: u64) -> Result<Node, E> {
        Ok(Node::Other)
    }

    fn visit_f64<E>(self, _: f64) -> Result<Node, E> {
        Ok(Node::Other)
    }

    fn visit_str<E>(self, s: &str) -> Result<Node, E> {
        Ok(Node::Str(s.to_string()))
    }

    fn visit_string<E>(self, s: String) -> Result<Node, E> {
        Ok(Node::Str(s))
    }

    fn visit_seq<A: SeqAccess<'de>>(self, mut seq: A) -> Result<Node, A::Error> {
        let mut items = Vec::new();
        while let Some(item) = seq.next_element::<Spanned<Node>>()? {
            items.push(item);
        }
        Ok(Node::Array(items))
    }

    fn visit_map<A: MapAccess<'de>>(self, mut map: A) -> Result<Node, A::Error> {
        let mut entries = Vec::new();
        while let Some(key) = map.next_key::<Spanned<String>>()? {
            let value = map.next_value::<Spanned<Node>>()?;
            entries.push((key, value));
        }
        Ok(Node::Table(entries))
    }
}

impl<'de> Deserialize<'de> for Node {
    fn deserialize<D: Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        d.deserialize_any(NodeVisitor)
    }
}

fn contains(span: &Range<usize>, pos: usize) -> bool {
    span.start <= pos && pos < span.end.max(span.start + 1)
}

/// The best location found so far: the deepest path, then the narrowest span.
struct Best {
    path: KeyPath,
    width: usize,
}

impl Best {
    fn offer(&mut self, path: &KeyPath, span: &Range<usize>) {
        let width = span.end.saturating_sub(span.start);
        let deeper = path.depth() > self.path.depth();
        let same_narrower = path.depth() == self.path.depth() && width < self.width;
        if deeper || same_narrower {
            self.path = path.clone();
            self.width = width;
        }
    }
}

/// The id of a table, if it has a string `id` key.
fn id_of(node: &Node) -> Option<&str> {
    match node {
        Node::Table(entries) => entries.iter().find_map(|(k, v)| match v.get_ref() {
            Node::Str(s) if k.get_ref() == "id" => Some(s.as_str()),
            _ => None,
        }),
        _ => None,
    }
}

/// Walks the whole tree (spans of array-of-tables elements need not enclose their keys, so no
/// branch is pruned) and offers every entry whose key or value span holds `pos`.
fn walk(node: &Node, path: &KeyPath, pos: usize, best: &mut Best) {
    match node {
        Node::Table(entries) => {
            for (key, value) in entries {
                let here = path.key(key.get_ref());
                if contains(&key.span(), pos) {
                    best.offer(&here, &key.span());
                }
                if contains(&value.span(), pos) {
                    best.offer(&here, &value.span());
                }
                walk(value.get_ref(), &here, pos, best);
            }
        }
        Node::Array(items) => {
            for (i, item) in items.iter().enumerate() {
                // Only top-level machines are labelled: their id is what the engineer looks for.
                let here = match id_of(item.get_ref()) {
                    Some(id) if path.is_root_key("machine") => path.labelled(i, id),
                    _ => path.index(i),
                };
                if contains(&item.span(), pos) {
                    best.offer(&here, &item.span());
                }
                walk(item.get_ref(), &here, pos, best);
            }
        }
        Node::Str(_) | Node::Other => {}
    }
}

/// The key path of the deepest entry whose span holds byte offset `pos` (the root if none does).
pub(super) fn path_at(root: &Node, pos: usize) -> KeyPath {
    let mut best = Best {
        path: KeyPath::root(),
        width: usize::MAX,
    };
    walk(root, &KeyPath::root(), pos, &mut best);
    best.path
}

/// Line and column (both from 1; the column counted in characters) of byte offset `pos`.
pub(super) fn line_column(text: &str, pos: usize) -> (usize, usize) {
    let mut end = pos.min(text.len());
    while !text.is_char_boundary(end) {
        end -= 1;
    }
    let before = &text[..end];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let column = before[line_start..].chars().count() + 1;
    (line, column)
}
