//! Shapes and shading of the objects on the stall table: fruit, bowl, napkin and price tags.
//!
//! Every object answers two pure questions about a point `(x, y)` in pixels: its signed distance
//! (negative inside; the pixel belongs to the object when the distance at its centre is negative)
//! and its colour there. The silhouette that decides mask membership is exactly the one drawn, so
//! masks and pixels cannot drift apart. Drop shadows are drawn but are not part of any object.

use serde::{Serialize, Serializer};

use super::noise::{cos, sin, smoothstep, ValueNoise};
use super::palette::ColourName;

/// What an object is; `label()` is the region label in the spec.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Kind {
    Apple,
    Lemon,
    Plum,
    Orange,
    Bowl,
    Cloth,
    Tag,
}

impl Kind {
    pub const FRUITS: [Kind; 4] = [Kind::Apple, Kind::Lemon, Kind::Plum, Kind::Orange];

    pub fn label(self) -> &'static str {
        match self {
            Kind::Apple => "apple",
            Kind::Lemon => "lemon",
            Kind::Plum => "plum",
            Kind::Orange => "orange",
            Kind::Bowl => "bowl",
            Kind::Cloth => "cloth",
            Kind::Tag => "price tag",
        }
    }

    /// Prefix of region ids (`apple-0`, `tag-1`); bowl and cloth are unique and use it alone.
    pub fn id_prefix(self) -> &'static str {
        match self {
            Kind::Tag => "tag",
            other => other.label(),
        }
    }

    pub fn plural(self) -> &'static str {
        match self {
            Kind::Apple => "apples",
            Kind::Lemon => "lemons",
            Kind::Plum => "plums",
            Kind::Orange => "oranges",
            Kind::Bowl => "bowls",
            Kind::Cloth => "cloths",
            Kind::Tag => "price tags",
        }
    }

    pub fn is_fruit(self) -> bool {
        Kind::FRUITS.contains(&self)
    }
}

impl Serialize for Kind {
    fn serialize<S: Serializer>(&self, s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(self.label())
    }
}

/// Where the light comes from. `dir` is the unit vector in the image plane pointing toward the
/// light (y down); shadows fall the other way.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Light {
    pub dir: [f64; 2],
    l3: [f64; 3],
    h3: [f64; 3],
}

impl Light {
    /// `angle` in radians in the image plane, `elevation` in radians above the table.
    pub fn new(angle: f64, elevation: f64) -> Light {
        let dir = [cos(angle), sin(angle)];
        let (ce, se) = (cos(elevation), sin(elevation));
        let l3 = [dir[0] * ce, dir[1] * ce, se];
        // Half-vector between the light and a viewer straight above.
        let h = [l3[0], l3[1], l3[2] + 1.0];
        let n = (h[0] * h[0] + h[1] * h[1] + h[2] * h[2]).sqrt().max(1e-9);
        Light {
            dir,
            l3,
            h3: [h[0] / n, h[1] / n, h[2] / n],
        }
    }

    fn diffuse(&self, n: [f64; 3]) -> f64 {
        (n[0] * self.l3[0] + n[1] * self.l3[1] + n[2] * self.l3[2]).max(0.0)
    }

    /// Blinn–Phong highlight with an integer exponent (repeated multiplication, no `powf`).
    fn highlight(&self, n: [f64; 3], exponent: u32) -> f64 {
        let c = (n[0] * self.h3[0] + n[1] * self.h3[1] + n[2] * self.h3[2]).max(0.0);
        let mut out = 1.0;
        for _ in 0..exponent {
            out *= c;
        }
        out
    }
}

/// A rotation about a centre: image coordinates to the object's own axes and back.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Frame {
    pub cx: f64,
    pub cy: f64,
    c: f64,
    s: f64,
}

impl Frame {
    pub fn new(cx: f64, cy: f64, angle: f64) -> Frame {
        Frame {
            cx,
            cy,
            c: cos(angle),
            s: sin(angle),
        }
    }

    pub fn to_local(&self, x: f64, y: f64) -> (f64, f64) {
        let (dx, dy) = (x - self.cx, y - self.cy);
        (dx * self.c + dy * self.s, -dx * self.s + dy * self.c)
    }

    /// The same rotation about another centre.
    pub fn moved_to(self, cx: f64, cy: f64) -> Frame {
        Frame { cx, cy, ..self }
    }

