//! Seamless cloning: paste a source patch into a destination so that its gradients are kept and
//! its values meet the destination's on the pasted region's boundary.
//!
//! Per channel, inside the mask Ω the solution f satisfies the discrete Poisson equation
//! Δf = div v on the 5-point stencil, where v is the guidance field (the source's gradients, or
//! optionally the stronger of source and destination gradient per pixel pair), with the Dirichlet
//! condition f = destination on the pixels just outside Ω. The linear system has one unknown
//! per mask pixel only and is solved by conjugate gradients warm-started from the plain paste and
//! preconditioned with one multigrid V-cycle on the mask's bounding box (about ten iterations at
//! any size); when the cycle converges slowly (masks thinner than its coarse cells) the solve
//! continues with a modified incomplete Cholesky preconditioner. The three channels travel
//! together as lanes of one solve (one pass over memory serves all three; each lane's arithmetic
//! is exactly that of a solve of its channel alone). Where Ω meets the image
//! border there is no neighbour and no condition (only pixel pairs inside the image enter the
//! equations), so the border acts as a free edge.
//!
//! Invariants: pixels outside the mask are bit-identical to the destination (they are never
//! unknowns); the output has the destination's size; no input panics (mismatched sizes return the
//! destination unchanged, source pixels outside the source image are read at the nearest edge);
//! the result is deterministic (one thread, a fixed order of operations).

use image::RgbImage;

use super::mask::Mask;

/// How the Poisson system is set up and solved.
#[derive(Debug, Clone, PartialEq)]
pub struct PoissonParams {
    /// Mixed gradients: on each pixel pair, use the destination's difference instead of the
    /// source's when it is larger in magnitude (keeps destination texture showing through).
    pub mixed_gradients: bool,
    /// Conjugate gradients stop when the root-mean-square residual per mask pixel falls below
    /// this many grey levels (of 255).
    pub tolerance: f64,
    /// Conjugate gradients stop after this many iterations per channel even when the tolerance
    /// is not reached (the current iterate is used).
    pub max_iterations: usize,
}

/// Default residual tolerance: 1/1000 of a grey level per pixel, far below rounding.
pub const DEFAULT_TOLERANCE: f64 = 1e-3;
/// Default iteration cap per channel. Measured with the multigrid preconditioner: about 7
/// iterations for a disc 134 pixels across, about 11 for one 506 across (MIC(0) alone needed 30
/// and 90, plain conjugate gradients 190 and 700), so the cap is reached only on degenerate
/// input.
pub const DEFAULT_MAX_ITERATIONS: usize = 5000;

impl Default for PoissonParams {
    fn default() -> Self {
        PoissonParams {
            mixed_gradients: false,
            tolerance: DEFAULT_TOLERANCE,
            max_iterations: DEFAULT_MAX_ITERATIONS,
        }
    }
}

/// What the solver did, per channel (for reports and benchmarks).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PoissonStats {
    /// Unknowns (mask pixels).
    pub n_unknowns: usize,
    /// Conjugate-gradient iterations per channel (R, G, B).
    pub iterations: [usize; 3],
    /// Final root-mean-square residual per channel, in grey levels.
    pub rms_residual: [f64; 3],
}

/// Seamless cloning of `src` into `dest` over `mask` (destination coordinates). The source pixel
/// that lands on destination pixel (x, y) is `src(x − src_offset.0, y − src_offset.1)`, i.e.
/// `src_offset` is where the source's origin lands.
///
/// Returns the destination with the mask pixels replaced by the solution, rounded and clamped to
/// 0..=255. When the mask is not the destination's size, the destination is returned unchanged;
/// when the mask covers the whole image (no boundary to meet), the plain paste is returned.
///
/// # References
/// P. Pérez, M. Gangnet, A. Blake, "Poisson image editing", ACM SIGGRAPH 2003 (ACM Transactions
/// on Graphics 22(3)), seamless cloning with source or mixed gradients as the guidance field.
#[must_use]
pub fn poisson_clone(
    dest: &RgbImage,
    src: &RgbImage,
    src_offset: (i32, i32),
    mask: &Mask,
    params: &PoissonParams,
) -> RgbImage {
    poisson_clone_with_stats(dest, src, src_offset, mask, params).0
}

