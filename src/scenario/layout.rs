//! Saving a scenario without losing what the user wrote around its values: comments, line
//! breaks, one-line conditions, the order and spelling of fields. The file as it stands is
//! parsed into a tree of spans (structs, lists, atoms); the scenario as the file reads and as
//! it is now are printed and parsed the same way; where a value differs, only its text is
//! rewritten, recursively (a changed pin value rewrites one number; an added corridor is one
//! new line). The result is read back: unless it gives exactly the new scenario, the plainly
//! printed text is written instead.

use std::ops::Range;
use std::path::Path;

use super::{ScenarioFile, parse, to_text};
use crate::report::write_atomic;

/// The text to save for `new` over a file whose text is `original`: the original with only
/// the changed values rewritten, or the plainly printed text when `original` cannot be read
/// or the rewritten text would not read back as `new`.
pub fn save_text(original: Option<&str>, new: &ScenarioFile) -> String {
    let fresh = to_text(new);
    let Some(original) = original else {
        return fresh;
    };
    let here = std::path::Path::new("scenario.ron");
    let Ok(old) = parse(original, here) else {
        return fresh;
    };
    if old == *new {
        return original.to_string();
    }
    let printed = to_text(&old);
    let trees = (tree(original), tree(&printed), tree(&fresh));
    let (Some(o), Some(a), Some(b)) = trees else {
        return fresh;
    };
    let texts = Texts {
        o: original,
        a: &printed,
        b: &fresh,
    };
    let mut edits = Vec::new();
    texts.merge(&o, &a, &b, &mut edits);
    let merged = apply(original, edits);
    match parse(&merged, here) {
        Ok(back) if back == *new => merged,
        _ => fresh,
    }
}

/// A value's place in its text.
#[derive(Debug)]
enum Node {
    /// `name(field: value, …)` or `(field: value, …)`.
    Struct {
        span: Range<usize>,
        name: Range<usize>,
        close: usize,
        fields: Vec<Field>,
    },
    /// `[a, b, …]`, or a tuple `name(a, b)`.
    List {
        span: Range<usize>,
        name: Range<usize>,
        open: usize,
        close: usize,
        items: Vec<Item>,
    },
    Atom {
        span: Range<usize>,
    },
}

#[derive(Debug)]
struct Field {
    name: String,
    key: usize,
    node: Node,
    /// Just after the field's comma (or its value, when none follows).
    end: usize,
}

#[derive(Debug)]
struct Item {
    node: Node,
    end: usize,
}

impl Node {
    fn span(&self) -> Range<usize> {
        match self {
            Node::Struct { span, .. } | Node::List { span, .. } | Node::Atom { span } => {
                span.clone()
            }
        }
    }
}

/// The top-level value of a RON text.
fn tree(text: &str) -> Option<Node> {
    let mut p = Parser {
        s: text.as_bytes(),
        i: 0,
    };
    let node = p.value()?;
    p.trivia();
    (p.i == p.s.len()).then_some(node)
}

struct Parser<'a> {
    s: &'a [u8],
    i: usize,
}