    /// A direction given in local axes, expressed in image axes.
    fn dir_to_image(&self, u: f64, v: f64) -> (f64, f64) {
        (u * self.c - v * self.s, u * self.s + v * self.c)
    }
}

/// Signed distance to the segment `a`–`b` minus `half_width` (a capsule).
fn capsule_sd(p: (f64, f64), a: (f64, f64), b: (f64, f64), half_width: f64) -> f64 {
    let (px, py) = (p.0 - a.0, p.1 - a.1);
    let (bx, by) = (b.0 - a.0, b.1 - a.1);
    let len2 = bx * bx + by * by;
    let t = if len2 > 0.0 {
        ((px * bx + py * by) / len2).clamp(0.0, 1.0)
    } else {
        0.0
    };
    let (dx, dy) = (px - bx * t, py - by * t);
    (dx * dx + dy * dy).sqrt() - half_width
}

/// First-order signed distance to an axis-aligned ellipse with semi-axes `a`, `b`; exact in sign,
/// accurate near the outline (which is all anti-aliasing needs).
fn ellipse_sd(u: f64, v: f64, a: f64, b: f64) -> f64 {
    let (ua, vb) = (u / a, v / b);
    let q = (ua * ua + vb * vb).sqrt();
    let (gu, gv) = (u / (a * a), v / (b * b));
    let g = (gu * gu + gv * gv).sqrt();
    if q < 1e-9 || g < 1e-12 {
        return -a.min(b);
    }
    (q - 1.0) * q / g
}

/// Signed distance to a rectangle of half sizes `hw`, `hh` with corners rounded by `r`.
fn rounded_box_sd(u: f64, v: f64, hw: f64, hh: f64, r: f64) -> f64 {
    let qx = u.abs() - hw + r;
    let qy = v.abs() - hh + r;
    let outside = (qx.max(0.0).powi(2) + qy.max(0.0).powi(2)).sqrt();
    outside + qx.max(qy).min(0.0) - r
}

/// Polynomial smooth minimum (blends two distance fields over a width `k`).
fn smooth_min(a: f64, b: f64, k: f64) -> f64 {
    if k <= 0.0 {
        return a.min(b);
    }
    let h = (k - (a - b).abs()).max(0.0) / k;
    a.min(b) - h * h * k * 0.25
}

fn mix(a: [f64; 3], b: [f64; 3], t: f64) -> [f64; 3] {
    let t = t.clamp(0.0, 1.0);
    [
        a[0] + (b[0] - a[0]) * t,
        a[1] + (b[1] - a[1]) * t,
        a[2] + (b[2] - a[2]) * t,
    ]
}

fn scale(c: [f64; 3], k: f64) -> [f64; 3] {
    [c[0] * k, c[1] * k, c[2] * k]
}

/// A leaf attached to a fruit, in the fruit's local axes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Leaf {
    pub centre: (f64, f64),
    /// Unit direction of the leaf's length, local axes.
    pub axis: (f64, f64),
    pub half_length: f64,
    pub half_width: f64,
}

/// A round or oval fruit. `a`, `b`: semi-axes along the local u and v axes; `lobes`: relative
/// amplitude of the 2nd and 3rd radial harmonics (apples are not perfect circles).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FruitShape {
    pub frame: Frame,
    pub a: f64,
    pub b: f64,
    pub lobes: [f64; 2],
    /// Lemon tips: radius of the small bumps at both ends of the long axis (0: none).
    pub tip_radius: f64,
    /// Stem from the stem base to its end, local axes; `None` when no stem shows.
    pub stem: Option<((f64, f64), (f64, f64))>,
    pub stem_half_width: f64,
    pub leaf: Option<Leaf>,
}

impl FruitShape {
    /// Outline radius at the local direction (cos φ, sin φ).
    fn radius_at(&self, cu: f64, sv: f64) -> f64 {
        let e = 1.0 / ((cu * cu) / (self.a * self.a) + (sv * sv) / (self.b * self.b)).sqrt();
        let c2 = cu * cu - sv * sv;
        let c3 = 4.0 * cu * cu * cu - 3.0 * cu;
        e * (1.0 + self.lobes[0] * c2 + self.lobes[1] * c3)
    }