/// [`poisson_clone`] that also reports the solver's iterations and residuals.
///
/// # References
/// P. Pérez, M. Gangnet, A. Blake, "Poisson image editing", ACM SIGGRAPH 2003.
#[must_use]
pub fn poisson_clone_with_stats(
    dest: &RgbImage,
    src: &RgbImage,
    src_offset: (i32, i32),
    mask: &Mask,
    params: &PoissonParams,
) -> (RgbImage, PoissonStats) {
    let mut out = dest.clone();
    let (w, h) = dest.dimensions();
    if mask.width() != w || mask.height() != h || src.width() == 0 || src.height() == 0 {
        return (out, PoissonStats::default());
    }
    let inside = mask.as_slice();
    let Some(grid) = Grid::new(inside, w as usize, h as usize) else {
        return (out, PoissonStats::default());
    };
    let n = grid.free.len();
    let mut stats = PoissonStats {
        n_unknowns: n,
        ..PoissonStats::default()
    };
    if n >= NO_LINK as usize {
        // Unknown indices are u32; no image the crate decodes is this large.
        return (out, stats);
    }
    // Source and destination samples on the grid (cells outside the image hold 0 and are never
    // read: they are no pixel's neighbour).
    let (gw, gh) = (grid.width, grid.height);
    let mut src_plane = vec![[0u8; 3]; gw * gh];
    let mut dest_plane = vec![[0u8; 3]; gw * gh];
    let (sw, sh) = (src.width() as i64, src.height() as i64);
    let (src_raw, dest_raw) = (src.as_raw(), dest.as_raw());
    for gy in 0..gh {
        let y = grid.origin.1 + gy as i64;
        if y < 0 || y >= h as i64 {
            continue;
        }
        let sy = (y - src_offset.1 as i64).clamp(0, sh - 1);
        for gx in 0..gw {
            let x = grid.origin.0 + gx as i64;
            if x < 0 || x >= w as i64 {
                continue;
            }
            let sx = (x - src_offset.0 as i64).clamp(0, sw - 1);
            let (si, di) = (3 * (sy * sw + sx) as usize, 3 * (y * w as i64 + x) as usize);
            let g = gy * gw + gx;
            src_plane[g].copy_from_slice(&src_raw[si..si + 3]);
            dest_plane[g].copy_from_slice(&dest_raw[di..di + 3]);
        }
    }
    // Whole-image mask: no boundary condition, the plain paste is the answer. Otherwise every
    // connected part of the mask has a pixel just outside it, so the system is definite.
    let has_boundary = n < (w as usize) * (h as usize);
    let guess: Vec<Px> = grid
        .free
        .iter()
        .map(|&g| src_plane[g as usize].map(f64::from))
        .collect();
    let solution: Vec<Px> = if has_boundary {
        // Right-hand side: guidance divergence plus the Dirichlet values next to the mask.
        let mut rhs = vec![[0.0f64; 3]; n];
        for (p, &g) in grid.free.iter().enumerate() {
            let g = g as usize;
            for c in 0..3 {
                let (gp, fp) = (src_plane[g][c] as f64, dest_plane[g][c] as f64);
                for q in [g - 1, g + 1, g - gw, g + gw] {
                    let kind = grid.kind[q];
                    if kind == VOID {
                        continue;
                    }
                    let mut v = gp - src_plane[q][c] as f64;
                    if params.mixed_gradients {
                        let dv = fp - dest_plane[q][c] as f64;
                        if dv.abs() > v.abs() {
                            v = dv;
                        }
                    }
                    rhs[p][c] += v;
                    if kind == FIXED {
                        rhs[p][c] += dest_plane[q][c] as f64;
                    }
                }
            }
        }
        let system = System::from_grid(&grid);
        let mut multigrid = Multigrid::new(&grid);
        let (x, iterations, rms) = solve(&system, &mut multigrid, &grid.free, &rhs, guess, params);
        stats.iterations = iterations;
        stats.rms_residual = rms;
        x
    } else {
        guess
    };
    let out_raw: &mut [u8] = &mut out;
    for (p, &g) in grid.free.iter().enumerate() {
        let (gx, gy) = (g as usize % gw, g as usize / gw);
        let x = (grid.origin.0 + gx as i64) as usize;
        let y = (grid.origin.1 + gy as i64) as usize;
        let o = 3 * (y * w as usize + x);
        for c in 0..3 {
            out_raw[o + c] = solution[p][c].round().clamp(0.0, 255.0) as u8;
        }
    }
    (out, stats)
}

/// Cell kinds on a solver grid: outside the image (no equation, no neighbour), a fixed value
/// (Dirichlet condition, in the image but outside the mask) or an unknown.
const VOID: u8 = 0;
const FIXED: u8 = 1;
const FREE: u8 = 2;

/// The mask's bounding box grown by one cell on every side, so that every unknown has its four
/// neighbours on the grid (cells beyond the image are [`VOID`]).
struct Grid {
    width: usize,
    height: usize,
    /// Image coordinates of cell (0, 0).
    origin: (i64, i64),
    /// The image's width and height.
    image_size: (i64, i64),
    kind: Vec<u8>,
    /// Grid indices of the unknowns in row-major order (the unknowns' numbering).
    free: Vec<u32>,
}

