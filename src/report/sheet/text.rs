//! Text on sheet pages: DejaVu Sans embedded in the binary (the `dejavu` crate), rasterised with
//! `ab_glyph`, plus the few pixel primitives the pages need.
//!
//! Invariants: no system font is ever read; a character the font lacks is drawn as an empty box
//! (counted in [`TextDrawn::n_missing`]), a control character as a space, so any label renders
//! and nothing is dropped silently. Pens are rounded to whole pixels, so one cached coverage
//! bitmap per glyph and style serves every position and the output does not depend on the order
//! glyphs were first drawn.

use std::collections::HashMap;
use std::sync::OnceLock;

use ab_glyph::{point, Font, FontRef, GlyphId, PxScale, ScaleFont};
use image::{Rgb, RgbImage};

/// Body text colour.
pub(super) const INK: Rgb<u8> = Rgb([30, 33, 40]);
/// Side of the verdict chip drawn before a line.
pub(super) const CHIP_PX: u32 = 11;

/// How a line of a row's text is set.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum TextStyle {
    /// The pair id.
    Title,
    Body,
    /// The verdict line.
    Strong,
    /// Line numbers, warnings, provenance.
    Muted,
    /// Page header title.
    Header,
    /// Captions and the header's second line.
    Small,
}

impl TextStyle {
    fn size_px(self) -> f32 {
        match self {
            TextStyle::Title => 15.0,
            TextStyle::Body | TextStyle::Strong => 13.0,
            TextStyle::Muted => 11.5,
            TextStyle::Header => 17.0,
            TextStyle::Small => 11.5,
        }
    }

    fn bold(self) -> bool {
        matches!(
            self,
            TextStyle::Title | TextStyle::Strong | TextStyle::Header
        )
    }

    pub(super) fn colour(self) -> Rgb<u8> {
        match self {
            TextStyle::Muted | TextStyle::Small => Rgb([104, 108, 118]),
            _ => INK,
        }
    }

    /// Baseline-to-baseline distance in pixels.
    pub fn line_height(self) -> u32 {
        (self.size_px() * 1.32).ceil() as u32
    }
}

/// One line of a row's text; `chip` draws a small square of that colour before the words.
#[derive(Debug, Clone, PartialEq)]
pub struct TextLine {
    pub text: String,
    pub style: TextStyle,
    pub chip: Option<Rgb<u8>>,
}

impl TextLine {
    pub fn new(style: TextStyle, text: String) -> TextLine {
        TextLine {
            text,
            style,
            chip: None,
        }
    }
}

struct Fonts {
    regular: FontRef<'static>,
    bold: FontRef<'static>,
}

fn fonts() -> &'static Fonts {
    static FONTS: OnceLock<Fonts> = OnceLock::new();
    FONTS.get_or_init(|| Fonts {
        regular: FontRef::try_from_slice(dejavu::sans::regular())
            .expect("the embedded DejaVu Sans parses"),
        bold: FontRef::try_from_slice(dejavu::sans::bold())
            .expect("the embedded DejaVu Sans Bold parses"),
    })
}

/// A glyph's coverage at a whole-pixel pen position, relative to the pen on the baseline.
struct GlyphBitmap {
    left: i32,
    top: i32,
    width: u32,
    height: u32,
    coverage: Vec<u8>,
}

/// What [`TextPainter::draw`] did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TextDrawn {
    /// Advance width of the whole text in pixels.
    pub width_px: u32,
    /// Characters the font lacks, drawn as boxes.
    pub n_missing: usize,
}

/// Sets text in the embedded fonts, caching each glyph's coverage (pens are rounded to whole
/// pixels so one bitmap serves every position).
pub struct TextPainter {
    cache: HashMap<(GlyphId, TextStyle), Option<GlyphBitmap>>,
}

impl Default for TextPainter {
    fn default() -> Self {
        TextPainter::new()
    }
}