    /// The fruit's body without stem and leaf (radial distance: exact in sign, close near the
    /// outline for these nearly round shapes). Also returns the normalised radius q (0 at the
    /// centre, 1 on the outline).
    fn body(&self, u: f64, v: f64) -> (f64, f64) {
        let rho = (u * u + v * v).sqrt();
        if rho < 1e-9 {
            return (-self.a.min(self.b), 0.0);
        }
        let r = self.radius_at(u / rho, v / rho);
        let mut sd = rho - r;
        if self.tip_radius > 0.0 {
            let off = self.a + self.tip_radius * 0.15;
            let tip = |cx: f64| ((u - cx).powi(2) + v * v).sqrt() - self.tip_radius;
            let tips = tip(off).min(tip(-off));
            sd = smooth_min(sd, tips, self.tip_radius * 1.2);
        }
        (sd, rho / r)
    }

    fn stem_sd(&self, u: f64, v: f64) -> f64 {
        match self.stem {
            Some((a, b)) => capsule_sd((u, v), a, b, self.stem_half_width),
            None => f64::INFINITY,
        }
    }

    fn leaf_sd(&self, u: f64, v: f64) -> (f64, f64, f64) {
        match self.leaf {
            Some(l) => {
                let (du, dv) = (u - l.centre.0, v - l.centre.1);
                let along = du * l.axis.0 + dv * l.axis.1;
                let across = -du * l.axis.1 + dv * l.axis.0;
                (
                    ellipse_sd(along, across, l.half_length, l.half_width),
                    along / l.half_length,
                    across / l.half_width,
                )
            }
            None => (f64::INFINITY, 0.0, 0.0),
        }
    }

    pub fn sd(&self, x: f64, y: f64) -> f64 {
        let (u, v) = self.frame.to_local(x, y);
        self.body(u, v)
            .0
            .min(self.stem_sd(u, v))
            .min(self.leaf_sd(u, v).0)
    }

    /// Largest distance of any drawn part from the centre.
    pub fn reach(&self) -> f64 {
        let mut r = self.a.max(self.b) * (1.0 + self.lobes[0].abs() + self.lobes[1].abs())
            + self.tip_radius * 1.3;
        if let Some((_, end)) = self.stem {
            r = r.max((end.0 * end.0 + end.1 * end.1).sqrt() + self.stem_half_width);
        }
        if let Some(l) = self.leaf {
            let c = (l.centre.0 * l.centre.0 + l.centre.1 * l.centre.1).sqrt();
            r = r.max(c + l.half_length);
        }
        r
    }

    pub fn mean_radius(&self) -> f64 {
        0.5 * (self.a + self.b)
    }
}

/// A round bowl seen from above: a rim ring and a concave basin.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BowlShape {
    pub cx: f64,
    pub cy: f64,
    pub radius: f64,
    /// Inner radius of the rim as a fraction of `radius`.
    pub inner_fraction: f64,
}

impl BowlShape {
    pub fn sd(&self, x: f64, y: f64) -> f64 {
        ((x - self.cx).powi(2) + (y - self.cy).powi(2)).sqrt() - self.radius
    }

    pub fn inner_radius(&self) -> f64 {
        self.radius * self.inner_fraction
    }
}

/// A napkin: a rotated rectangle with soft folds, two creases and a hem.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ClothShape {
    pub frame: Frame,
    pub half_w: f64,
    pub half_h: f64,
    pub fold_period: [f64; 2],
    pub fold_phase: [f64; 2],
    pub fold_amplitude: f64,
    /// Pixel scale (image size / 256), for hem and crease widths.
    pub px: f64,
}

impl ClothShape {
    pub fn sd(&self, x: f64, y: f64) -> f64 {
        let (u, v) = self.frame.to_local(x, y);
        rounded_box_sd(u, v, self.half_w, self.half_h, 2.0 * self.px)
    }
}

/// A price card with a few ink strokes, in its local axes.
#[derive(Debug, Clone, PartialEq)]
pub struct TagShape {
    pub frame: Frame,
    pub half_w: f64,
    pub half_h: f64,
    /// Ink strokes as segments in local axes.
    pub strokes: Vec<((f64, f64), (f64, f64))>,
    pub stroke_half_width: f64,
    pub ink: [f64; 3],
    pub px: f64,
}