impl Grid {
    /// `None` for an empty mask.
    fn new(inside: &[bool], w: usize, h: usize) -> Option<Grid> {
        let (mut x0, mut y0, mut x1, mut y1) = (usize::MAX, usize::MAX, 0, 0);
        for y in 0..h {
            let row = &inside[y * w..(y + 1) * w];
            let (Some(first), Some(last)) =
                (row.iter().position(|&b| b), row.iter().rposition(|&b| b))
            else {
                continue;
            };
            x0 = x0.min(first);
            x1 = x1.max(last);
            y0 = y0.min(y);
            y1 = y1.max(y);
        }
        if x0 == usize::MAX {
            return None;
        }
        let (width, height) = (x1 - x0 + 3, y1 - y0 + 3);
        let origin = (x0 as i64 - 1, y0 as i64 - 1);
        let mut kind = vec![VOID; width * height];
        let mut free = Vec::new();
        for gy in 0..height {
            let y = origin.1 + gy as i64;
            if y < 0 || y >= h as i64 {
                continue;
            }
            for gx in 0..width {
                let x = origin.0 + gx as i64;
                if x < 0 || x >= w as i64 {
                    continue;
                }
                let g = gy * width + gx;
                if inside[y as usize * w + x as usize] {
                    kind[g] = FREE;
                    free.push(g as u32);
                } else {
                    kind[g] = FIXED;
                }
            }
        }
        Some(Grid {
            width,
            height,
            origin,
            image_size: (w as i64, h as i64),
            kind,
            free,
        })
    }
}

/// Multigrid V-cycle on the masked Laplacian, used as the preconditioner of conjugate gradients.
///
/// Cell-centred coarsening by 2 in each direction: a coarse cell is an unknown when any of its
/// four children is, fixed (value 0) when it covers image pixels but no unknown, void otherwise;
/// its equation is the same 5-point stencil (diagonal = neighbours in the image). Transfers:
/// bilinear prolongation P (weights 9/16, 3/16, 3/16, 1/16) and restriction R = Pᵀ, whose
/// weights sum to 4 and so carry the 4× stencil scale between levels. Smoothing: red-black
/// Gauss-Seidel over the unknowns only, red then black before the coarse correction and black
/// then red after it, so that the cycle is a symmetric operator as conjugate gradients needs.
/// The coarsest level is relaxed by many symmetric sweeps.
///
/// # References
/// W. L. Briggs, V. E. Henson, S. F. McCormick, "A Multigrid Tutorial", 2nd ed., SIAM 2000;
/// O. Tatebe, "The multigrid preconditioned conjugate gradient method", Copper Mountain
/// Conference on Multigrid Methods, 1993; A. McAdams, E. Sifakis, J. Teran, "A parallel multigrid
/// Poisson solver for fluids simulation on large grids", SCA 2010 (masked coarsening, MG-PCG).
#[derive(Clone)]
struct Multigrid {
    levels: Vec<Level>,
}

#[derive(Clone)]
struct Level {
    width: usize,
    /// 1 / diagonal on unknowns, 0 elsewhere.
    inv_diag: Vec<f32>,
    diag: Vec<f32>,
    /// The unknowns as runs along rows, in row-major order.
    spans: Vec<Span>,
    n_unknowns: usize,
    /// Correction and right-hand side per channel (the correction is 0 outside the unknowns,
    /// always); the fourth lane is padding, so that each cell is one SIMD register.
    u: Vec<[f32; 4]>,
    rhs: Vec<[f32; 4]>,
}

/// One value per colour channel. Every solver step acts on each lane alone with the same
/// operations in the same order, so a channel's result equals a solve of that channel by itself.
type Px = [f64; 3];

/// Unknown cells x0..x1 of row y.
#[derive(Clone, Copy)]
struct Span {
    y: usize,
    x0: usize,
    x1: usize,
}

/// Pre- and post-smoothing sweeps (each a red and a black half-sweep) per level.
const SMOOTHING_SWEEPS: usize = 2;
/// Symmetric sweep pairs on the coarsest level.
const COARSEST_SWEEPS: usize = 30;
/// Coarsening stops at this many unknowns.
const COARSEST_UNKNOWNS: usize = 64;

impl Level {
    fn new(width: usize, height: usize, kind: &[u8]) -> Level {
        let n = width * height;
        let mut diag = vec![0.0f32; n];
        let mut spans = Vec::new();
        let mut n_unknowns = 0;
        for y in 0..height {
            let mut x = 0;
            while x < width {
                if kind[y * width + x] != FREE {
                    x += 1;
                    continue;
                }
                let x0 = x;
                while x < width && kind[y * width + x] == FREE {
                    let g = y * width + x;
                    // Unknowns never lie on the grid's edge (see Multigrid::new).
                    diag[g] = [g - 1, g + 1, g - width, g + width]
                        .iter()
                        .filter(|&&q| kind[q] != VOID)
                        .count() as f32;
                    x += 1;
                }
                spans.push(Span { y, x0, x1: x });
                n_unknowns += x - x0;
            }
        }
        let inv_diag = diag
            .iter()
            .map(|&d| if d > 0.0 { 1.0 / d } else { 0.0 })
            .collect();
        Level {
            width,
            inv_diag,
            diag,
            spans,
            n_unknowns,
            u: vec![[0.0; 4]; n],
            rhs: vec![[0.0; 4]; n],
        }
    }