/// Control characters (a newline inside a label, say) are set as spaces.
fn printable(c: char) -> char {
    if c.is_control() {
        ' '
    } else {
        c
    }
}

impl TextPainter {
    pub fn new() -> TextPainter {
        TextPainter {
            cache: HashMap::new(),
        }
    }

    fn font(style: TextStyle) -> &'static FontRef<'static> {
        let f = fonts();
        if style.bold() {
            &f.bold
        } else {
            &f.regular
        }
    }

    /// Width of the replacement box drawn for a missing character.
    fn box_advance(style: TextStyle) -> f32 {
        (style.size_px() * 0.62).round()
    }

    /// Advance widths of each character (missing ones get the box's), kerning included.
    fn advances(text: &str, style: TextStyle) -> Vec<(char, GlyphId, f32)> {
        let font = TextPainter::font(style);
        let scaled = font.as_scaled(PxScale::from(style.size_px()));
        let mut out: Vec<(char, GlyphId, f32)> = Vec::new();
        let mut prev: Option<GlyphId> = None;
        for c in text.chars().map(printable) {
            let id = font.glyph_id(c);
            if id.0 == 0 {
                out.push((c, id, TextPainter::box_advance(style)));
                prev = None;
                continue;
            }
            if let (Some(p), Some(last)) = (prev, out.last_mut()) {
                last.2 += scaled.kern(p, id);
            }
            out.push((c, id, scaled.h_advance(id)));
            prev = Some(id);
        }
        out
    }

    /// Width of `text` in pixels.
    pub fn measure(&self, text: &str, style: TextStyle) -> u32 {
        TextPainter::advances(text, style)
            .iter()
            .map(|a| a.2)
            .sum::<f32>()
            .ceil() as u32
    }

    fn glyph(&mut self, id: GlyphId, style: TextStyle) -> Option<&GlyphBitmap> {
        self.cache
            .entry((id, style))
            .or_insert_with(|| {
                let font = TextPainter::font(style);
                let glyph =
                    id.with_scale_and_position(PxScale::from(style.size_px()), point(0.0, 0.0));
                let outlined = font.outline_glyph(glyph)?;
                let b = outlined.px_bounds();
                let (width, height) = (b.width() as u32, b.height() as u32);
                let mut coverage = vec![0u8; (width * height) as usize];
                outlined.draw(|x, y, c| {
                    if x < width && y < height {
                        coverage[(y * width + x) as usize] =
                            (c.clamp(0.0, 1.0) * 255.0).round() as u8;
                    }
                });
                Some(GlyphBitmap {
                    left: b.min.x as i32,
                    top: b.min.y as i32,
                    width,
                    height,
                    coverage,
                })
            })
            .as_ref()
    }

    /// Draws `text` with its baseline at `baseline_y`, starting at `x`, clipped to the image.
    pub fn draw(
        &mut self,
        image: &mut RgbImage,
        x: i32,
        baseline_y: i32,
        text: &str,
        style: TextStyle,
        colour: Rgb<u8>,
    ) -> TextDrawn {
        let mut pen = x as f32;
        let mut n_missing = 0;
        for (c, id, advance) in TextPainter::advances(text, style) {
            let px = pen.round() as i32;
            if id.0 == 0 && !c.is_whitespace() {
                n_missing += 1;
                let size = style.size_px();
                let w = TextPainter::box_advance(style) as i32 - 2;
                let h = (size * 0.72).round() as i32;
                stroke_rect(image, px + 1, baseline_y - h, w, h, colour);
            } else if let Some(g) = self.glyph(id, style) {
                blend_coverage(image, px + g.left, baseline_y + g.top, g, colour);
            }
            pen += advance;
        }
        TextDrawn {
            width_px: (pen - x as f32).ceil().max(0.0) as u32,
            n_missing,
        }
    }