impl Parser<'_> {
    fn peek(&self) -> Option<u8> {
        self.s.get(self.i).copied()
    }

    /// Skip white space, comments and `#![…]` attributes.
    fn trivia(&mut self) {
        loop {
            match (self.peek(), self.s.get(self.i + 1)) {
                (Some(c), _) if c.is_ascii_whitespace() => self.i += 1,
                (Some(b'/'), Some(b'/')) => {
                    while self.peek().is_some_and(|c| c != b'\n') {
                        self.i += 1;
                    }
                }
                (Some(b'/'), Some(b'*')) => {
                    let mut depth = 0;
                    while self.i < self.s.len() {
                        if self.s[self.i..].starts_with(b"/*") {
                            depth += 1;
                            self.i += 2;
                        } else if self.s[self.i..].starts_with(b"*/") {
                            depth -= 1;
                            self.i += 2;
                            if depth == 0 {
                                break;
                            }
                        } else {
                            self.i += 1;
                        }
                    }
                }
                (Some(b'#'), Some(b'!')) => {
                    while self.peek().is_some_and(|c| c != b']') {
                        self.i += 1;
                    }
                    self.i += 1;
                }
                _ => return,
            }
        }
    }

    fn ident(&mut self) -> Range<usize> {
        let start = self.i;
        while self
            .peek()
            .is_some_and(|c| c.is_ascii_alphanumeric() || c == b'_')
        {
            self.i += 1;
        }
        start..self.i
    }

    fn value(&mut self) -> Option<Node> {
        self.trivia();
        let start = self.i;
        match self.peek()? {
            b'[' => self.group(start, start..start, b']'),
            b'(' => self.group(start, start..start, b')'),
            b'"' => self.string(start),
            b'r' if matches!(self.s.get(self.i + 1), Some(b'"' | b'#')) => self.raw_string(start),
            c if c.is_ascii_alphabetic() || c == b'_' => {
                let name = self.ident();
                if self.peek() == Some(b'(') {
                    self.group(start, name, b')')
                } else {
                    Some(Node::Atom { span: name })
                }
            }
            _ => {
                while self
                    .peek()
                    .is_some_and(|c| !c.is_ascii_whitespace() && !b",)]}/".contains(&c))
                {
                    self.i += 1;
                }
                (self.i > start).then_some(Node::Atom {
                    span: start..self.i,
                })
            }
        }
    }

    fn string(&mut self, start: usize) -> Option<Node> {
        self.i += 1;
        loop {
            match self.peek()? {
                b'\\' => self.i += 2,
                b'"' => {
                    self.i += 1;
                    return Some(Node::Atom {
                        span: start..self.i,
                    });
                }
                _ => self.i += 1,
            }
        }
    }

    fn raw_string(&mut self, start: usize) -> Option<Node> {
        self.i += 1;
        let hashes = self.s[self.i..].iter().take_while(|&&c| c == b'#').count();
        self.i += hashes;
        (self.peek()? == b'"').then_some(())?;
        self.i += 1;
        let mut end = Vec::with_capacity(hashes + 1);
        end.push(b'"');
        end.extend(std::iter::repeat_n(b'#', hashes));
        while !self.s[self.i..].starts_with(&end) {
            self.i += 1;
            self.peek()?;
        }
        self.i += end.len();
        Some(Node::Atom {
            span: start..self.i,
        })
    }

    /// A bracketed group at the opening bracket: a struct when its first entry is `name:`,
    /// else a list or tuple.
    fn group(&mut self, start: usize, name: Range<usize>, closer: u8) -> Option<Node> {
        let open = self.i;
        self.i += 1;
        self.trivia();
        let save = self.i;
        let key = self.ident();
        self.trivia();
        let is_struct = closer == b')'
            && !key.is_empty()
            && self.peek() == Some(b':')
            && self.s.get(self.i + 1) != Some(&b':');
        self.i = save;
        if is_struct {
            let mut fields = Vec::new();
            loop {
                self.trivia();
                if self.peek()? == closer {
                    break;
                }
                let key = self.ident();
                self.trivia();
                (self.peek()? == b':').then_some(())?;
                self.i += 1;
                let node = self.value()?;
                let end = self.separator(closer)?;
                fields.push(Field {
                    name: String::from_utf8_lossy(&self.s[key.clone()]).into_owned(),
                    key: key.start,
                    node,
                    end,
                });
            }
            let close = self.i;
            self.i += 1;
            Some(Node::Struct {
                span: start..self.i,
                name,
                close,
                fields,
            })
        } else {
            let mut items = Vec::new();
            loop {
                self.trivia();
                if self.peek()? == closer {
                    break;
                }
                let node = self.value()?;
                let end = self.separator(closer)?;
                items.push(Item { node, end });
            }
            let close = self.i;
            self.i += 1;
            Some(Node::List {
                span: start..self.i,
                name,
                open,
                close,
                items,
            })
        }
    }

    /// After a value: a comma (its end returned) or the closer (the value's end returned).
    fn separator(&mut self, closer: u8) -> Option<usize> {
        let after = self.i;
        self.trivia();
        match self.peek()? {
            b',' => {
                self.i += 1;
                Some(self.i)
            }
            c if c == closer => Some(after),
            _ => None,
        }
    }
}