    /// One Gauss-Seidel half-sweep over the unknowns with (x + y) % 2 == `colour`, which
    /// depend only on cells of the other colour.
    fn relax(&mut self, colour: usize) {
        let w = self.width;
        let (u, rhs, inv_diag) = (&mut self.u, &self.rhs, &self.inv_diag);
        for span in &self.spans {
            // Rows above, at and below the span (unknowns are never on the grid's edge), cut to
            // the span so that the loop runs without bounds checks.
            let row = span.y * w;
            let first = span.x0 + (span.x0 + span.y + colour) % 2;
            if first >= span.x1 {
                continue;
            }
            let len = span.x1 - first;
            let (head, tail) = u.split_at_mut(row);
            let above = &head[row - w + first..row - w + span.x1];
            let (middle, rest) = tail.split_at_mut(w);
            let below = &rest[first..span.x1];
            let middle = &mut middle[first - 1..span.x1 + 1];
            let rhs = &rhs[row + first..row + span.x1];
            let inv_diag = &inv_diag[row + first..row + span.x1];
            let mut i = 0;
            while i < len {
                let (r, l, rt, a, b, d) = (
                    rhs[i],
                    middle[i],
                    middle[i + 2],
                    above[i],
                    below[i],
                    inv_diag[i],
                );
                middle[i + 1] = std::array::from_fn(|c| (r[c] + l[c] + rt[c] + a[c] + b[c]) * d);
                i += 2;
            }
        }
    }

    fn sweep(&mut self, red_first: bool) {
        let first = if red_first { 0 } else { 1 };
        self.relax(first);
        self.relax(1 - first);
    }

    fn clear(&mut self) {
        let w = self.width;
        for span in &self.spans {
            self.u[span.y * w + span.x0..span.y * w + span.x1].fill([0.0; 4]);
        }
    }
}

impl Multigrid {
    fn new(grid: &Grid) -> Multigrid {
        let mut levels = vec![Level::new(grid.width, grid.height, &grid.kind)];
        let (mut width, mut height, mut kind) = (grid.width, grid.height, grid.kind.clone());
        // Image pixel range of each level's cell 0 and cell size, per axis: cell c covers
        // [start + c·size, start + (c + 1)·size). Coarse cell c has children 2c − 2 and 2c − 1,
        // so unknowns (never on a fine grid's edge) stay off the coarse grid's edge too.
        let (mut start, mut size) = (grid.origin, 1i64);
        let (img_w, img_h) = grid.image_size;
        while levels.last().map_or(0, |l| l.n_unknowns) > COARSEST_UNKNOWNS
            && levels.len() < 24
            && (width > 6 || height > 6)
        {
            let (cw, ch) = (width.div_ceil(2) + 2, height.div_ceil(2) + 2);
            let cstart = (start.0 - 2 * size, start.1 - 2 * size);
            let csize = 2 * size;
            let mut ckind = vec![VOID; cw * ch];
            for cy in 0..ch {
                let py = cstart.1 + cy as i64 * csize;
                let in_y = py < img_h && py + csize > 0;
                for cx in 0..cw {
                    let px = cstart.0 + cx as i64 * csize;
                    let in_x = px < img_w && px + csize > 0;
                    let mut k = if in_x && in_y { FIXED } else { VOID };
                    for fy in [2 * cy as i64 - 2, 2 * cy as i64 - 1] {
                        for fx in [2 * cx as i64 - 2, 2 * cx as i64 - 1] {
                            if fx >= 0
                                && fy >= 0
                                && (fx as usize) < width
                                && (fy as usize) < height
                                && kind[fy as usize * width + fx as usize] == FREE
                            {
                                k = FREE;
                            }
                        }
                    }
                    ckind[cy * cw + cx] = k;
                }
            }
            levels.push(Level::new(cw, ch, &ckind));
            (width, height, kind, start, size) = (cw, ch, ckind, cstart, csize);
        }
        Multigrid { levels }
    }

    /// z = B r for the unknowns (numbered as [`Grid::free`]), every channel at once.
    fn apply(&mut self, free: &[u32], r: &[Px], z: &mut [Px]) {
        let top = &mut self.levels[0];
        for (&g, v) in free.iter().zip(r) {
            top.rhs[g as usize] = [v[0] as f32, v[1] as f32, v[2] as f32, 0.0];
        }
        v_cycle(&mut self.levels);
        let top = &self.levels[0];
        for (&g, o) in free.iter().zip(z.iter_mut()) {
            let u = top.u[g as usize];
            *o = [u[0] as f64, u[1] as f64, u[2] as f64];
        }
    }
}

