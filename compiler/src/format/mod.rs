//! The formatter: the one canonical layout of a spec (`reckon fmt`).
//!
//! Layout rules: one statement per line; two-space indentation inside blocks; within
//! a block the `:`, `=` and `~` columns line up (names padded to the longest, units
//! padded where something follows them); one blank line between top-level items
//! (consecutive constants may stay grouped) and at most one (where the author left
//! one) between statements; normalised spacing around operators. Numbers and unit
//! spellings stay exactly as written.
//!
//! Comments are kept in place: a comment on its own line stays on its own line before
//! the same statement (blank lines around it kept); a comment after code stays at the
//! end of that line, aligned with the other trailing comments of its block. A comment
//! written *inside* a statement that the layout puts on one line joins that line's
//! trailing comment, so no comment text is ever lost or reordered.
//!
//! Formatting never changes meaning: the printed tokens are the source's tokens in the
//! same order, only the blanks between them change (see [`print`]). A file that does
//! not parse is refused with its diagnostics.

mod print;

#[cfg(test)]
mod tests;

use crate::diag::{Diagnostic, Span};
use crate::syntax::ast::{
    Comment, CommentKind, File, Item, NoiseBlock, SensorBlock, SensorItem, SharedNoiseKind,
};

/// Spaces per indentation level.
const INDENT: &str = "  ";

/// Spaces between code and a trailing comment, at least.
const COMMENT_GAP: usize = 2;

/// Formats a spec. Returns the parser's diagnostics when the text does not parse
/// (warnings alone do not stop formatting).
pub fn format_source(text: &str) -> Result<String, Vec<Diagnostic>> {
    let (file, diagnostics) = crate::syntax::parse(text);
    match file {
        Some(file) => Ok(crate::syntax::on_big_stack(|| layout(text, &file))),
        None => Err(diagnostics),
    }
}

/// Lays out a parsed file.
fn layout(source: &str, file: &File) -> String {
    let mut printer = Printer {
        source,
        comments: &file.comments,
        next_comment: 0,
        lines: Vec::new(),
        last_end: 0,
        groups: 0,
    };
    let mut previous = None;
    for item in &file.items {
        printer.item(item, previous);
        previous = Some(item);
    }
    printer.leading_comments(source.len(), 0);
    printer.finish()
}

/// One output line.
enum Line {
    Blank,
    Text {
        indent: usize,
        code: String,
        /// Trailing comment text, `//` included.
        trailing: Option<String>,
        /// Lines of one block share a group; their trailing comments align.
        group: Option<usize>,
        /// A block header (`state {`): no blank line may follow it.
        opens_block: bool,
    },
}

/// A statement to lay out: where it is in the source and its formatted code.
struct Row {
    span: Span,
    code: String,
}

struct Printer<'a> {
    source: &'a str,
    comments: &'a [Comment],
    /// Comments before this index are already placed.
    next_comment: usize,
    lines: Vec<Line>,
    /// End of the last source text placed (code or comment).
    last_end: usize,
    /// Alignment groups handed out so far.
    groups: usize,
}