impl TagShape {
    pub fn sd(&self, x: f64, y: f64) -> f64 {
        let (u, v) = self.frame.to_local(x, y);
        rounded_box_sd(u, v, self.half_w, self.half_h, 0.8 * self.px)
    }
}

#[derive(Debug, Clone, PartialEq)]
pub enum Body {
    Fruit(FruitShape),
    Bowl(BowlShape),
    Cloth(ClothShape),
    Tag(TagShape),
}

/// One object placed on the table, with everything needed to draw it.
#[derive(Debug, Clone, PartialEq)]
pub struct SceneObject {
    pub kind: Kind,
    pub colour: ColourName,
    /// Base colour after per-object jitter (sRGB 0–255).
    pub rgb: [f64; 3],
    pub body: Body,
    pub in_bowl: bool,
    /// Seed of the object's own surface noise.
    pub texture_seed: u64,
}

/// Soft drop shadow parameters: offset length, softness and darkness.
struct ShadowSpec {
    offset: f64,
    softness: f64,
    opacity: f64,
}

impl SceneObject {
    pub fn centre(&self) -> (f64, f64) {
        match &self.body {
            Body::Fruit(f) => (f.frame.cx, f.frame.cy),
            Body::Bowl(b) => (b.cx, b.cy),
            Body::Cloth(c) => (c.frame.cx, c.frame.cy),
            Body::Tag(t) => (t.frame.cx, t.frame.cy),
        }
    }

    /// Radius of a circle about the centre holding every drawn pixel of the body.
    pub fn reach(&self) -> f64 {
        match &self.body {
            Body::Fruit(f) => f.reach(),
            Body::Bowl(b) => b.radius,
            Body::Cloth(c) => (c.half_w * c.half_w + c.half_h * c.half_h).sqrt(),
            Body::Tag(t) => (t.half_w * t.half_w + t.half_h * t.half_h).sqrt(),
        }
    }

    /// Signed distance in pixels; the point is inside when negative.
    pub fn sd(&self, x: f64, y: f64) -> f64 {
        match &self.body {
            Body::Fruit(f) => f.sd(x, y),
            Body::Bowl(b) => b.sd(x, y),
            Body::Cloth(c) => c.sd(x, y),
            Body::Tag(t) => t.sd(x, y),
        }
    }

    fn shadow_spec(&self) -> ShadowSpec {
        match &self.body {
            Body::Fruit(f) => {
                let r = f.mean_radius();
                ShadowSpec {
                    offset: 0.28 * r,
                    softness: 0.32 * r,
                    opacity: 0.45,
                }
            }
            Body::Bowl(b) => ShadowSpec {
                offset: 0.12 * b.radius,
                softness: 0.2 * b.radius,
                opacity: 0.42,
            },
            Body::Cloth(c) => ShadowSpec {
                offset: 1.0 * c.px,
                softness: 1.5 * c.px,
                opacity: 0.22,
            },
            Body::Tag(t) => ShadowSpec {
                offset: 1.2 * t.px,
                softness: 1.2 * t.px,
                opacity: 0.3,
            },
        }
    }

    /// Box (x0, y0, x1, y1) in pixels holding the body and its anti-aliased rim.
    pub fn body_bounds(&self) -> [f64; 4] {
        let (cx, cy) = self.centre();
        let r = self.reach() + 1.5;
        [cx - r, cy - r, cx + r, cy + r]
    }

    pub fn shadow_bounds(&self, light: &Light) -> [f64; 4] {
        let s = self.shadow_spec();
        let (cx, cy) = self.centre();
        let (sx, sy) = (cx - light.dir[0] * s.offset, cy - light.dir[1] * s.offset);
        let r = self.reach() + s.softness + 1.5;
        [sx - r, sy - r, sx + r, sy + r]
    }

    /// How much the shadow darkens the point (0: not at all, < 1 always).
    pub fn shadow_alpha(&self, x: f64, y: f64, light: &Light) -> f64 {
        let s = self.shadow_spec();
        let (sx, sy) = (x + light.dir[0] * s.offset, y + light.dir[1] * s.offset);
        let sd = match &self.body {
            // Leaves and stems are thin: their shadows would be noise, so only the body casts one.
            Body::Fruit(f) => {
                let (u, v) = f.frame.to_local(sx, sy);
                f.body(u, v).0
            }
            _ => self.sd(sx, sy),
        };
        s.opacity * (1.0 - smoothstep(-s.softness, s.softness, sd))
    }