fn v_cycle(levels: &mut [Level]) {
    let Some((fine, coarser)) = levels.split_first_mut() else {
        return;
    };
    fine.clear();
    let Some(coarse) = coarser.first_mut() else {
        for _ in 0..COARSEST_SWEEPS {
            fine.sweep(true);
        }
        for _ in 0..COARSEST_SWEEPS {
            fine.sweep(false);
        }
        return;
    };
    for _ in 0..SMOOTHING_SWEEPS {
        fine.sweep(true);
    }
    // Residual, restricted by R = Pᵀ: each fine unknown sends its residual to its four nearest
    // coarse cells (fine cell x has parent (x + 2) / 2; its other neighbour lies left for even x).
    coarse.rhs.fill([0.0; 4]);
    let (fw, cw) = (fine.width, coarse.width);
    for span in &fine.spans {
        let (u, row) = (&fine.u, span.y * fw);
        let crow = (span.y + 2) / 2 * cw;
        let dy = if span.y % 2 == 0 {
            crow - cw
        } else {
            crow + cw
        };
        for x in span.x0..span.x1 {
            let g = row + x;
            let d = fine.diag[g];
            let (f, c, l, rt, a, b) = (fine.rhs[g], u[g], u[g - 1], u[g + 1], u[g - fw], u[g + fw]);
            let r: [f32; 4] =
                std::array::from_fn(|k| f[k] - (d * c[k] - (l[k] + rt[k] + a[k] + b[k])));
            let cx = (x + 2) / 2;
            let ox = if x % 2 == 0 { cx - 1 } else { cx + 1 };
            let rhs = &mut coarse.rhs;
            for (cell, weight) in [
                (crow + cx, 0.5625f32),
                (crow + ox, 0.1875),
                (dy + cx, 0.1875),
                (dy + ox, 0.0625),
            ] {
                let t = &mut rhs[cell];
                for k in 0..4 {
                    t[k] += weight * r[k];
                }
            }
        }
    }
    v_cycle(coarser);
    let e = &coarser[0].u;
    // Bilinear prolongation of the coarse correction (0 on coarse cells that are no unknowns).
    for span in &fine.spans {
        let row = span.y * fw;
        let crow = (span.y + 2) / 2 * cw;
        let dy = if span.y % 2 == 0 {
            crow - cw
        } else {
            crow + cw
        };
        for x in span.x0..span.x1 {
            let cx = (x + 2) / 2;
            let ox = if x % 2 == 0 { cx - 1 } else { cx + 1 };
            let (a, b, c, d) = (e[crow + cx], e[crow + ox], e[dy + cx], e[dy + ox]);
            let t = &mut fine.u[row + x];
            for k in 0..4 {
                t[k] += 0.5625 * a[k] + 0.1875 * (b[k] + c[k]) + 0.0625 * d[k];
            }
        }
    }
    for _ in 0..SMOOTHING_SWEEPS {
        fine.sweep(false);
    }
}

/// The matrix A of the masked 5-point Laplacian: (A f)_p = |N_p| f_p − Σ_{q ∈ N_p ∩ Ω} f_q,
/// N_p the 4-neighbours of p inside the image. Symmetric positive definite when every connected
/// part of Ω touches a pixel outside it.
struct System {
    /// |N_p| per unknown.
    diag: Vec<f64>,
    /// Unknown indices of the 4-neighbours inside Ω ([`NO_LINK`] elsewhere).
    links: Vec<[u32; 4]>,
}

const NO_LINK: u32 = u32::MAX;

impl System {
    fn from_grid(grid: &Grid) -> System {
        let mut index = vec![NO_LINK; grid.kind.len()];
        for (p, &g) in grid.free.iter().enumerate() {
            index[g as usize] = p as u32;
        }
        let gw = grid.width;
        let mut diag = Vec::with_capacity(grid.free.len());
        let mut links = Vec::with_capacity(grid.free.len());
        for &g in &grid.free {
            let g = g as usize;
            let neighbours = [g - 1, g + 1, g - gw, g + gw];
            diag.push(neighbours.iter().filter(|&&q| grid.kind[q] != VOID).count() as f64);
            links.push(neighbours.map(|q| index[q]));
        }
        System { diag, links }
    }

    fn apply(&self, f: &[Px], out: &mut [Px]) {
        for (p, (o, l)) in out.iter_mut().zip(&self.links).enumerate() {
            let d = self.diag[p];
            let mut s = f[p].map(|v| d * v);
            for &q in l {
                if q != NO_LINK {
                    let fq = f[q as usize];
                    for c in 0..3 {
                        s[c] -= fq[c];
                    }
                }
            }
            *o = s;
        }
    }
}

/// Per-channel dot products.
fn dot(a: &[Px], b: &[Px]) -> Px {
    let mut sum = [-0.0f64; 3];
    for (x, y) in a.iter().zip(b) {
        for c in 0..3 {
            sum[c] += x[c] * y[c];
        }
    }
    sum
}

/// Relaxation of the modified incomplete Cholesky factorisation (1 = fully modified); slightly
/// below 1 keeps the pivots well away from zero.
const MIC_RELAXATION: f64 = 0.97;