impl Printer<'_> {
    fn item(&mut self, item: &Item, previous: Option<&Item>) {
        // Consecutive constants may stay grouped; every other item gets a blank line.
        let grouped = matches!((previous, item), (Some(Item::Const(_)), Item::Const(_)));
        if !self.lines.is_empty() && !grouped {
            self.blank();
        }
        match item {
            Item::Model(m) => self.statement(m.span, 0, format!("model {}", m.name.name), None),
            Item::Const(c) => {
                let code = format!(
                    "const {} = {}",
                    c.name.name,
                    print::expr(self.source, &c.value)
                );
                self.statement(c.span, 0, code, None);
            }
            Item::State(block) => {
                let rows = self.state_rows(block);
                self.block(block.span, "state".to_string(), rows);
            }
            Item::Input(block) => {
                let rows = self.input_rows(block);
                self.block(block.span, "input".to_string(), rows);
            }
            Item::Motion(block) => {
                let source = self.source;
                let lhs: Vec<String> = block
                    .equations
                    .iter()
                    .map(|eq| {
                        format!(
                            "{}{}",
                            eq.target.name,
                            if eq.prime.is_some() { "'" } else { "" }
                        )
                    })
                    .collect();
                let width = widest(lhs.iter());
                let rows = block
                    .equations
                    .iter()
                    .zip(&lhs)
                    .map(|(eq, lhs)| Row {
                        span: eq.span,
                        code: format!("{} = {}", pad(lhs, width), print::expr(source, &eq.value)),
                    })
                    .collect();
                let kind = match block.kind {
                    crate::syntax::ast::MotionKind::Continuous => "continuous",
                    crate::syntax::ast::MotionKind::Discrete => "discrete",
                };
                self.block(block.span, format!("motion {kind}"), rows);
            }
            Item::Process(block) => {
                let rows = self.noise_rows(block);
                self.block(block.span, "process".to_string(), rows);
            }
            Item::Initial(block) => {
                let rows = self.noise_rows(block);
                self.block(block.span, "initial".to_string(), rows);
            }
            Item::Sensor(sensor) => {
                let rows = self.sensor_rows(sensor);
                let header = self.sensor_header(sensor);
                self.block(sensor.span, header, rows);
            }
        }
    }

    fn state_rows(&self, block: &crate::syntax::ast::StateBlock) -> Vec<Row> {
        let source = self.source;
        let units: Vec<String> = block
            .vars
            .iter()
            .map(|v| print::unit(source, &v.unit))
            .collect();
        let suffixes: Vec<String> = block
            .vars
            .iter()
            .map(|v| {
                let mut parts = Vec::new();
                if v.wrap.is_some() {
                    parts.push("wrap".to_string());
                }
                if let Some(range) = &v.range {
                    let mut text = format!(
                        "in {} .. {}",
                        print::expr(source, &range.lo),
                        print::expr(source, &range.hi)
                    );
                    if let Some(cell) = &range.cell {
                        text.push_str(&format!(" by {}", print::expr(source, cell)));
                    }
                    parts.push(text);
                }
                parts.join(" ")
            })
            .collect();
        let names = widest(block.vars.iter().map(|v| &v.name.name));
        let unit_width = widest(
            units
                .iter()
                .zip(&suffixes)
                .filter(|(_, s)| !s.is_empty())
                .map(|(u, _)| u),
        );
        block
            .vars
            .iter()
            .zip(units.iter().zip(&suffixes))
            .map(|(var, (unit, suffix))| Row {
                span: var.span,
                code: typed(&var.name.name, names, unit, unit_width, suffix),
            })
            .collect()
    }

    fn input_rows(&self, block: &crate::syntax::ast::InputBlock) -> Vec<Row> {
        let source = self.source;
        let units: Vec<String> = block
            .vars
            .iter()
            .map(|v| print::unit(source, &v.unit))
            .collect();
        let noises: Vec<String> = block
            .vars
            .iter()
            .map(|v| {
                v.noise
                    .as_ref()
                    .map_or(String::new(), |d| format!("~ {}", print::dist(source, d)))
            })
            .collect();
        let names = widest(block.vars.iter().map(|v| &v.name.name));
        let unit_width = widest(
            units
                .iter()
                .zip(&noises)
                .filter(|(_, n)| !n.is_empty())
                .map(|(u, _)| u),
        );
        block
            .vars
            .iter()
            .zip(units.iter().zip(&noises))
            .map(|(var, (unit, noise))| Row {
                span: var.span,
                code: typed(&var.name.name, names, unit, unit_width, noise),
            })
            .collect()
    }

    fn noise_rows(&self, block: &NoiseBlock) -> Vec<Row> {
        let names = widest(block.stmts.iter().map(|s| &s.target.name));
        block
            .stmts
            .iter()
            .map(|stmt| Row {
                span: stmt.span,
                code: format!(
                    "{} ~ {}",
                    pad(&stmt.target.name, names),
                    print::dist(self.source, &stmt.dist)
                ),
            })
            .collect()
    }

    fn sensor_header(&self, sensor: &SensorBlock) -> String {
        if sensor.params.is_empty() {
            return format!("sensor {}", sensor.name.name);
        }
        let params: Vec<String> = sensor
            .params
            .iter()
            .map(|p| format!("{}: {}", p.name.name, print::unit(self.source, &p.unit)))
            .collect();
        format!("sensor {}({})", sensor.name.name, params.join(", "))
    }

    /// Components `name : unit [wrap] = expr` and noise `name ~ dist` share the name
    /// column; components also align their `=`.
    fn sensor_rows(&self, sensor: &SensorBlock) -> Vec<Row> {
        let source = self.source;
        let name_of = |item: &SensorItem| -> Option<String> {
            match item {
                SensorItem::Component(c) => Some(c.name.name.clone()),
                SensorItem::ComponentNoise(n) => Some(n.target.name.clone()),
                SensorItem::SharedNoise(_) => Some("noise".to_string()),
                SensorItem::Gate(_) => None,
            }
        };
        let names = widest(
            sensor
                .items
                .iter()
                .filter_map(name_of)
                .collect::<Vec<_>>()
                .iter(),
        );
        let typed_units: Vec<Option<String>> = sensor
            .items
            .iter()
            .map(|item| match item {
                SensorItem::Component(c) => {
                    let unit = print::unit(source, &c.unit);
                    Some(if c.wrap.is_some() {
                        format!("{unit} wrap")
                    } else {
                        unit
                    })
                }
                _ => None,
            })
            .collect();
        let unit_width = widest(typed_units.iter().flatten());
        sensor
            .items
            .iter()
            .zip(&typed_units)
            .map(|(item, unit)| match item {
                SensorItem::Component(c) => Row {
                    span: c.span,
                    code: typed(
                        &c.name.name,
                        names,
                        unit.as_deref().unwrap_or_default(),
                        unit_width,
                        &format!("= {}", print::expr(source, &c.value)),
                    ),
                },
                SensorItem::ComponentNoise(n) => Row {
                    span: n.span,
                    code: format!(
                        "{} ~ {}",
                        pad(&n.target.name, names),
                        print::dist(source, &n.dist)
                    ),
                },
                SensorItem::SharedNoise(n) => {
                    let noise = match &n.kind {
                        SharedNoiseKind::Each(d) => print::dist(source, d),
                        SharedNoiseKind::Covariance(c) => print::covariance(source, c),
                    };
                    Row {
                        span: n.span,
                        code: format!("{} ~ {noise}", pad("noise", names)),
                    }
                }
                SensorItem::Gate(g) => Row {
                    span: g.span,
                    code: format!("gate {}", print::expr(source, &g.value)),
                },
            })
            .collect()
    }

    /// A block: header line, one line per row, closing brace; `name {}` when empty
    /// and comment-free.
    fn block(&mut self, span: Span, header: String, rows: Vec<Row>) {
        let open = open_brace(self.source, span.start).unwrap_or(span.start);
        let close = span.end.saturating_sub(1).max(open);
        let comment_inside = self.comments[self.next_comment..]
            .iter()
            .any(|c| c.span.start > open && c.span.start < close);
        if rows.is_empty() && !comment_inside {
            self.statement(span, 0, format!("{header} {{}}"), None);
            return;
        }
        self.statement(
            Span::new(span.start, open + 1),
            0,
            format!("{header} {{"),
            None,
        );
        if let Some(Line::Text { opens_block, .. }) = self.lines.last_mut() {
            *opens_block = true;
        }
        let group = Some(self.groups);
        self.groups += 1;
        for row in rows {
            self.statement(row.span, 1, row.code, group);
        }
        self.leading_comments(close, 1);
        // No blank line before a closing brace.
        self.last_end = close;
        self.statement(Span::new(close, close + 1), 0, "}".to_string(), None);
    }

    /// Places a statement whose source is `span`: the comments before it on their own
    /// lines, then its code with any comment written inside it or after it on the same
    /// line as the trailing comment.
    fn statement(&mut self, span: Span, indent: usize, code: String, group: Option<usize>) {
        self.leading_comments(span.start, indent);
        self.blank_if_source_has_one(span.start);
        let mut trailing = Vec::new();
        while let Some(comment) = self.comments.get(self.next_comment) {
            let inside = comment.span.start < span.end;
            let after_on_same_line = self
                .source
                .get(span.end..comment.span.start)
                .is_some_and(|gap| gap.chars().all(|c| c.is_whitespace() && c != '\n'));
            if !(inside || after_on_same_line) {
                break;
            }
            trailing.push(comment_text(comment));
            self.last_end = comment.span.end;
            self.next_comment += 1;
        }
        self.last_end = self.last_end.max(span.end);
        self.lines.push(Line::Text {
            indent,
            code,
            trailing: (!trailing.is_empty()).then(|| trailing.join(" ")),
            group,
            opens_block: false,
        });
    }

    /// Places every comment that starts before `limit` on its own line.
    fn leading_comments(&mut self, limit: usize, indent: usize) {
        while let Some(comment) = self.comments.get(self.next_comment) {
            if comment.span.start >= limit {
                break;
            }
            self.blank_if_source_has_one(comment.span.start);
            self.lines.push(Line::Text {
                indent,
                code: comment_text(comment),
                trailing: None,
                group: None,
                opens_block: false,
            });
            self.last_end = comment.span.end;
            self.next_comment += 1;
        }
    }

    /// Keeps one blank line where the author left at least one since the last
    /// placed text, except at the start of the file or of a block.
    fn blank_if_source_has_one(&mut self, next_start: usize) {
        let gap = self
            .source
            .get(self.last_end..next_start)
            .unwrap_or_default();
        let mut pieces: Vec<&str> = gap.split('\n').collect();
        pieces.pop();
        let has_blank = pieces.iter().skip(1).any(|piece| piece.trim().is_empty());
        if has_blank {
            self.blank();
        }
    }

    /// A blank line, unless one is already there or nothing precedes it.
    fn blank(&mut self) {
        match self.lines.last() {
            None
            | Some(Line::Blank)
            | Some(Line::Text {
                opens_block: true, ..
            }) => {}
            Some(Line::Text { .. }) => self.lines.push(Line::Blank),
        }
    }

    fn finish(mut self) -> String {
        while matches!(self.lines.last(), Some(Line::Blank)) {
            self.lines.pop();
        }
        let mut comment_columns = vec![0; self.groups];
        for line in &self.lines {
            if let Line::Text {
                indent,
                code,
                trailing: Some(_),
                group: Some(group),
                ..
            } = line
            {
                let width = indent * INDENT.len() + code.chars().count();
                comment_columns[*group] = comment_columns[*group].max(width);
            }
        }
        let mut out = String::new();
        for line in &self.lines {
            if let Line::Text {
                indent,
                code,
                trailing,
                group,
                ..
            } = line
            {
                let text = format!("{}{code}", INDENT.repeat(*indent));
                out.push_str(&text);
                if let Some(comment) = trailing {
                    let column = group.map_or(0, |g| comment_columns[g]);
                    let gap = column.saturating_sub(text.chars().count()) + COMMENT_GAP;
                    out.push_str(&" ".repeat(gap));
                    out.push_str(comment);
                }
            }
            out.push('\n');
        }
        out
    }
}