    /// Colour (sRGB 0–255, before global lighting) of the object's surface at `(x, y)`. Also
    /// valid a little outside the outline, where anti-aliasing blends it in.
    pub fn colour_at(&self, x: f64, y: f64, light: &Light) -> [f64; 3] {
        let noise = ValueNoise::new(self.texture_seed);
        match &self.body {
            Body::Fruit(f) => fruit_colour(self.kind, self.rgb, f, x, y, light, &noise),
            Body::Bowl(b) => bowl_colour(self.rgb, b, x, y, light),
            Body::Cloth(c) => cloth_colour(self.rgb, c, x, y, light, &noise),
            Body::Tag(t) => tag_colour(self.rgb, t, x, y),
        }
    }
}

const STEM_BROWN: [f64; 3] = [92.0, 64.0, 34.0];
const LEAF_GREEN: [f64; 3] = [72.0, 128.0, 44.0];
const WHITE: [f64; 3] = [255.0, 255.0, 250.0];

/// Darkens a fruit colour by `shade`, keeping red more than green and green more than blue, as
/// skin in shadow looks warmer. Plain scaling would turn shaded yellow into olive (reads green).
fn warm_shade(c: [f64; 3], shade: f64) -> [f64; 3] {
    if shade >= 1.0 {
        return scale(c, shade);
    }
    let d = 1.0 - shade;
    [
        c[0] * (1.0 - 0.85 * d),
        c[1] * (1.0 - d),
        c[2] * (1.0 - 1.15 * d).max(0.0),
    ]
}

/// Sphere-like shading of a fruit, with kind-specific gloss and surface detail.
fn fruit_colour(
    kind: Kind,
    base: [f64; 3],
    f: &FruitShape,
    x: f64,
    y: f64,
    light: &Light,
    noise: &ValueNoise,
) -> [f64; 3] {
    let (u, v) = f.frame.to_local(x, y);
    let (_, q) = f.body(u, v);
    let q = q.min(1.0);
    let (dx, dy) = (x - f.frame.cx, y - f.frame.cy);
    let rho = (dx * dx + dy * dy).sqrt().max(1e-9);
    let nz = (1.0 - q * q).max(0.0).sqrt();
    let n = [dx / rho * q, dy / rho * q, nz];
    let r = f.mean_radius();

    // (gloss exponent, gloss strength, dimple scale px, dimple amplitude)
    let (exponent, gloss, dimple_px, dimple_amp) = match kind {
        Kind::Apple => (36, 0.55, 0.0, 0.0),
        Kind::Orange => (10, 0.22, 1.7, 0.05),
        Kind::Lemon => (14, 0.28, 1.9, 0.035),
        _ => (12, 0.12, 0.0, 0.0),
    };
    let mut shade = (0.56 + 0.5 * light.diffuse(n)) * (0.88 + 0.12 * nz);
    if dimple_px > 0.0 {
        shade *= 1.0 + dimple_amp * (2.0 * noise.at(x / dimple_px, y / dimple_px) - 1.0);
    }
    // Noise in the fruit's own rotated axes, so lattice-aligned blotches do not line up with
    // the image grid.
    let tone = noise.fractal(u + 31.0, v + 17.0, r * 0.7, 2, 0.5);
    let mut colour = match kind {
        // Streaks radiating from the stem: noise of the direction only, faded in away from the
        // centre where the direction is undefined. They stay within the apple's own colour.
        Kind::Apple => {
            let streak = noise.fractal(
                4.0 * dx / rho + 9.0,
                4.0 * dy / rho + 9.0 + 0.6 * q,
                1.0,
                3,
                0.5,
            );
            let amount =
                smoothstep(0.3, 0.7, 0.6 * streak + 0.4 * tone) * smoothstep(0.05, 0.35, q);
            mix(base, scale(base, 0.86), amount)
        }
        // Plums carry a pale bluish bloom.
        Kind::Plum => mix(
            base,
            [150.0, 128.0, 172.0],
            0.28 * smoothstep(0.3, 0.8, tone),
        ),
        _ => scale(base, 0.95 + 0.1 * tone),
    };
    if kind == Kind::Plum {
        // The suture: a faint groove along one side.
        let groove = (v - 0.25 * u * u / f.a.max(1.0)).abs();
        shade *= 1.0 - 0.16 * smoothstep(1.4 * r / 12.0, 0.0, groove) * (1.0 - q);
    }
    if let Some((base_pt, _)) = f.stem {
        let d = ((u - base_pt.0).powi(2) + (v - base_pt.1).powi(2)).sqrt();
        shade *= 1.0 - 0.25 * smoothstep(0.28 * r, 0.0, d);
    }
    colour = warm_shade(colour, shade);
    let spec = light.highlight(n, exponent) * gloss;
    colour = mix(colour, WHITE, spec);

    // Stem and leaf sit on top of the body; blend them in by their own coverage.
    let stem_cover = (0.5 - f.stem_sd(u, v)).clamp(0.0, 1.0);
    if stem_cover > 0.0 {
        let stem = if kind == Kind::Orange || kind == Kind::Lemon {
            [96.0, 104.0, 48.0]
        } else {
            STEM_BROWN
        };
        colour = mix(
            colour,
            scale(stem, 0.8 + 0.3 * light.diffuse(n)),
            stem_cover,
        );
    }
    let (leaf_sd, along, across) = f.leaf_sd(u, v);
    let leaf_cover = (0.5 - leaf_sd).clamp(0.0, 1.0);
    if leaf_cover > 0.0 {
        let vein = smoothstep(0.22, 0.0, across.abs()) * (1.0 - along.abs());
        let side = if across > 0.0 { 1.0 } else { 0.82 };
        let (lu, lv) = f.leaf.map(|l| l.axis).unwrap_or((1.0, 0.0));
        let (ix, iy) = f.frame.dir_to_image(-lv, lu);
        let tilt = 0.9 + 0.15 * (ix * light.dir[0] + iy * light.dir[1]) * across.signum();
        let leaf = scale(LEAF_GREEN, side * tilt * (1.0 + 0.35 * vein));
        colour = mix(colour, leaf, leaf_cover);
    }
    colour
}