/// Modified incomplete Cholesky MIC(0) preconditioner of [`System`] in the unknowns' row-major
/// order: M = (D + L) D⁻¹ (D + L)ᵀ with L the strictly lower part of A and pivots
/// d_i = a_ii − (1 + ω·[l has a lower neighbour in Ω]) / d_l − (1 + ω·[u has a right neighbour
/// in Ω]) / d_u over the left (l) and upper (u) neighbours in Ω. A pivot below a quarter of a_ii
/// is replaced by a_ii (never happens on masks with a boundary, but keeps M positive definite).
///
/// # References
/// I. Gustafsson, "A class of first order factorization methods", BIT 18, 1978 (MIC);
/// J. A. Meijerink, H. A. van der Vorst, "An iterative solution method for linear systems of
/// which the coefficient matrix is a symmetric M-matrix", Math. Comp. 31, 1977 (IC(0) + CG).
struct Preconditioner {
    inv_pivot: Vec<f64>,
}

impl Preconditioner {
    fn new(a: &System) -> Preconditioner {
        let n = a.diag.len();
        let mut pivot = vec![0.0f64; n];
        for i in 0..n {
            let [left, _, up, _] = a.links[i];
            let mut d = a.diag[i];
            if left != NO_LINK {
                let l = left as usize;
                let fill = if a.links[l][3] != NO_LINK {
                    MIC_RELAXATION
                } else {
                    0.0
                };
                d -= (1.0 + fill) / pivot[l];
            }
            if up != NO_LINK {
                let u = up as usize;
                let fill = if a.links[u][1] != NO_LINK {
                    MIC_RELAXATION
                } else {
                    0.0
                };
                d -= (1.0 + fill) / pivot[u];
            }
            pivot[i] = if d.is_finite() && d >= 0.25 * a.diag[i] {
                d
            } else {
                a.diag[i]
            };
        }
        Preconditioner {
            inv_pivot: pivot.iter().map(|d| 1.0 / d).collect(),
        }
    }

    /// z = M⁻¹ r: forward substitution with (D + L), then backward with D⁻¹(D + L)ᵀ.
    fn solve(&self, a: &System, r: &[Px], z: &mut [Px]) {
        let n = r.len();
        for i in 0..n {
            let [left, _, up, _] = a.links[i];
            let mut s = r[i];
            for q in [left, up] {
                if q != NO_LINK {
                    let zq = z[q as usize];
                    for c in 0..3 {
                        s[c] += zq[c];
                    }
                }
            }
            z[i] = s.map(|v| v * self.inv_pivot[i]);
        }
        for i in (0..n).rev() {
            let [_, right, _, down] = a.links[i];
            let mut s = [0.0f64; 3];
            for q in [right, down] {
                if q != NO_LINK {
                    let zq = z[q as usize];
                    for c in 0..3 {
                        s[c] += zq[c];
                    }
                }
            }
            for c in 0..3 {
                z[i][c] += s[c] * self.inv_pivot[i];
            }
        }
    }
}

/// Multigrid-preconditioned conjugate gradients stop after this many iterations (they need
/// about ten); what is left of `max_iterations` then goes to the MIC(0) preconditioner, which
/// also takes over if the multigrid cycle ever fails to be positive definite.
const MULTIGRID_ITERATION_CAP: usize = 100;
/// ... or when, after [`MULTIGRID_PROBATION`] iterations, the residual norm has shrunk by less
/// than this factor per iteration on average. Healthy cycles shrink it about 0.4× per
/// iteration; masks thinner than the coarse cells (stripes a few pixels wide between fixed
/// pixels, which coarsening merges away) stall near 0.9×, and there MIC(0) is the faster.
const MULTIGRID_SLOW_RATE: f64 = 0.7;
const MULTIGRID_PROBATION: usize = 6;

/// Solves A x = b from `x` for the three channels: conjugate gradients preconditioned by a
/// multigrid V-cycle ([`Multigrid`]), then, for channels that have not converged, the MIC(0)
/// preconditioner ([`Preconditioner`]). Returns the iterate, the iterations run and the final
/// RMS residual per channel.
fn solve(
    a: &System,
    multigrid: &mut Multigrid,
    free: &[u32],
    b: &[Px],
    x: Vec<Px>,
    params: &PoissonParams,
) -> (Vec<Px>, [usize; 3], [f64; 3]) {
    let cap = params.max_iterations.min(MULTIGRID_ITERATION_CAP);
    let first = conjugate_gradients(
        a,
        b,
        x,
        params.tolerance,
        [cap; 3],
        MULTIGRID_SLOW_RATE,
        &mut |r, z| multigrid.apply(free, r, z),
    );
    let remaining: [usize; 3] = std::array::from_fn(|c| {
        if first.converged[c] {
            0
        } else {
            params.max_iterations - first.iterations[c]
        }
    });
    if remaining == [0; 3] {
        return (first.x, first.iterations, first.rms);
    }
    let m = Preconditioner::new(a);
    let second = conjugate_gradients(
        a,
        b,
        first.x,
        params.tolerance,
        remaining,
        1.0,
        &mut |r, z| m.solve(a, r, z),
    );
    let mut rms = first.rms;
    for c in 0..3 {
        if remaining[c] > 0 {
            rms[c] = second.rms[c];
        }
    }
    (
        second.x,
        std::array::from_fn(|c| first.iterations[c] + second.iterations[c]),
        rms,
    )
}