/// The original text and the two printed ones the merge compares.
struct Texts<'a> {
    o: &'a str,
    a: &'a str,
    b: &'a str,
}

type Edit = (Range<usize>, String);

impl Texts<'_> {
    /// Edits of the original `o` that turn the value `a` into `b`, where `o` reads as `a`.
    fn merge(&self, o: &Node, a: &Node, b: &Node, edits: &mut Vec<Edit>) {
        if self.a[a.span()] == self.b[b.span()] {
            return;
        }
        match (o, a, b) {
            (
                Node::Struct {
                    name: on,
                    fields: of,
                    ..
                },
                Node::Struct {
                    name: an,
                    fields: af,
                    ..
                },
                Node::Struct {
                    name: bn,
                    fields: bf,
                    ..
                },
            ) if self.a[an.clone()] == self.b[bn.clone()]
                && self.o[on.clone()] == self.a[an.clone()] =>
            {
                self.merge_fields(o, of, af, bf, edits)
            }
            (
                Node::List {
                    name: on,
                    items: oi,
                    ..
                },
                Node::List {
                    name: an,
                    items: ai,
                    ..
                },
                Node::List {
                    name: bn,
                    items: bi,
                    ..
                },
            ) if oi.len() == ai.len()
                && self.a[an.clone()] == self.b[bn.clone()]
                && self.o[on.clone()] == self.a[an.clone()] =>
            {
                self.merge_items(o, oi, ai, bi, edits)
            }
            _ => edits.push((o.span(), self.value_text(b, o))),
        }
    }

    /// `b`'s text, fitted to where `o` stands: on one line when `o` is, else indented like it.
    fn value_text(&self, b: &Node, o: &Node) -> String {
        let text = &self.b[b.span()];
        if !self.o[o.span()].contains('\n') {
            return compact(text);
        }
        reindent(
            text,
            indent_at(self.b, b.span().start),
            indent_at(self.o, o.span().start),
        )
    }

    fn merge_fields(
        &self,
        o: &Node,
        of: &[Field],
        af: &[Field],
        bf: &[Field],
        edits: &mut Vec<Edit>,
    ) {
        let find = |fields: &'_ [Field], name: &str| -> Option<usize> {
            fields.iter().position(|f| f.name == name)
        };
        let mut added = Vec::new();
        for b in bf {
            match (find(of, &b.name), find(af, &b.name)) {
                (Some(k), Some(j)) => self.merge(&of[k].node, &af[j].node, &b.node, edits),
                (Some(k), None) => {
                    edits.push((of[k].node.span(), self.value_text(&b.node, &of[k].node)))
                }
                (None, Some(j)) if self.a[af[j].node.span()] == self.b[b.node.span()] => {}
                (None, _) => added.push(b),
            }
        }
        for a in af {
            if find(bf, &a.name).is_none()
                && let Some(k) = find(of, &a.name)
            {
                edits.push((self.removal(of[k].key, of[k].end), String::new()));
            }
        }
        if !added.is_empty() {
            let (at, text) = self.insertion(o, of.last().map(|f| (f.node.span().end, f.end)));
            let entries: Vec<String> = added
                .iter()
                .map(|b| {
                    let value = &self.b[b.node.span()];
                    let value = if text.multiline {
                        reindent(value, indent_at(self.b, b.key), text.indent.clone())
                    } else {
                        compact(value)
                    };
                    format!("{}: {value}", b.name)
                })
                .collect();
            edits.push((at..at, text.join(&entries)));
        }
    }

    fn merge_items(&self, o: &Node, oi: &[Item], ai: &[Item], bi: &[Item], edits: &mut Vec<Edit>) {
        let a_texts: Vec<&str> = ai.iter().map(|x| &self.a[x.node.span()]).collect();
        let b_texts: Vec<&str> = bi.iter().map(|x| &self.b[x.node.span()]).collect();
        // Anchors: items unchanged (a longest common subsequence), then the end.
        let mut anchors = common_subsequence(&a_texts, &b_texts);
        anchors.push((ai.len(), bi.len()));
        let (mut ia, mut ib) = (0, 0);
        for (na, nb) in anchors {
            // The unmatched runs a[ia..na] and b[ib..nb]: paired in order (edited in place),
            // the rest removed or added after the last original item kept.
            let paired = (na - ia).min(nb - ib);
            for k in 0..paired {
                self.merge(&oi[ia + k].node, &ai[ia + k].node, &bi[ib + k].node, edits);
            }
            for item in &oi[ia + paired..na] {
                edits.push((
                    self.removal(item.node.span().start, item.end),
                    String::new(),
                ));
            }
            if nb - ib > paired {
                let before = (ia + paired)
                    .checked_sub(1)
                    .map(|k| (oi[k].node.span().end, oi[k].end));
                let (at, text) = self.insertion(o, before);
                // New entries on one line each when their neighbours are.
                let one_line =
                    !oi.is_empty() && oi.iter().all(|x| !self.o[x.node.span()].contains('\n'));
                let entries: Vec<String> = bi[ib + paired..nb]
                    .iter()
                    .map(|b| {
                        let value = &self.b[b.node.span()];
                        if text.multiline && !one_line {
                            reindent(
                                value,
                                indent_at(self.b, b.node.span().start),
                                text.indent.clone(),
                            )
                        } else {
                            compact(value)
                        }
                    })
                    .collect();
                edits.push((at..at, text.join(&entries)));
            }
            (ia, ib) = (na + 1, nb + 1);
        }
    }

    /// The range to delete for an entry from `start` to `end` (after its comma): with the
    /// rest of its line and the comment lines just above it when it stands on lines of its
    /// own.
    fn removal(&self, start: usize, end: usize) -> Range<usize> {
        let s = self.o.as_bytes();
        let line_start = self.o[..start].rfind('\n').map_or(0, |p| p + 1);
        let after = self.o[end..].find('\n').map_or(self.o.len(), |p| end + p);
        let alone_before = self.o[line_start..start].trim().is_empty();
        let rest = self.o[end..after].trim();
        let alone_after = rest.is_empty() || rest.starts_with("//");
        if !(alone_before && alone_after) {
            return start..end;
        }
        // Whole lines, with the comment lines directly above.
        let mut from = line_start;
        while from > 0 {
            let prev_start = self.o[..from - 1].rfind('\n').map_or(0, |p| p + 1);
            if self.o[prev_start..from - 1].trim_start().starts_with("//") {
                from = prev_start;
            } else {
                break;
            }
        }
        let to = if after < s.len() { after + 1 } else { after };
        from..to
    }

    /// Where and how to add entries to the group `o`, after the entry ending at `after`
    /// (`(value end, end after comma)`; none: at the start).
    fn insertion(&self, o: &Node, after: Option<(usize, usize)>) -> (usize, Insert) {
        let (open, close) = match o {
            Node::Struct { span, close, .. } => (
                self.o[span.clone()]
                    .find('(')
                    .map_or(span.start, |p| span.start + p),
                *close,
            ),
            Node::List { open, close, .. } => (*open, *close),
            Node::Atom { span } => (span.start, span.end),
        };
        let multiline = self.o[open..close].contains('\n');
        let needs_comma = after.is_some_and(|(value, end)| value == end);
        if !multiline {
            let at = after.map_or(open + 1, |(_, end)| end);
            let lead = if needs_comma {
                ", "
            } else if after.is_some() {
                " "
            } else {
                ""
            };
            return (
                at,
                Insert {
                    multiline,
                    indent: String::new(),
                    lead: lead.into(),
                    trail: if after.is_none() && close > open + 1 {
                        ", "
                    } else {
                        ""
                    }
                    .into(),
                },
            );
        }
        let indent = format!("{}    ", indent_at(self.o, open));
        let at = match after {
            // At the end of the line of the entry before (after any comment there).
            Some((_, end)) => self.o[end..close].find('\n').map_or(close, |p| end + p),
            None => open + 1,
        };
        (
            at,
            Insert {
                multiline,
                indent,
                lead: if needs_comma { "," } else { "" }.into(),
                trail: String::new(),
            },
        )
    }
}

