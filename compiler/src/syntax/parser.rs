//! The pest grammar and the walk from its parse tree to the AST.
//!
//! The grammar runs once per top-level item (see [`super::scan::item_starts`]), so
//! every span built here is shifted by the item's offset in the file.

use std::sync::LazyLock;

use pest::iterators::Pair;
use pest::pratt_parser::{Assoc, Op, PrattParser};
use pest::Parser;

use super::ast::*;
use super::scan::MAX_NESTING;
use crate::diag::{codes, Diagnostic, Span};

#[derive(pest_derive::Parser)]
#[grammar = "syntax/grammar.pest"]
pub(super) struct SpecGrammar;

/// Operators added later bind tighter; unary minus comes before `^` so that
/// `-x^2` is `-(x^2)`, as in mathematics.
static PRATT: LazyLock<PrattParser<Rule>> = LazyLock::new(|| {
    PrattParser::new()
        .op(Op::infix(Rule::add, Assoc::Left) | Op::infix(Rule::sub, Assoc::Left))
        .op(Op::infix(Rule::mul, Assoc::Left) | Op::infix(Rule::div, Assoc::Left))
        .op(Op::prefix(Rule::neg))
        .op(Op::infix(Rule::pow, Assoc::Right))
});

/// Parses the top-level item at `offset..end` of `text`.
pub(super) fn parse_item(
    text: &str,
    offset: usize,
    end: usize,
    docs: &mut DocTable,
) -> Built<Item> {
    let mut pairs = SpecGrammar::parse(Rule::chunk, &text[offset..end])
        .map_err(|e| Box::new(super::errors::syntax_error(&e, text, offset)))?;
    let item = pairs
        .next()
        .and_then(|chunk| chunk.into_inner().next())
        .ok_or_else(|| {
            Box::new(Diagnostic::new(
                codes::INTERNAL,
                Span::new(offset, offset),
                "empty parse",
            ))
        })?;
    Builder { offset, docs }.item(item)
}

/// Doc blocks keyed by the offset of the item they precede; items claim theirs.
pub(super) struct DocTable {
    blocks: Vec<(usize, Doc, bool)>,
}

impl DocTable {
    pub(super) fn new(blocks: Vec<(usize, Doc)>) -> DocTable {
        DocTable {
            blocks: blocks
                .into_iter()
                .map(|(at, doc)| (at, doc, false))
                .collect(),
        }
    }

    fn claim(&mut self, at: usize) -> Option<Doc> {
        let entry = self.blocks.iter_mut().find(|(start, _, _)| *start == at)?;
        entry.2 = true;
        Some(entry.1.clone())
    }

    /// Doc blocks no item claimed.
    pub(super) fn unclaimed(&self) -> impl Iterator<Item = &Doc> {
        self.blocks
            .iter()
            .filter(|(_, _, used)| !used)
            .map(|(_, doc, _)| doc)
    }
}

/// Length of `text` once trailing blanks and `//` comments are removed. Exact
/// because the language has no string literals: `//` always starts a comment.
fn code_len(text: &str) -> usize {
    let mut code = text.trim_end();
    loop {
        let line_start = code.rfind('\n').map_or(0, |n| n + 1);
        match code[line_start..].find("//") {
            Some(at) => code = code[..line_start + at].trim_end(),
            None => return code.len(),
        }
    }
}

struct Builder<'d> {
    offset: usize,
    docs: &'d mut DocTable,
}

/// Parse-tree walks stop at the first problem in an item; the diagnostic is boxed
/// to keep the happy path's `Result` small.
type Built<T> = Result<T, Box<Diagnostic>>;