    /// Breaks lines longer than `width_px` at spaces (or anywhere, for a long word) and keeps at
    /// most `max_lines`, ending the last kept line with "…" when some were dropped.
    pub fn wrap(&self, lines: &[TextLine], width_px: u32, max_lines: usize) -> Vec<TextLine> {
        let mut out: Vec<TextLine> = Vec::new();
        for line in lines {
            let mut first = true;
            for piece in self.wrap_one(
                &line.text,
                line.style,
                width_px.saturating_sub(chip_room(line)),
            ) {
                out.push(TextLine {
                    text: piece,
                    style: line.style,
                    chip: if first { line.chip } else { None },
                });
                first = false;
            }
        }
        if out.len() > max_lines {
            out.truncate(max_lines.max(1));
            let last = out.last_mut().expect("at least one line kept");
            let room = width_px.saturating_sub(self.measure(" …", last.style));
            while !last.text.is_empty() && self.measure(&last.text, last.style) > room {
                last.text.pop();
            }
            last.text.push_str(" …");
        }
        out
    }

    fn wrap_one(&self, text: &str, style: TextStyle, width_px: u32) -> Vec<String> {
        let text: String = text.chars().map(printable).collect();
        if self.measure(&text, style) <= width_px {
            return vec![text];
        }
        let mut out = Vec::new();
        let mut current = String::new();
        for word in text.split(' ') {
            let candidate = if current.is_empty() {
                word.to_string()
            } else {
                format!("{current} {word}")
            };
            if self.measure(&candidate, style) <= width_px {
                current = candidate;
                continue;
            }
            if !current.is_empty() {
                out.push(std::mem::take(&mut current));
            }
            // A word wider than the column is cut between characters.
            for c in word.chars() {
                current.push(c);
                if self.measure(&current, style) > width_px && current.chars().count() > 1 {
                    let c = current.pop().expect("just pushed");
                    out.push(std::mem::take(&mut current));
                    current.push(c);
                }
            }
        }
        if !current.is_empty() {
            out.push(current);
        }
        out
    }
}

fn chip_room(line: &TextLine) -> u32 {
    if line.chip.is_some() {
        CHIP_PX + 6
    } else {
        0
    }
}

pub(super) fn blend(p: &mut Rgb<u8>, colour: Rgb<u8>, alpha: u8) {
    let a = alpha as u32;
    for k in 0..3 {
        p.0[k] = ((p.0[k] as u32 * (255 - a) + colour.0[k] as u32 * a + 127) / 255) as u8;
    }
}

fn blend_coverage(image: &mut RgbImage, x0: i32, y0: i32, g: &GlyphBitmap, colour: Rgb<u8>) {
    for gy in 0..g.height as i32 {
        let y = y0 + gy;
        if y < 0 || y >= image.height() as i32 {
            continue;
        }
        for gx in 0..g.width as i32 {
            let x = x0 + gx;
            if x < 0 || x >= image.width() as i32 {
                continue;
            }
            let c = g.coverage[(gy as u32 * g.width + gx as u32) as usize];
            if c > 0 {
                blend(image.get_pixel_mut(x as u32, y as u32), colour, c);
            }
        }
    }
}

pub(super) fn fill_rect(image: &mut RgbImage, x: i32, y: i32, w: i32, h: i32, colour: Rgb<u8>) {
    let (iw, ih) = (image.width() as i32, image.height() as i32);
    for yy in y.max(0)..(y + h).min(ih) {
        for xx in x.max(0)..(x + w).min(iw) {
            image.put_pixel(xx as u32, yy as u32, colour);
        }
    }
}

fn stroke_rect(image: &mut RgbImage, x: i32, y: i32, w: i32, h: i32, colour: Rgb<u8>) {
    fill_rect(image, x, y, w, 1, colour);
    fill_rect(image, x, y + h - 1, w, 1, colour);
    fill_rect(image, x, y, 1, h, colour);
    fill_rect(image, x + w - 1, y, 1, h, colour);
}