/// How inserted entries are laid out.
struct Insert {
    multiline: bool,
    indent: String,
    lead: String,
    trail: String,
}

impl Insert {
    fn join(&self, entries: &[String]) -> String {
        if self.multiline {
            let lines: String = entries
                .iter()
                .map(|e| format!("\n{}{e},", self.indent))
                .collect();
            format!("{}{lines}", self.lead)
        } else {
            format!("{}{}{}", self.lead, entries.join(", "), self.trail)
        }
    }
}

/// Pairs `(i, j)` of equal entries in a longest common subsequence, in order.
fn common_subsequence(a: &[&str], b: &[&str]) -> Vec<(usize, usize)> {
    let (n, m) = (a.len(), b.len());
    let mut len = vec![vec![0usize; m + 1]; n + 1];
    for i in (0..n).rev() {
        for j in (0..m).rev() {
            len[i][j] = if a[i] == b[j] {
                len[i + 1][j + 1] + 1
            } else {
                len[i + 1][j].max(len[i][j + 1])
            };
        }
    }
    let (mut i, mut j, mut out) = (0, 0, Vec::new());
    while i < n && j < m {
        if a[i] == b[j] {
            out.push((i, j));
            i += 1;
            j += 1;
        } else if len[i + 1][j] >= len[i][j + 1] {
            i += 1;
        } else {
            j += 1;
        }
    }
    out
}