/// `name : unit rest` with the name padded to `name_width` and, when `rest` is not
/// empty, the unit padded to `unit_width`.
fn typed(name: &str, name_width: usize, unit: &str, unit_width: usize, rest: &str) -> String {
    if rest.is_empty() {
        format!("{} : {unit}", pad(name, name_width))
    } else {
        format!(
            "{} : {} {rest}",
            pad(name, name_width),
            pad(unit, unit_width)
        )
    }
}

fn pad(text: &str, width: usize) -> String {
    let missing = width.saturating_sub(text.chars().count());
    format!("{text}{}", " ".repeat(missing))
}

fn widest<'s, S: AsRef<str> + 's>(texts: impl Iterator<Item = &'s S>) -> usize {
    texts.map(|t| t.as_ref().chars().count()).max().unwrap_or(0)
}

/// A comment as printed: its slashes and text, trailing blanks removed.
fn comment_text(comment: &Comment) -> String {
    let slashes = match comment.kind {
        CommentKind::Line => "//",
        CommentKind::Doc => "///",
    };
    format!("{slashes}{}", comment.text.trim_end())
}

/// Offset of the first `{` at or after `from` outside comments: the brace opening the
/// block whose header starts at `from` (headers contain no other brace).
fn open_brace(source: &str, from: usize) -> Option<usize> {
    let bytes = source.as_bytes();
    let mut i = from;
    while i < bytes.len() {
        match bytes[i] {
            b'{' => return Some(i),
            b'/' if bytes.get(i + 1) == Some(&b'/') => {
                i = source[i..].find('\n').map_or(bytes.len(), |n| i + n);
            }
            _ => i += 1,
        }
    }
    None
}