/// What [`conjugate_gradients`] ends with, per channel.
struct CgOutcome {
    x: Vec<Px>,
    iterations: [usize; 3],
    rms: [f64; 3],
    converged: [bool; 3],
}

/// Preconditioned conjugate gradients from `x` with z = M⁻¹ r computed by `precondition`, the
/// three channels side by side. A channel stops when its RMS residual ‖b − Ax‖/√n is at most
/// `tolerance`, after its `max_iterations`, when the preconditioner proves not positive definite
/// for it, or when after [`MULTIGRID_PROBATION`] iterations its residual norm has shrunk by less
/// than `slow_rate` per iteration on average; a stopped channel's iterate is frozen (its step
/// length is 0), so it ends exactly as a solve of that channel alone would.
///
/// # References
/// M. R. Hestenes, E. Stiefel, "Methods of conjugate gradients for solving linear systems",
/// Journal of Research of the National Bureau of Standards 49(6), 1952.
fn conjugate_gradients(
    a: &System,
    b: &[Px],
    mut x: Vec<Px>,
    tolerance: f64,
    max_iterations: [usize; 3],
    slow_rate: f64,
    precondition: &mut dyn FnMut(&[Px], &mut [Px]),
) -> CgOutcome {
    let n = b.len();
    let threshold = tolerance.max(0.0).powi(2) * n as f64;
    let rms = |rr: Px| rr.map(|v| if n == 0 { 0.0 } else { (v / n as f64).sqrt() });
    let mut ap = vec![[0.0; 3]; n];
    a.apply(&x, &mut ap);
    let mut r: Vec<Px> = b
        .iter()
        .zip(&ap)
        .map(|(bi, ai)| std::array::from_fn(|c| bi[c] - ai[c]))
        .collect();
    let mut rr = dot(&r, &r);
    let rr_start = rr;
    let mut iterations = [0usize; 3];
    let mut active: [bool; 3] = std::array::from_fn(|c| rr[c] > threshold && max_iterations[c] > 0);
    let outcome = |x, iterations, rr: Px| CgOutcome {
        x,
        iterations,
        rms: rms(rr),
        converged: rr.map(|v| v <= threshold),
    };
    if !active.contains(&true) {
        return outcome(x, iterations, rr);
    }
    let mut z = vec![[0.0; 3]; n];
    precondition(&r, &mut z);
    let mut p = z.clone();
    let mut rz = dot(&r, &z);
    loop {
        for c in 0..3 {
            if !(rz[c].is_finite() && rz[c] > 0.0) {
                active[c] = false;
            }
        }
        if !active.contains(&true) {
            break;
        }
        a.apply(&p, &mut ap);
        let pap = dot(&p, &ap);
        let mut alpha = [0.0f64; 3];
        for c in 0..3 {
            if active[c] && pap[c].is_finite() && pap[c] > 0.0 {
                alpha[c] = rz[c] / pap[c];
            } else {
                active[c] = false;
            }
        }
        if !active.contains(&true) {
            break;
        }
        for i in 0..n {
            for c in 0..3 {
                if active[c] {
                    x[i][c] += alpha[c] * p[i][c];
                    r[i][c] -= alpha[c] * ap[i][c];
                }
            }
        }
        let rr_new = dot(&r, &r);
        for c in 0..3 {
            if !active[c] {
                continue;
            }
            rr[c] = rr_new[c];
            iterations[c] += 1;
            let slow = iterations[c] >= MULTIGRID_PROBATION
                && (rr[c] / rr_start[c]).powf(0.5 / iterations[c] as f64) > slow_rate;
            if rr[c] <= threshold || iterations[c] >= max_iterations[c] || slow {
                active[c] = false;
            }
        }
        if !active.contains(&true) {
            break;
        }
        precondition(&r, &mut z);
        let rz_next = dot(&r, &z);
        let beta: Px = std::array::from_fn(|c| rz_next[c] / rz[c]);
        for (pi, zi) in p.iter_mut().zip(&z) {
            for c in 0..3 {
                if active[c] {
                    pi[c] = zi[c] + beta[c] * pi[c];
                }
            }
        }
        for c in 0..3 {
            if active[c] {
                rz[c] = rz_next[c];
            }
        }
    }
    outcome(x, iterations, rr)
}

#[cfg(test)]
mod tests {
    use super::*;
    use image::Rgb;

    fn square_mask(w: u32, h: u32, x0: u32, y0: u32, side: u32) -> Mask {
        let inside = (0..w * h)
            .map(|i| {
                let (x, y) = (i % w, i / w);
                x >= x0 && x < x0 + side && y >= y0 && y < y0 + side
            })
            .collect();
        Mask::from_vec(w, h, inside).unwrap()
    }