/// The white space that starts the line holding `at`.
fn indent_at(text: &str, at: usize) -> String {
    let start = text[..at].rfind('\n').map_or(0, |p| p + 1);
    text[start..]
        .chars()
        .take_while(|c| *c == ' ' || *c == '\t')
        .collect()
}

/// Printed text moved from a line indented `from` to one indented `to`.
fn reindent(text: &str, from: String, to: String) -> String {
    let mut lines = text.lines();
    let mut out = lines.next().unwrap_or("").to_string();
    for line in lines {
        out.push('\n');
        out.push_str(&to);
        out.push_str(
            line.strip_prefix(from.as_str())
                .unwrap_or(line.trim_start()),
        );
    }
    out
}

/// Printed text on one line: `[\n 1.0,\n 2.0,\n]` becomes `[1.0, 2.0]`. (Printed strings hold
/// no raw line breaks.)
fn compact(text: &str) -> String {
    let joined = text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join(" ");
    joined
        .replace("[ ", "[")
        .replace("( ", "(")
        .replace(", ]", "]")
        .replace(", )", ")")
        .replace(",]", "]")
        .replace(",)", ")")
}

/// Apply edits (ranges of `text`, none overlapping) from the last to the first.
fn apply(text: &str, mut edits: Vec<Edit>) -> String {
    edits.sort_by(|x, y| y.0.start.cmp(&x.0.start).then(y.0.end.cmp(&x.0.end)));
    let mut out = text.to_string();
    for (range, with) in edits {
        out.replace_range(range, &with);
    }
    out
}

/// Save `file`, a scenario that was at `from`, atomically to `to` (write a temporary file
/// beside it, then rename). The text of the file at `from` is kept wherever its values did
/// not change — comments, line breaks, one-line conditions ([`scenario::layout`]). A relative
/// dataset path is rewritten so that it still points at the same file from the new folder.
/// Returns the file as written.
pub fn write_scenario(
    from: &Path,
    to: &Path,
    file: &ScenarioFile,
) -> std::io::Result<ScenarioFile> {
    let mut file = file.clone();
    file.dataset = rebase(from, to, &file.dataset);
    let original = std::fs::read_to_string(from).ok();
    let text = save_text(original.as_deref(), &file);
    write_atomic(to, text.as_bytes())?;
    Ok(file)
}

/// A dataset path relative to the scenario at `from`, rewritten for a scenario at `to`
/// (absolute paths are kept).
fn rebase(from: &Path, to: &Path, dataset: &str) -> String {
    let ds = Path::new(dataset);
    if ds.is_absolute() {
        return dataset.to_string();
    }
    let from_dir = from.parent().unwrap_or(Path::new("."));
    let to_dir = to.parent().unwrap_or(Path::new("."));
    if same_dir(from_dir, to_dir) {
        return dataset.to_string();
    }
    let target = from_dir.join(ds);
    std::path::absolute(&target)
        .unwrap_or(target)
        .display()
        .to_string()
}