/// A glazed bowl: a rounded rim lit like a torus, a concave basin shaded by the rim.
fn bowl_colour(base: [f64; 3], b: &BowlShape, x: f64, y: f64, light: &Light) -> [f64; 3] {
    let (dx, dy) = (x - b.cx, y - b.cy);
    let rho = (dx * dx + dy * dy).sqrt();
    let (ux, uy) = if rho > 1e-9 {
        (dx / rho, dy / rho)
    } else {
        (0.0, 0.0)
    };
    let ri = b.inner_radius();
    let radial = if rho >= ri {
        let t = (rho - ri) / (b.radius - ri).max(1e-9);
        ((t - 0.45) * 1.5).clamp(-0.9, 0.9)
    } else {
        // Concave: the far wall faces the viewer and the centre.
        -0.7 * rho / ri.max(1e-9)
    };
    let nz = (1.0 - radial * radial).max(0.0).sqrt();
    let n = [ux * radial, uy * radial, nz];
    let mut shade = 0.55 + 0.5 * light.diffuse(n);
    if rho < ri {
        // The rim shades the basin wall nearest the light.
        let toward = (ux * light.dir[0] + uy * light.dir[1]).max(0.0);
        shade *= 1.0 - 0.3 * smoothstep(0.5 * ri, ri, rho) * toward;
    }
    shade *= 1.0 - 0.14 * smoothstep(1.6, 0.0, (rho - ri).abs());
    let colour = scale(base, shade);
    mix(colour, WHITE, 0.6 * light.highlight(n, 40))
}