    #[test]
    fn identical_surroundings_reproduce_the_source() {
        // Invented: flat grey with a red 4x4 tile at (2, 2); clone tile + 2-px margin to (12, 2).
        let mut img = RgbImage::from_pixel(24, 12, Rgb([128, 128, 128]));
        for y in 2..6 {
            for x in 2..6 {
                img.put_pixel(x, y, Rgb([230, 20, 20]));
            }
        }
        let mask = square_mask(24, 12, 10, 0, 8);
        let out = poisson_clone(&img, &img, (10, 0), &mask, &PoissonParams::default());
        for y in 0..8 {
            for x in 0..8 {
                assert_eq!(out.get_pixel(x + 10, y), img.get_pixel(x, y));
            }
        }
    }

    #[test]
    fn constant_source_takes_the_boundary_values() {
        // Invented: destination is a horizontal ramp; a flat source has zero gradients, so the
        // solution is the harmonic function with the ramp's boundary values: the ramp itself.
        let dest = RgbImage::from_fn(16, 16, |x, _| Rgb([(x * 10) as u8, 50, 200]));
        let src = RgbImage::from_pixel(16, 16, Rgb([0, 0, 0]));
        let mask = square_mask(16, 16, 4, 4, 8);
        let (out, stats) =
            poisson_clone_with_stats(&dest, &src, (0, 0), &mask, &PoissonParams::default());
        assert_eq!(out, dest);
        assert!(stats.iterations.iter().all(|&i| i > 0));
    }

    #[test]
    fn whole_image_mask_pastes_and_mismatch_returns_dest() {
        let dest = RgbImage::from_pixel(1, 1, Rgb([1, 2, 3]));
        let src = RgbImage::from_pixel(1, 1, Rgb([9, 8, 7]));
        let mask = Mask::from_vec(1, 1, vec![true]).unwrap();
        assert_eq!(
            poisson_clone(&dest, &src, (0, 0), &mask, &PoissonParams::default()),
            src
        );
        let other = Mask::from_vec(2, 1, vec![true, false]).unwrap();
        assert_eq!(
            poisson_clone(&dest, &src, (5, -3), &other, &PoissonParams::default()),
            dest
        );
    }

    /// Invented awkward masks: thin lines, disconnected specks, masks on the border, a
    /// checkerboard, everything but one pixel. The multigrid-preconditioned solve must meet the
    /// tolerance in few iterations and agree within one level with a very tight solve.
    #[test]
    fn awkward_masks_converge_and_match_a_tight_solve() {
        let (w, h) = (37u32, 29u32);
        let dest = RgbImage::from_fn(w, h, |x, y| {
            Rgb([(x * 7) as u8, (y * 8) as u8, ((x * y) % 251) as u8])
        });
        let src = RgbImage::from_fn(w, h, |x, y| {
            Rgb([200 - (y * 5) as u8, ((x * 13) % 256) as u8, 90])
        });
        type Shape = Box<dyn Fn(u32, u32) -> bool>;
        let shapes: Vec<(&str, Shape)> = vec![
            ("row", Box::new(|_, y| y == 10)),
            ("column at border", Box::new(|x, _| x == 0)),
            ("specks", Box::new(|x, y| x % 9 == 4 && y % 7 == 3)),
            ("checkerboard", Box::new(|x, y| (x + y) % 2 == 0)),
            ("corner block", Box::new(|x, y| x >= 20 && y >= 15)),
            ("all but one", Box::new(|x, y| (x, y) != (17, 3))),
            (
                "ring",
                Box::new(|x, y| {
                    let d = (x as f64 - 18.0).powi(2) + (y as f64 - 14.0).powi(2);
                    (36.0..=144.0).contains(&d)
                }),
            ),
            (
                "top and bottom rows",
                Box::new(move |_, y| y == 0 || y == h - 1),
            ),
        ];
        let tight = PoissonParams {
            tolerance: 1e-9,
            max_iterations: 100_000,
            ..PoissonParams::default()
        };
        for mixed_gradients in [false, true] {
            for (name, shape) in &shapes {
                let inside = (0..w * h).map(|i| shape(i % w, i / w)).collect();
                let mask = Mask::from_vec(w, h, inside).unwrap();
                let params = PoissonParams {
                    mixed_gradients,
                    ..PoissonParams::default()
                };
                let (out, stats) = poisson_clone_with_stats(&dest, &src, (3, -2), &mask, &params);
                let tight_params = PoissonParams {
                    mixed_gradients,
                    ..tight.clone()
                };
                let (reference, _) =
                    poisson_clone_with_stats(&dest, &src, (3, -2), &mask, &tight_params);
                assert!(
                    stats.iterations.iter().all(|&i| i <= 40),
                    "{name}: {:?}",
                    stats.iterations
                );
                assert!(stats.rms_residual.iter().all(|&r| r <= params.tolerance));
                for (i, (a, b)) in out.as_raw().iter().zip(reference.as_raw()).enumerate() {
                    assert!(a.abs_diff(*b) <= 1, "{name}: value {i}: {a} vs {b}");
                    if !mask.as_slice()[i / 3] {
                        assert_eq!(a, &dest.as_raw()[i], "{name}: outside pixel changed");
                    }
                }
            }
        }
    }
}