fn same_dir(a: &Path, b: &Path) -> bool {
    let canon = |p: &Path| {
        let p = if p.as_os_str().is_empty() {
            Path::new(".")
        } else {
            p
        };
        std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf())
    };
    canon(a) == canon(b)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo(name: &str) -> String {
        std::fs::read_to_string(
            std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("scenarios-demo")
                .join(name),
        )
        .unwrap()
    }

    fn read(text: &str) -> ScenarioFile {
        parse(text, std::path::Path::new("x.ron")).unwrap()
    }

    /// Lines of `after` not in `before`, and of `before` not in `after`.
    fn changed_lines(before: &str, after: &str) -> (Vec<String>, Vec<String>) {
        let b: Vec<&str> = before.lines().collect();
        let a: Vec<&str> = after.lines().collect();
        (
            a.iter()
                .filter(|l| !b.contains(l))
                .map(|l| l.to_string())
                .collect(),
            b.iter()
                .filter(|l| !a.contains(l))
                .map(|l| l.to_string())
                .collect(),
        )
    }

    #[test]
    fn an_unchanged_scenario_is_written_back_as_it_was() {
        for name in [
            "adverse.ron",
            "baseline.ron",
            "clash.ron",
            "adverse-pins.ron",
        ] {
            let text = demo(name);
            assert_eq!(save_text(Some(&text), &read(&text)), text, "{name}");
        }
    }

    #[test]
    fn a_changed_value_rewrites_that_value_only() {
        let text = demo("adverse.ron");
        let mut file = read(&text);
        file.pins[0].value = 3.75;
        file.seed = 7;
        file.corridors[2].upper = Some(crate::scenario::Bound::Same(2.5));
        let saved = save_text(Some(&text), &file);
        assert_eq!(read(&saved), file);
        let (added, removed) = changed_lines(&text, &saved);
        assert_eq!(added.len(), 3, "{added:#?}");
        assert_eq!(removed.len(), 3, "{removed:#?}");
        assert!(added.iter().any(|l| l.contains("value: 3.75")));
        assert!(added.iter().any(|l| l.trim() == "seed: 7,"));
        assert!(added.iter().any(|l| l.contains("upper: 2.5)")));
        // Every comment is still there.
        for line in text.lines().filter(|l| l.trim_start().starts_with("//")) {
            assert!(saved.contains(line), "comment lost: {line}");
        }
    }

    #[test]
    fn added_and_removed_conditions_keep_the_rest_of_the_file() {
        let text = demo("adverse.ron");
        let mut file = read(&text);
        let extra = file.corridors[1].clone();
        file.corridors.remove(0);
        file.corridors.push(crate::scenario::CorridorSpec {
            from: "2028Q1".into(),
            to: "2028Q2".into(),
            ..extra
        });
        file.pins.truncate(1);
        file.reweight = true;
        let saved = save_text(Some(&text), &file);
        assert_eq!(read(&saved), file, "{saved}");
        // The removed corridor's comment went with it; the others stayed.
        assert!(!saved.contains("House prices keep falling"));
        assert!(saved.contains("Unemployment rises into a band"));
        assert!(saved.contains("The policy rate is cut"));
        // Each new entry is one line, indented like its neighbours.
        assert!(
            saved.contains("\n        (series: \"unemployment\", from: \"2028Q1\""),
            "{saved}"
        );
        assert!(saved.contains("\n    reweight: true,"), "{saved}");
        let (added, _) = changed_lines(&text, &saved);
        assert_eq!(added.len(), 2, "{added:#?}");
    }

    #[test]
    fn a_file_that_cannot_be_read_is_replaced_by_the_printed_text() {
        let file = read(&demo("adverse.ron"));
        assert_eq!(save_text(Some("(name: "), &file), to_text(&file));
        assert_eq!(save_text(None, &file), to_text(&file));
    }
}
