//! Typeset labels: a small markup for real subscripts and superscripts, drawn piece by piece
//! on any backend (`v_{pec}`, `km s^{−1}`; Greek letters are written as Unicode).

use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::FontTransform;

use crate::report::ReportError;

use super::{de, Area};

#[derive(Debug, Clone, Copy, PartialEq)]
enum Shift {
    Base,
    Sub,
    Sup,
}

/// Split markup into pieces: `_{…}` subscript, `^{…}` superscript, the rest on the baseline.
fn pieces(markup: &str) -> Vec<(String, Shift)> {
    let mut out: Vec<(String, Shift)> = Vec::new();
    let mut base = String::new();
    let mut chars = markup.chars().peekable();
    while let Some(c) = chars.next() {
        if (c == '_' || c == '^') && chars.peek() == Some(&'{') {
            chars.next();
            let mut inner = String::new();
            for d in chars.by_ref() {
                if d == '}' {
                    break;
                }
                inner.push(d);
            }
            if !base.is_empty() {
                out.push((std::mem::take(&mut base), Shift::Base));
            }
            out.push((inner, if c == '_' { Shift::Sub } else { Shift::Sup }));
        } else {
            base.push(c);
        }
    }
    if !base.is_empty() {
        out.push((base, Shift::Base));
    }
    out
}

/// The text of markup without its marks.
#[cfg(test)]
fn plain(markup: &str) -> String {
    pieces(markup).into_iter().map(|p| p.0).collect()
}

fn piece_style(style: &TextStyle<'static>, shift: Shift) -> TextStyle<'static> {
    match shift {
        Shift::Base => style.clone(),
        _ => {
            let size = style.font.get_size() * 0.72;
            TextStyle {
                font: ("sans-serif", size, style.font.get_style()).into_font(),
                color: style.color,
                pos: style.pos,
            }
        }
    }
}

/// Width of the typeset markup, pixels.
pub(super) fn width<DB: DrawingBackend>(
    area: &Area<DB>,
    markup: &str,
    style: &TextStyle<'static>,
) -> i32 {
    pieces(markup)
        .iter()
        .map(|(t, s)| {
            area.estimate_text_size(t, &piece_style(style, *s))
                .map(|(w, _)| w as i32)
                .unwrap_or(0)
        })
        .sum()
}

/// Draw markup horizontally (`vertical` false) or reading upwards, anchored at `at` by its
/// start, centre or end (`h`) and vertically centred on the baseline band.
pub(super) fn draw<DB: DrawingBackend>(
    area: &Area<DB>,
    markup: &str,
    at: (i32, i32),
    style: &TextStyle<'static>,
    h: HPos,
    vertical: bool,
) -> Result<(), ReportError> {
    let parts = pieces(markup);
    let size = style.font.get_size();
    let total = width(area, markup, style);
    let start = match h {
        HPos::Left => 0,
        HPos::Center => -total / 2,
        HPos::Right => -total,
    };
    let mut advance = start;
    for (t, shift) in parts {
        let ps = piece_style(style, shift);
        let off = match shift {
            Shift::Base => 0.0,
            Shift::Sub => 0.28 * size,
            Shift::Sup => -0.38 * size,
        } as i32;
        let w = area
            .estimate_text_size(&t, &ps)
            .map(|(w, _)| w as i32)
            .unwrap_or(0);
        let (pos, s) = if vertical {
            (
                (at.0 + off, at.1 - advance),
                ps.transform(FontTransform::Rotate270),
            )
        } else {
            ((at.0 + advance, at.1 + off), ps)
        };
        area.draw(&Text::new(
            t,
            pos,
            s.pos(Pos::new(HPos::Left, VPos::Center)),
        ))
        .map_err(de)?;
        advance += w;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markup_pieces() {
        let p = pieces("v_{pec} (km s^{−1})");
        assert_eq!(p.len(), 5);
        assert_eq!(p[1], ("pec".to_string(), Shift::Sub));
        assert_eq!(p[3], ("−1".to_string(), Shift::Sup));
        assert_eq!(plain("D_{C}(z_{cmb})"), "DC(zcmb)");
        assert_eq!(plain("a_b"), "a_b");
    }
}