fn cloth_colour(
    base: [f64; 3],
    c: &ClothShape,
    x: f64,
    y: f64,
    light: &Light,
    noise: &ValueNoise,
) -> [f64; 3] {
    let (u, v) = c.frame.to_local(x, y);
    let tau = std::f64::consts::TAU;
    let folds = c.fold_amplitude
        * (sin(tau * u / c.fold_period[0] + c.fold_phase[0])
            + 0.6 * sin(tau * v / c.fold_period[1] + c.fold_phase[1])
            + 0.8 * (noise.fractal(u, v, 28.0 * c.px, 2, 0.5) - 0.5));
    let mut shade = 0.94 + folds;
    // Creases of a napkin folded in four: one side of each ridge catches the light.
    let (au_x, au_y) = c.frame.dir_to_image(1.0, 0.0);
    let (av_x, av_y) = c.frame.dir_to_image(0.0, 1.0);
    let lu = au_x * light.dir[0] + au_y * light.dir[1];
    let lv = av_x * light.dir[0] + av_y * light.dir[1];
    let crease_w = 2.5 * c.px;
    shade += 0.07 * smoothstep(crease_w, 0.0, u.abs()) * u.signum() * lu;
    shade += 0.07 * smoothstep(crease_w, 0.0, v.abs()) * v.signum() * lv;
    // Hem: a slightly darker band with a stitch line.
    let inset = -rounded_box_sd(u, v, c.half_w, c.half_h, 2.0 * c.px);
    shade *= 1.0 - 0.06 * smoothstep(4.0 * c.px, 3.0 * c.px, inset);
    shade *= 1.0 - 0.08 * smoothstep(0.7 * c.px, 0.0, (inset - 3.5 * c.px).abs());
    scale(base, shade)
}

fn tag_colour(paper: [f64; 3], t: &TagShape, x: f64, y: f64) -> [f64; 3] {
    let (u, v) = t.frame.to_local(x, y);
    // A punched hole for the string, near one short edge.
    let hole = ((u + t.half_w - 2.2 * t.px).powi(2) + v * v).sqrt() - 0.9 * t.px;
    let mut colour = scale(paper, 0.97 + 0.03 * (u / t.half_w.max(1e-9)));
    colour = mix(colour, [120.0, 112.0, 100.0], (0.5 - hole).clamp(0.0, 1.0));
    let ink = t
        .strokes
        .iter()
        .map(|&(a, b)| capsule_sd((u, v), a, b, t.stroke_half_width))
        .fold(f64::INFINITY, f64::min);
    mix(colour, t.ink, (0.5 - ink).clamp(0.0, 1.0) * 0.9)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn apple() -> FruitShape {
        FruitShape {
            frame: Frame::new(50.0, 40.0, 0.3),
            a: 15.0,
            b: 14.0,
            lobes: [0.02, 0.03],
            tip_radius: 0.0,
            stem: Some(((1.0, 0.0), (4.0, 2.0))),
            stem_half_width: 0.8,
            leaf: None,
        }
    }

    #[test]
    fn distance_is_negative_inside_and_positive_outside() {
        let f = apple();
        assert!(f.sd(50.0, 40.0) < 0.0);
        assert!(f.sd(80.0, 40.0) > 0.0);
        let b = BowlShape {
            cx: 10.0,
            cy: 10.0,
            radius: 5.0,
            inner_fraction: 0.8,
        };
        assert!((b.sd(10.0, 20.0) - 5.0).abs() < 1e-12);
        assert!(rounded_box_sd(0.0, 0.0, 5.0, 3.0, 1.0) < 0.0);
        assert!((rounded_box_sd(7.0, 0.0, 5.0, 3.0, 1.0) - 2.0).abs() < 1e-12);
        assert!((ellipse_sd(12.0, 0.0, 10.0, 4.0) - 2.0).abs() < 1e-9);
    }

    #[test]
    fn reach_holds_every_inside_pixel() {
        let f = apple();
        let r = f.reach();
        for y in 0..100 {
            for x in 0..100 {
                let (px, py) = (x as f64 + 0.5, y as f64 + 0.5);
                if f.sd(px, py) < 0.0 {
                    let d = ((px - 50.0).powi(2) + (py - 40.0).powi(2)).sqrt();
                    assert!(d <= r, "pixel {x},{y} at {d} beyond reach {r}");
                }
            }
        }
    }

    #[test]
    fn colours_stay_finite_and_in_range() {
        let light = Light::new(0.7, 0.9);
        let obj = SceneObject {
            kind: Kind::Apple,
            colour: ColourName::Red,
            rgb: ColourName::Red.base_rgb(),
            body: Body::Fruit(apple()),
            in_bowl: false,
            texture_seed: 1,
        };
        for y in 20..60 {
            for x in 30..70 {
                let c = obj.colour_at(x as f64 + 0.5, y as f64 + 0.5, &light);
                assert!(c.iter().all(|v| v.is_finite() && *v >= 0.0 && *v <= 256.0));
                let a = obj.shadow_alpha(x as f64, y as f64, &light);
                assert!((0.0..1.0).contains(&a));
            }
        }
    }
}