fn children(pair: Pair<'_, Rule>) -> Vec<Pair<'_, Rule>> {
    pair.into_inner().collect()
}

impl Builder<'_> {
    /// The pair's span without the blanks and comments pest lets trail into it.
    fn span(&self, pair: &Pair<'_, Rule>) -> Span {
        let s = pair.as_span();
        let start = self.offset + s.start();
        Span::new(start, start + code_len(s.as_str()))
    }

    fn ident(&self, pair: &Pair<'_, Rule>) -> Ident {
        Ident {
            name: pair.as_str().to_string(),
            span: self.span(pair),
        }
    }

    fn item(&mut self, pair: Pair<'_, Rule>) -> Built<Item> {
        let span = self.span(&pair);
        let rule = pair.as_rule();
        // Of the items, only these carry a doc; a doc before a block header stays
        // unclaimed and is reported as documenting nothing.
        let doc = if matches!(
            rule,
            Rule::model_decl | Rule::const_decl | Rule::sensor_block
        ) {
            self.docs.claim(span.start)
        } else {
            None
        };
        Ok(match rule {
            Rule::model_decl => {
                let parts = children(pair);
                Item::Model(ModelDecl {
                    doc,
                    name: self.ident(&parts[1]),
                    span,
                })
            }
            Rule::const_decl => {
                let mut parts = children(pair).into_iter().skip(1);
                let name = self.next_ident(&mut parts, span)?;
                let value = self.next_expr(&mut parts, span)?;
                Item::Const(ConstDecl {
                    doc,
                    name,
                    value,
                    span,
                })
            }
            Rule::state_block => {
                let mut parts = children(pair).into_iter();
                let keyword = self.keyword_span(&mut parts, span);
                let vars = parts.map(|p| self.state_var(p)).collect::<Built<_>>()?;
                Item::State(StateBlock {
                    vars,
                    keyword,
                    span,
                })
            }
            Rule::input_block => {
                let mut parts = children(pair).into_iter();
                let keyword = self.keyword_span(&mut parts, span);
                let vars = parts.map(|p| self.input_var(p)).collect::<Built<_>>()?;
                Item::Input(InputBlock {
                    vars,
                    keyword,
                    span,
                })
            }
            Rule::motion_block => Item::Motion(self.motion(pair)?),
            Rule::process_block => Item::Process(self.noise_block(pair)?),
            Rule::initial_block => Item::Initial(self.noise_block(pair)?),
            Rule::sensor_block => Item::Sensor(self.sensor(pair, doc)?),
            _ => return Err(self.unexpected(span)),
        })
    }

    fn unexpected(&self, span: Span) -> Box<Diagnostic> {
        Box::new(Diagnostic::new(
            codes::INTERNAL,
            span,
            "the parse tree has an unexpected shape",
        ))
    }

    fn keyword_span<'i>(
        &self,
        parts: &mut impl Iterator<Item = Pair<'i, Rule>>,
        whole: Span,
    ) -> Span {
        parts.next().map_or(whole, |p| self.span(&p))
    }

    fn next_ident<'i>(
        &self,
        parts: &mut impl Iterator<Item = Pair<'i, Rule>>,
        whole: Span,
    ) -> Built<Ident> {
        match parts.next() {
            Some(p) if p.as_rule() == Rule::ident => Ok(self.ident(&p)),
            _ => Err(self.unexpected(whole)),
        }
    }

    fn next_expr<'i>(
        &self,
        parts: &mut impl Iterator<Item = Pair<'i, Rule>>,
        whole: Span,
    ) -> Built<Expr> {
        match parts.next() {
            Some(p) => self.expr(p),
            None => Err(self.unexpected(whole)),
        }
    }

    fn next_unit<'i>(
        &self,
        parts: &mut impl Iterator<Item = Pair<'i, Rule>>,
        whole: Span,
    ) -> Built<Unit> {
        match parts.next() {
            Some(p) => self.unit(p),
            None => Err(self.unexpected(whole)),
        }
    }

    fn state_var(&mut self, pair: Pair<'_, Rule>) -> Built<StateVarDecl> {
        let span = self.span(&pair);
        let doc = self.docs.claim(span.start);
        let mut parts = children(pair).into_iter().peekable();
        let name = self.next_ident(&mut parts, span)?;
        let unit = self.next_unit(&mut parts, span)?;
        let mut wrap = None;
        let mut range = None;
        for part in parts {
            match part.as_rule() {
                Rule::kw_wrap => wrap = Some(self.span(&part)),
                Rule::grid_range => {
                    let range_span = self.span(&part);
                    let mut bounds = children(part)
                        .into_iter()
                        .filter(|p| p.as_rule() == Rule::expr);
                    let lo = self.next_expr(&mut bounds, range_span)?;
                    let hi = self.next_expr(&mut bounds, range_span)?;
                    let cell = bounds.next().map(|p| self.expr(p)).transpose()?;
                    range = Some(GridRangeDecl {
                        lo,
                        hi,
                        cell,
                        span: range_span,
                    });
                }
                _ => return Err(self.unexpected(span)),
            }
        }
        Ok(StateVarDecl {
            doc,
            name,
            unit,
            wrap,
            range,
            span,
        })
    }

    fn input_var(&mut self, pair: Pair<'_, Rule>) -> Built<InputVarDecl> {
        let span = self.span(&pair);
        let doc = self.docs.claim(span.start);
        let mut parts = children(pair).into_iter();
        let name = self.next_ident(&mut parts, span)?;
        let unit = self.next_unit(&mut parts, span)?;
        let noise = parts.next().map(|p| self.dist(p)).transpose()?;
        Ok(InputVarDecl {
            doc,
            name,
            unit,
            noise,
            span,
        })
    }

    fn motion(&mut self, pair: Pair<'_, Rule>) -> Built<MotionBlock> {
        let span = self.span(&pair);
        let mut parts = children(pair).into_iter();
        let keyword = self.keyword_span(&mut parts, span);
        let kind_pair = parts.next().ok_or_else(|| self.unexpected(span))?;
        let kind = match kind_pair.as_rule() {
            Rule::continuous => MotionKind::Continuous,
            Rule::discrete => MotionKind::Discrete,
            _ => return Err(self.unexpected(span)),
        };
        let kind_span = self.span(&kind_pair);
        let equations = parts.map(|p| self.motion_eq(p)).collect::<Built<_>>()?;
        Ok(MotionBlock {
            kind,
            kind_span,
            equations,
            header: keyword.to(kind_span),
            span,
        })
    }

    fn motion_eq(&self, pair: Pair<'_, Rule>) -> Built<MotionEq> {
        let span = self.span(&pair);
        let mut parts = children(pair).into_iter().peekable();
        let target = self.next_ident(&mut parts, span)?;
        let prime = parts
            .next_if(|p| p.as_rule() == Rule::prime)
            .map(|p| self.span(&p));
        let value = self.next_expr(&mut parts, span)?;
        Ok(MotionEq {
            target,
            prime,
            value,
            span,
        })
    }

    fn noise_block(&self, pair: Pair<'_, Rule>) -> Built<NoiseBlock> {
        let span = self.span(&pair);
        let mut parts = children(pair).into_iter();
        let keyword = self.keyword_span(&mut parts, span);
        let stmts = parts.map(|p| self.noise_stmt(p)).collect::<Built<_>>()?;
        Ok(NoiseBlock {
            stmts,
            keyword,
            span,
        })
    }

    fn noise_stmt(&self, pair: Pair<'_, Rule>) -> Built<NoiseStmt> {
        let span = self.span(&pair);
        let mut parts = children(pair).into_iter();
        let target = self.next_ident(&mut parts, span)?;
        let dist = self.dist(parts.next().ok_or_else(|| self.unexpected(span))?)?;
        Ok(NoiseStmt { target, dist, span })
    }

    fn dist(&self, pair: Pair<'_, Rule>) -> Built<DistExpr> {
        let span = self.span(&pair);
        let mut parts = children(pair).into_iter();
        let name = self.next_ident(&mut parts, span)?;
        let args = parts
            .map(|p| {
                if p.as_rule() == Rule::range {
                    let range_span = self.span(&p);
                    let mut bounds = children(p).into_iter();
                    let lo = self.next_expr(&mut bounds, range_span)?;
                    let hi = self.next_expr(&mut bounds, range_span)?;
                    Ok(DistArg::Range {
                        lo,
                        hi,
                        span: range_span,
                    })
                } else {
                    self.expr(p).map(DistArg::Value)
                }
            })
            .collect::<Built<_>>()?;
        Ok(DistExpr { name, args, span })
    }

    fn sensor(&mut self, pair: Pair<'_, Rule>, doc: Option<Doc>) -> Built<SensorBlock> {
        let span = self.span(&pair);
        let mut parts = children(pair).into_iter().skip(1).peekable();
        let name = self.next_ident(&mut parts, span)?;
        let mut params = Vec::new();
        if let Some(list) = parts.next_if(|p| p.as_rule() == Rule::sensor_params) {
            for param in list.into_inner() {
                let param_span = self.span(&param);
                let mut pieces = children(param).into_iter();
                params.push(Param {
                    name: self.next_ident(&mut pieces, param_span)?,
                    unit: self.next_unit(&mut pieces, param_span)?,
                    span: param_span,
                });
            }
        }
        let mut items = Vec::new();
        for part in parts {
            let part_span = self.span(&part);
            items.push(match part.as_rule() {
                Rule::component => SensorItem::Component(self.component(part)?),
                Rule::noise_stmt => SensorItem::ComponentNoise(self.noise_stmt(part)?),
                Rule::shared_noise => {
                    let body = children(part)
                        .into_iter()
                        .nth(1)
                        .ok_or_else(|| self.unexpected(part_span))?;
                    let kind = if body.as_rule() == Rule::covariance {
                        SharedNoiseKind::Covariance(self.covariance(body)?)
                    } else {
                        SharedNoiseKind::Each(self.dist(body)?)
                    };
                    SensorItem::SharedNoise(SharedNoise {
                        kind,
                        span: part_span,
                    })
                }
                Rule::gate_stmt => {
                    let mut pieces = children(part).into_iter().skip(1);
                    SensorItem::Gate(GateStmt {
                        value: self.next_expr(&mut pieces, part_span)?,
                        span: part_span,
                    })
                }
                _ => return Err(self.unexpected(part_span)),
            });
        }
        Ok(SensorBlock {
            doc,
            name,
            params,
            items,
            span,
        })
    }

    fn component(&mut self, pair: Pair<'_, Rule>) -> Built<ComponentDecl> {
        let span = self.span(&pair);
        let doc = self.docs.claim(span.start);
        let mut parts = children(pair).into_iter().peekable();
        let name = self.next_ident(&mut parts, span)?;
        let unit = self.next_unit(&mut parts, span)?;
        let wrap = parts
            .next_if(|p| p.as_rule() == Rule::kw_wrap)
            .map(|p| self.span(&p));
        let value = self.next_expr(&mut parts, span)?;
        Ok(ComponentDecl {
            doc,
            name,
            unit,
            wrap,
            value,
            span,
        })
    }

    fn covariance(&self, pair: Pair<'_, Rule>) -> Built<CovarianceExpr> {
        let span = self.span(&pair);
        let rows = children(pair)
            .into_iter()
            .filter(|p| p.as_rule() == Rule::cov_row)
            .map(|row| {
                row.into_inner()
                    .map(|e| self.expr(e))
                    .collect::<Built<Vec<_>>>()
            })
            .collect::<Built<_>>()?;
        Ok(CovarianceExpr { rows, span })
    }

    // ------------------------------------------------------------ expressions

    fn expr(&self, pair: Pair<'_, Rule>) -> Built<Expr> {
        self.expr_with_depth(pair).map(|(e, _)| e)
    }

    /// Builds an expression and its tree depth; trees deeper than [`MAX_NESTING`]
    /// are refused here so no later recursive pass (or drop) can run out of stack.
    fn expr_with_depth(&self, pair: Pair<'_, Rule>) -> Built<(Expr, usize)> {
        PRATT
            .map_primary(|p| self.primary(p))
            .map_prefix(|op, rhs| {
                let (rhs, depth) = rhs?;
                let span = self.span(&op).to(rhs.span);
                self.deepen(
                    Expr {
                        kind: ExprKind::Neg(Box::new(rhs)),
                        span,
                    },
                    depth,
                )
            })
            .map_infix(|lhs, op, rhs| {
                let (lhs, ldepth) = lhs?;
                let (rhs, rdepth) = rhs?;
                let bin = match op.as_rule() {
                    Rule::add => BinOp::Add,
                    Rule::sub => BinOp::Sub,
                    Rule::mul => BinOp::Mul,
                    Rule::div => BinOp::Div,
                    _ => BinOp::Pow,
                };
                let span = lhs.span.to(rhs.span);
                self.deepen(
                    Expr {
                        kind: ExprKind::Binary(bin, Box::new(lhs), Box::new(rhs)),
                        span,
                    },
                    ldepth.max(rdepth),
                )
            })
            .parse(pair.into_inner())
    }

    fn deepen(&self, expr: Expr, child_depth: usize) -> Built<(Expr, usize)> {
        let depth = child_depth + 1;
        if depth > MAX_NESTING {
            return Err(Box::new(
                Diagnostic::new(
                    codes::TOO_DEEP,
                    expr.span,
                    format!("this expression is nested more than {MAX_NESTING} levels deep"),
                )
                .with_hint("split it with named constants or simplify it"),
            ));
        }
        Ok((expr, depth))
    }

    fn primary(&self, pair: Pair<'_, Rule>) -> Built<(Expr, usize)> {
        let span = self.span(&pair);
        match pair.as_rule() {
            Rule::quantity => {
                let mut parts = children(pair).into_iter();
                let number = parts.next().ok_or_else(|| self.unexpected(span))?;
                let (value, text) = self.number(&number)?;
                let unit = parts.next().map(|u| self.unit(u)).transpose()?;
                let quantity = Quantity {
                    value,
                    text,
                    number_span: self.span(&number),
                    unit,
                };
                Ok((
                    Expr {
                        kind: ExprKind::Quantity(quantity),
                        span,
                    },
                    1,
                ))
            }
            Rule::name => {
                let ident = pair
                    .into_inner()
                    .next()
                    .ok_or_else(|| self.unexpected(span))?;
                Ok((
                    Expr {
                        kind: ExprKind::Name(self.ident(&ident)),
                        span,
                    },
                    1,
                ))
            }
            Rule::call => {
                let mut parts = children(pair).into_iter();
                let func = self.next_ident(&mut parts, span)?;
                let mut depth = 0;
                let mut args = Vec::new();
                for arg in parts {
                    let (arg, d) = self.expr_with_depth(arg)?;
                    depth = depth.max(d);
                    args.push(arg);
                }
                self.deepen(
                    Expr {
                        kind: ExprKind::Call(func, args),
                        span,
                    },
                    depth,
                )
            }
            Rule::paren => {
                let inner = pair
                    .into_inner()
                    .next()
                    .ok_or_else(|| self.unexpected(span))?;
                let (inner, depth) = self.expr_with_depth(inner)?;
                self.deepen(
                    Expr {
                        kind: ExprKind::Paren(Box::new(inner)),
                        span,
                    },
                    depth,
                )
            }
            _ => Err(self.unexpected(span)),
        }
    }

    fn number(&self, pair: &Pair<'_, Rule>) -> Built<(f64, String)> {
        let text = pair.as_str();
        let value: f64 = text
            .replace('_', "")
            .parse()
            .map_err(|_| self.unexpected(self.span(pair)))?;
        if !value.is_finite() {
            return Err(Box::new(
                Diagnostic::new(
                    codes::NUMBER_OUT_OF_RANGE,
                    self.span(pair),
                    format!("the number `{text}` is too large to represent"),
                )
                .with_label_message("larger than about 1.8e308")
                .with_hint("write the value in a larger unit, or check the exponent"),
            ));
        }
        Ok((value, text.to_string()))
    }

    // ------------------------------------------------------------ units

    fn unit(&self, pair: Pair<'_, Rule>) -> Built<Unit> {
        let span = self.span(&pair);
        match pair.as_rule() {
            Rule::unit | Rule::literal_unit => {
                let parts = children(pair);
                // Products build a left-deep tree; bound it like expressions.
                if parts.len() > 2 * MAX_NESTING {
                    return Err(Box::new(
                        Diagnostic::new(
                            codes::TOO_DEEP,
                            span,
                            format!("this unit has more than {MAX_NESTING} factors"),
                        )
                        .with_hint("write the unit with exponents, e.g. `m^3` for `m*m*m`"),
                    ));
                }
                let mut parts = parts.into_iter();
                let mut acc = self.unit(parts.next().ok_or_else(|| self.unexpected(span))?)?;
                while let Some(op) = parts.next() {
                    let rhs = self.unit(parts.next().ok_or_else(|| self.unexpected(span))?)?;
                    let joined = acc.span.to(rhs.span);
                    let kind = if op.as_rule() == Rule::unit_div {
                        UnitKind::Div(Box::new(acc), Box::new(rhs))
                    } else {
                        UnitKind::Mul(Box::new(acc), Box::new(rhs))
                    };
                    acc = Unit { kind, span: joined };
                }
                Ok(acc)
            }
            Rule::unit_power | Rule::literal_power => {
                let mut parts = children(pair).into_iter();
                let base = self.unit(parts.next().ok_or_else(|| self.unexpected(span))?)?;
                match parts.next() {
                    None => Ok(base),
                    Some(exponent) => {
                        let (num, den) = self.exponent(exponent)?;
                        Ok(Unit {
                            kind: UnitKind::Pow(Box::new(base), num, den),
                            span,
                        })
                    }
                }
            }
            Rule::unit_sqrt | Rule::unit_paren => {
                let is_sqrt = pair.as_rule() == Rule::unit_sqrt;
                let inner = pair
                    .into_inner()
                    .next()
                    .ok_or_else(|| self.unexpected(span))?;
                let inner = Box::new(self.unit(inner)?);
                let kind = if is_sqrt {
                    UnitKind::Sqrt(inner)
                } else {
                    UnitKind::Paren(inner)
                };
                Ok(Unit { kind, span })
            }
            Rule::unit_symbol | Rule::literal_symbol => Ok(Unit {
                kind: UnitKind::Symbol(pair.as_str().to_string()),
                span,
            }),
            Rule::unit_one => Ok(Unit {
                kind: UnitKind::One,
                span,
            }),
            Rule::percent => Ok(Unit {
                kind: UnitKind::Percent,
                span,
            }),
            _ => Err(self.unexpected(span)),
        }
    }

    fn exponent(&self, pair: Pair<'_, Rule>) -> Built<(i64, i64)> {
        let mut negative = false;
        let mut numbers = Vec::new();
        for part in pair.into_inner() {
            if part.as_rule() == Rule::neg_sign {
                negative = true;
            } else {
                let parsed: i64 = part.as_str().parse().map_err(|_| -> Box<Diagnostic> {
                    Diagnostic::new(
                        codes::NUMBER_OUT_OF_RANGE,
                        self.span(&part),
                        format!("the exponent `{}` is too large", part.as_str()),
                    )
                    .with_hint("unit exponents are small whole numbers or fractions such as `2` or `(1/2)`")
                    .into()
                })?;
                numbers.push(parsed);
            }
        }
        let num = numbers.first().copied().unwrap_or(1);
        let den = numbers.get(1).copied().unwrap_or(1);
        Ok((if negative { -num } else { num }, den))
    }
}
