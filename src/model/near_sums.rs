//! The sums of one pass over the studies at τ² around coefficients β₀
//! (the identities that use them are in [`super`]): one running sum per
//! entry for any number of columns, and for up to eight columns a kernel
//! that adds rows in lanes, a block at a time.

use crate::model::wls::{chunks, count_pass, Data, Want, PARALLEL_MIN_ROWS};

/// The sums of one pass at τ² around β₀ (p × p matrices row-major, upper
/// triangle filled): M = X'WX, N₂ = X'W²X, N₃ = X'W³X (curvature), g = X'Wr₀,
/// h = X'W²r₀, h₃ = X'W³r₀ (curvature) and the scalar sums.
#[derive(Debug, Clone, Default)]
pub(super) struct Sums {
    pub(super) m: Vec<f64>,
    pub(super) n2: Vec<f64>,
    pub(super) n3: Vec<f64>,
    pub(super) g: Vec<f64>,
    pub(super) h: Vec<f64>,
    pub(super) h3: Vec<f64>,
    pub(super) sum_w: f64,
    pub(super) sum_w2: f64,
    pub(super) sum_wr2: f64,
    pub(super) sum_w2r2: f64,
    pub(super) sum_w3r2: f64,
    pub(super) sum_log_vt: f64,
}

impl Sums {
    /// Empties the sums, keeping the buffers' capacity.
    pub(super) fn clear(&mut self) {
        for t in [
            &mut self.m,
            &mut self.n2,
            &mut self.n3,
            &mut self.g,
            &mut self.h,
            &mut self.h3,
        ] {
            t.clear();
        }
        self.sum_w = 0.0;
        self.sum_w2 = 0.0;
        self.sum_wr2 = 0.0;
        self.sum_w2r2 = 0.0;
        self.sum_w3r2 = 0.0;
        self.sum_log_vt = 0.0;
    }

    fn add(&mut self, o: &Sums) {
        let pairs = [
            (&mut self.m, &o.m),
            (&mut self.n2, &o.n2),
            (&mut self.n3, &o.n3),
            (&mut self.g, &o.g),
            (&mut self.h, &o.h),
            (&mut self.h3, &o.h3),
        ];
        for (t, x) in pairs {
            if t.is_empty() {
                t.clone_from(x);
            } else {
                for (a, b) in t.iter_mut().zip(x) {
                    *a += b;
                }
            }
        }
        self.sum_w += o.sum_w;
        self.sum_w2 += o.sum_w2;
        self.sum_wr2 += o.sum_wr2;
        self.sum_w2r2 += o.sum_w2r2;
        self.sum_w3r2 += o.sum_w3r2;
        self.sum_log_vt += o.sum_log_vt;
    }
}

/// The sums over fixed chunks of rows, added in chunk order (so the result
/// does not depend on the number of threads), in parallel for large k,
/// written into `out` (whose buffers are reused: a serial pass allocates
/// nothing once they have their size).
pub(super) fn accumulate(
    data: &Data<'_>,
    ones: bool,
    tau2: f64,
    want: Want,
    beta0: &[f64],
    out: &mut Sums,
) {
    accumulate_many(
        data,
        ones,
        &[Point { tau2, beta0 }],
        want,
        std::slice::from_mut(out),
    );
}

/// The sums at several points (τ², β₀) in one pass over the studies:
/// `outs[j]` gets the very bits a pass at `points[j]` alone gives (the
/// same chunks, blocks, lanes and order of additions; the design rows are
/// only read once for all points). With `ones` (the design is one column of
/// ones: the intercept-only model) that column is not read at all
/// ([`in_lanes_at`]).
pub(super) fn accumulate_many(
    data: &Data<'_>,
    ones: bool,
    points: &[Point<'_>],
    want: Want,
    outs: &mut [Sums],
) {
    use rayon::prelude::*;
    count_pass();
    if data.k() < PARALLEL_MIN_ROWS {
        return serial_many(data, ones, points, want, outs);
    }
    let parts: Vec<Vec<Sums>> = chunks(data)
        .par_iter()
        .map(|d| {
            let mut s = vec![Sums::default(); points.len()];
            serial_many(d, ones, points, want, &mut s);
            s
        })
        .collect();
    for (j, out) in outs.iter_mut().enumerate() {
        out.clear();
        for part in &parts {
            out.add(&part[j]);
        }
    }
}

/// One point of a pass: τ² and the coefficients β₀ the residuals are
/// taken around.
#[derive(Debug, Clone, Copy)]
pub(super) struct Point<'a> {
    pub(super) tau2: f64,
    pub(super) beta0: &'a [f64],
}

fn serial_many(data: &Data<'_>, ones: bool, points: &[Point<'_>], want: Want, outs: &mut [Sums]) {
    macro_rules! fixed {
        ($p:literal) => {
            fixed!($p, false)
        };
        ($p:literal, $ones:literal) => {
            match (want.log_terms, want.curvature) {
                (false, false) => fixed_many::<$p, false, false, $ones>(data, points, outs),
                (true, false) => fixed_many::<$p, true, false, $ones>(data, points, outs),
                (false, true) => fixed_many::<$p, false, true, $ones>(data, points, outs),
                (true, true) => fixed_many::<$p, true, true, $ones>(data, points, outs),
            }
        };
    }
    if ones && data.p == 1 {
        return fixed!(1, true);
    }
    by_columns!(
        data.p,
        fixed,
        for (pt, out) in points.iter().zip(outs) {
            general(data, pt.tau2, want, pt.beta0, out);
        }
    )
}

/// Rows summed side by side in [`in_lanes_at`]: each sum keeps `LANES` partial
/// sums, row i of a chunk going to lane i mod `LANES`, and the lanes are
/// added in lane order at the end. Every partial sum is a plain in-order
/// sum, so the result depends only on the rows, never on the thread count;
/// the independent lanes let the compiler use vector instructions (two or
/// four rows per instruction) where one running sum per entry could not.
const LANES: usize = 4;

/// Rows per block: [`in_lanes_at`] copies a block's columns, weights and
/// residuals into small arrays (a few kB, in the first-level cache) and then
/// adds each group of sums in its own loop, so that group's partial sums
/// stay in registers (all of them at once would not fit, and each row would
/// store some thirty sums back to memory). A multiple of [`LANES`].
const BLOCK: usize = 64;

type Lane = [f64; LANES];
type Column = [f64; BLOCK];

/// Lane `g / LANES` of a block column: its rows g … g + LANES − 1.
#[inline(always)]
fn lane(column: &Column, g: usize) -> Lane {
    column[g..g + LANES]
        .try_into()
        .expect("a lane lies inside its block")
}

/// `acc[l] += a[l] * b[l]` for every lane.
#[inline(always)]
fn add_product(acc: &mut Lane, a: &Lane, b: &Lane) {
    for l in 0..LANES {
        acc[l] += a[l] * b[l];
    }
}

/// a[l] * b[l] for every lane.
#[inline(always)]
fn times(a: &Lane, b: &Lane) -> Lane {
    std::array::from_fn(|l| a[l] * b[l])
}

/// The lanes of one partial sum added in lane order.
fn total(lane: &Lane) -> f64 {
    lane.iter().fold(0.0, |t, x| t + x)
}

/// Σ a·b over the block's first `n` rows added to `acc`.
#[inline(always)]
fn add_dot(acc: &mut Lane, a: &Column, b: &Column, n: usize) {
    let mut t = *acc;
    for g in (0..n).step_by(LANES) {
        add_product(&mut t, &lane(a, g), &lane(b, g));
    }
    *acc = t;
}

/// Σ a over the block's first `n` rows added to `acc`.
#[inline(always)]
fn add_sum(acc: &mut Lane, a: &Column, n: usize) {
    let mut t = *acc;
    for g in (0..n).step_by(LANES) {
        let al = lane(a, g);
        for l in 0..LANES {
            t[l] += al[l];
        }
    }
    *acc = t;
}

/// One block's per-row values, column by column: the design columns x_a,
/// and with w = 1/(v + τ²) and r = y − x'β₀ the products each sum needs.
/// Rows past the block's end (up to a multiple of [`LANES`]) are 0, so
/// they add only zeros.
struct Block<const P: usize> {
    x: [Column; P],
    r: Column,
    w: Column,
    w2: Column,
    w3: Column,
    wr: Column,
    w2r: Column,
    w3r: Column,
}

/// The partial sums of [`in_lanes_at`], one [`Lane`] per sum.
struct LaneSums<const P: usize> {
    m: [[Lane; P]; P],
    n2: [[Lane; P]; P],
    n3: [[Lane; P]; P],
    g: [Lane; P],
    h: [Lane; P],
    h3: [Lane; P],
    /// Σw, Σw², Σwr², Σw²r², Σw³r², Σ ln(v + τ²).
    scalars: [Lane; 6],
}

impl<const P: usize> LaneSums<P> {
    fn new() -> Self {
        let z = [0.0; LANES];
        LaneSums {
            m: [[z; P]; P],
            n2: [[z; P]; P],
            n3: [[z; P]; P],
            g: [z; P],
            h: [z; P],
            h3: [z; P],
            scalars: [z; 6],
        }
    }

    /// The totals (lanes added in lane order) into `out`.
    fn write<const LOG: bool, const CURV: bool>(&self, out: &mut Sums) {
        out.clear();
        let s = out;
        let [sum_w, sum_w2, sum_wr2, sum_w2r2, sum_w3r2, sum_log_vt] =
            self.scalars.map(|t| total(&t));
        s.sum_w = sum_w;
        s.sum_wr2 = sum_wr2;
        s.sum_w2r2 = sum_w2r2;
        if LOG {
            s.sum_log_vt = sum_log_vt;
        }
        if CURV {
            s.sum_w2 = sum_w2;
            s.sum_w3r2 = sum_w3r2;
        }
        // The upper triangles row-major (0 below the diagonal), written
        // into the reused buffers without a temporary.
        let upper = |out: &mut Vec<f64>, t: &[[Lane; P]; P]| {
            for (a, row) in t.iter().enumerate() {
                out.extend(
                    row.iter()
                        .enumerate()
                        .map(|(c, e)| if c >= a { total(e) } else { 0.0 }),
                );
            }
        };
        upper(&mut s.m, &self.m);
        upper(&mut s.n2, &self.n2);
        s.g.extend(self.g.iter().map(total));
        s.h.extend(self.h.iter().map(total));
        if CURV {
            upper(&mut s.n3, &self.n3);
            s.h3.extend(self.h3.iter().map(total));
        }
    }

    /// Adds the block's first `n` rows (a multiple of [`LANES`]).
    #[inline(always)]
    fn add_block<const CURV: bool>(&mut self, b: &Block<P>, n: usize) {
        add_sum(&mut self.scalars[0], &b.w, n);
        add_dot(&mut self.scalars[2], &b.wr, &b.r, n);
        add_dot(&mut self.scalars[3], &b.w2r, &b.r, n);
        self.add_weighted_rows(b, n);
        if CURV {
            add_sum(&mut self.scalars[1], &b.w2, n);
            add_dot(&mut self.scalars[4], &b.w3r, &b.r, n);
            self.add_curvature_rows(b, n);
        }
    }

    /// The sums of [`LaneSums::add_block`] only the curvature needs:
    /// Σ w³·x_a·x_c (the upper triangle of N₃) and Σ x_a·w³r, one row a at
    /// a time ([`LaneSums::add_curvature_row`]).
    #[inline(always)]
    fn add_curvature_rows(&mut self, b: &Block<P>, n: usize) {
        // The rows below are those of the widest fixed kernel ([`by_columns!`]).
        const { assert!(P <= 8, "add_curvature_rows sums rows 0 to 7") };
        self.add_curvature_row::<0>(b, n);
        self.add_curvature_row::<1>(b, n);
        self.add_curvature_row::<2>(b, n);
        self.add_curvature_row::<3>(b, n);
        self.add_curvature_row::<4>(b, n);
        self.add_curvature_row::<5>(b, n);
        self.add_curvature_row::<6>(b, n);
        self.add_curvature_row::<7>(b, n);
    }

    /// Row `A` of N₃ and entry `A` of h₃ in one sweep (nothing when `A` ≥
    /// `P`), each partial sum's additions in row order, as in
    /// [`LaneSums::add_weighted_row`].
    // The loop over c keeps its two constant bounds (see
    // `add_weighted_row`): they are what lets the compiler unroll it.
    #[allow(clippy::needless_range_loop)]
    #[inline(always)]
    fn add_curvature_row<const A: usize>(&mut self, b: &Block<P>, n: usize) {
        if A >= P {
            return;
        }
        let (mut n3, mut h3) = (self.n3[A], self.h3[A]);
        for i in (0..n).step_by(LANES) {
            let xa = lane(&b.x[A], i);
            let fw3 = times(&lane(&b.w3, i), &xa);
            for c in A..P {
                add_product(&mut n3[c], &fw3, &lane(&b.x[c], i));
            }
            add_product(&mut h3, &xa, &lane(&b.w3r, i));
        }
        (self.n3[A], self.h3[A]) = (n3, h3);
    }

    /// The weighted cross products of [`LaneSums::add_block`] over the
    /// block's first `n` rows (a multiple of [`LANES`]): Σ w·x_a·x_c and
    /// Σ w²·x_a·x_c added to the upper triangles of M and N₂ (a ≤ c), each
    /// product taken as (f·x_a)·x_c, and Σ x_a·wr and Σ x_a·w²r added to g
    /// and h; one row a at a time ([`LaneSums::add_weighted_row`]), so its
    /// partial sums stay in registers.
    #[inline(always)]
    fn add_weighted_rows(&mut self, b: &Block<P>, n: usize) {
        // The rows below are those of the widest fixed kernel ([`by_columns!`]).
        const { assert!(P <= 8, "add_weighted_rows sums rows 0 to 7") };
        self.add_weighted_row::<0>(b, n);
        self.add_weighted_row::<1>(b, n);
        self.add_weighted_row::<2>(b, n);
        self.add_weighted_row::<3>(b, n);
        self.add_weighted_row::<4>(b, n);
        self.add_weighted_row::<5>(b, n);
        self.add_weighted_row::<6>(b, n);
        self.add_weighted_row::<7>(b, n);
    }

    /// Row `A` of M and N₂ and entry `A` of g and h, in one sweep over the
    /// block's lanes (nothing when `A` ≥ `P`). Both bounds of the loop over
    /// c are constants, so the compiler unrolls it and keeps the row's
    /// partial sums in registers for the whole block (with `a` a loop
    /// variable it kept them in memory, a load and a store per product);
    /// each x_c is loaded once for both matrices and x_A once for all four
    /// sums (when M, N₂, g and h were summed in sweeps of their own, a pass
    /// at p = 4 took 12% longer on one thread). Each partial sum gets its
    /// additions in row order ((f·x_A)·x_c for the matrices, x_A·f for the
    /// vectors), as in those sweeps, so the same bits; only the order in which
    /// different sums are updated changed.
    #[inline(always)]
    fn add_weighted_row<const A: usize>(&mut self, b: &Block<P>, n: usize) {
        if A >= P {
            return;
        }
        let (mut m, mut n2, mut g, mut h) = (self.m[A], self.n2[A], self.g[A], self.h[A]);
        for i in (0..n).step_by(LANES) {
            let xa = lane(&b.x[A], i);
            let fw = times(&lane(&b.w, i), &xa);
            let fw2 = times(&lane(&b.w2, i), &xa);
            for c in A..P {
                let xc = lane(&b.x[c], i);
                add_product(&mut m[c], &fw, &xc);
                add_product(&mut n2[c], &fw2, &xc);
            }
            add_product(&mut g, &xa, &lane(&b.wr, i));
            add_product(&mut h, &xa, &lane(&b.w2r, i));
        }
        (self.m[A], self.n2[A], self.g[A], self.h[A]) = (m, n2, g, h);
    }

    /// [`LaneSums::add_block`] for a design of one column of ones (P = 1),
    /// which is not read: each sum over f·x_a·x_c or x_a·f is the sum over f,
    /// and since f·1 = f exactly, adding f gives the very bits the general
    /// block gives with a column of ones (its rows past the end are 0 there
    /// and f is 0 here: the same +0).
    #[inline(always)]
    fn add_block_ones<const CURV: bool>(&mut self, b: &Block<P>, n: usize) {
        add_sum(&mut self.scalars[0], &b.w, n);
        add_dot(&mut self.scalars[2], &b.wr, &b.r, n);
        add_dot(&mut self.scalars[3], &b.w2r, &b.r, n);
        add_sum(&mut self.g[0], &b.wr, n);
        add_sum(&mut self.h[0], &b.w2r, n);
        add_sum(&mut self.m[0][0], &b.w, n);
        add_sum(&mut self.n2[0][0], &b.w2, n);
        if CURV {
            add_sum(&mut self.scalars[1], &b.w2, n);
            add_dot(&mut self.scalars[4], &b.w3r, &b.r, n);
            add_sum(&mut self.h3[0], &b.w3r, n);
            add_sum(&mut self.n3[0][0], &b.w3, n);
        }
    }
}

/// The sums for `P` columns at each of `points` into `outs` (the design
/// rows read once); `LOG` and `CURV` choose the
/// optional parts at compile time, so the loops have no branches: in lanes
/// ([`in_lanes_at`]) from [`BLOCK`] rows on, in one running sum per entry
/// ([`running`]) below (for the small fits of permutation tests and
/// simulations, where the lanes' fixed costs per pass outweigh their gain:
/// the permutation benchmark at k = 50 took 0.12-0.13 s against 0.09-0.10 s).
pub(super) fn fixed_many<const P: usize, const LOG: bool, const CURV: bool, const ONES: bool>(
    data: &Data<'_>,
    points: &[Point<'_>],
    outs: &mut [Sums],
) {
    if data.k() < BLOCK {
        for (pt, out) in points.iter().zip(outs) {
            running::<P, LOG, CURV>(data, pt.tau2, pt.beta0, out);
        }
        return;
    }
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: `in_lanes_avx2` only needs the processor to have AVX2,
        // which was detected at run time on the line above.
        unsafe { in_lanes_avx2::<P, LOG, CURV, ONES>(data, points, outs) };
        return;
    }
    in_lanes_at::<P, LOG, CURV, ONES>(data, points, outs);
}

/// [`in_lanes_at`] compiled for processors with AVX2 (called only where it
/// was detected): one 256-bit instruction works on all four lanes where the
/// baseline x86-64 build needs two 128-bit ones. The same operations on the
/// same numbers in the same order, so the same bits: AVX2 brings no fused
/// multiply-add (that is the separate FMA feature, not enabled here, and
/// Rust never fuses a product and a sum on its own), and IEEE 754
/// arithmetic rounds each element exactly whatever the vector width. The
/// logarithms are the same library calls. Tested bit for bit against the
/// baseline build in `near_tests`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
pub(super) fn in_lanes_avx2<const P: usize, const LOG: bool, const CURV: bool, const ONES: bool>(
    data: &Data<'_>,
    points: &[Point<'_>],
    outs: &mut [Sums],
) {
    in_lanes_at::<P, LOG, CURV, ONES>(data, points, outs);
}

/// The sums for `P` columns with one running sum per entry, rows in order.
pub(super) fn running<const P: usize, const LOG: bool, const CURV: bool>(
    data: &Data<'_>,
    tau2: f64,
    beta0: &[f64],
    out: &mut Sums,
) {
    let b0: &[f64; P] = beta0.try_into().expect("p coefficients");
    let mut m = [[0.0f64; P]; P];
    let mut n2 = [[0.0f64; P]; P];
    let mut n3 = [[0.0f64; P]; P];
    let (mut g, mut h, mut h3) = ([0.0f64; P], [0.0f64; P], [0.0f64; P]);
    out.clear();
    let s = out;
    for ((xi, &vi), &yi) in data.x.chunks_exact(P).zip(data.v).zip(data.y) {
        let xi: &[f64; P] = xi.try_into().expect("rows have p entries");
        let vt = vi + tau2;
        let w = 1.0 / vt;
        if LOG {
            s.sum_log_vt += vt.ln();
        }
        let mut fit = 0.0;
        for (x, b) in xi.iter().zip(b0) {
            fit += x * b;
        }
        let r = yi - fit;
        let (w2, wr) = (w * w, w * r);
        let w2r = w * wr;
        s.sum_w += w;
        s.sum_wr2 += wr * r;
        s.sum_w2r2 += w2r * r;
        for a in 0..P {
            let (wxa, w2xa) = (w * xi[a], w2 * xi[a]);
            g[a] += xi[a] * wr;
            h[a] += xi[a] * w2r;
            for c in a..P {
                m[a][c] += wxa * xi[c];
                n2[a][c] += w2xa * xi[c];
            }
        }
        if CURV {
            let (w3, w3r) = (w2 * w, w * w2r);
            s.sum_w2 += w2;
            s.sum_w3r2 += w3r * r;
            for a in 0..P {
                let w3xa = w3 * xi[a];
                h3[a] += xi[a] * w3r;
                for c in a..P {
                    n3[a][c] += w3xa * xi[c];
                }
            }
        }
    }
    s.m.extend(m.iter().flatten());
    s.n2.extend(n2.iter().flatten());
    s.g.extend(g);
    s.h.extend(h);
    if CURV {
        s.n3.extend(n3.iter().flatten());
        s.h3.extend(h3);
    }
}

/// The sums for `P` columns in [`LANES`] lanes: rows go [`BLOCK`] at a time,
/// each block's sums [`LANES`] rows at a time ([`in_lanes_at`] at one
/// point, in the baseline build: the tests compare the others with it).
#[cfg(test)]
pub(super) fn in_lanes<const P: usize, const LOG: bool, const CURV: bool>(
    data: &Data<'_>,
    tau2: f64,
    beta0: &[f64],
    out: &mut Sums,
) {
    in_lanes_at::<P, LOG, CURV, false>(data, &[Point { tau2, beta0 }], std::slice::from_mut(out));
}

/// [`in_lanes_at`] at each of `points` into `outs`: each block's design rows
/// are copied once, then each point's weights, residuals and sums follow in
/// turn (so every point's sums are those of a pass at that point alone). Always
/// inlined, so that [`in_lanes_avx2`] compiles its body (and that of every
/// helper, all inlined too) for AVX2. With `ONES` (P = 1 and the design a
/// column of ones) the design is not read: the block's column is ones, each
/// fit x'β₀ is β₀ (1·β₀ exactly) and the sums are
/// [`LaneSums::add_block_ones`], the same bits as the general block's.
#[inline(always)]
fn in_lanes_at<const P: usize, const LOG: bool, const CURV: bool, const ONES: bool>(
    data: &Data<'_>,
    points: &[Point<'_>],
    outs: &mut [Sums],
) {
    let mut accs: Vec<LaneSums<P>> = points.iter().map(|_| LaneSums::new()).collect();
    let zero = [0.0; BLOCK];
    let mut b = Block::<P> {
        x: [if ONES { [1.0; BLOCK] } else { zero }; P],
        r: zero,
        w: zero,
        w2: zero,
        w3: zero,
        wr: zero,
        w2r: zero,
        w3r: zero,
    };
    let x = if ONES { &[][..] } else { data.x };
    let blocks = data.v.chunks(BLOCK).zip(data.y.chunks(BLOCK)).enumerate();
    for (j, (vs, ys)) in blocks {
        if !ONES {
            let xs = &x[j * BLOCK * P..(j * BLOCK + ys.len()) * P];
            for (i, xi) in xs.chunks_exact(P).enumerate() {
                for (column, &xa) in b.x.iter_mut().zip(xi) {
                    column[i] = xa;
                }
            }
        }
        // The last block's rows up to a whole lane are empty (the rows
        // below are written for each point, these never).
        let n = ys.len().div_ceil(LANES) * LANES;
        for i in ys.len()..n {
            for col in b.x.iter_mut().chain([
                &mut b.r, &mut b.w, &mut b.w2, &mut b.w3, &mut b.wr, &mut b.w2r, &mut b.w3r,
            ]) {
                col[i] = 0.0;
            }
        }
        for (pt, acc) in points.iter().zip(&mut accs) {
            let (tau2, b0): (f64, &[f64; P]) =
                (pt.tau2, pt.beta0.try_into().expect("p coefficients"));
            // Element by element (so in vector instructions): the weights,
            // the residuals and their products.
            for (i, (&vi, &yi)) in vs.iter().zip(ys).enumerate() {
                let w = 1.0 / (vi + tau2);
                // 0 + 1·β₀ is 0 + β₀ (a −0 turned +0, as the general sum does).
                let fit = if ONES {
                    0.0 + b0[0]
                } else {
                    let mut fit = 0.0;
                    for (column, &ba) in b.x.iter().zip(b0) {
                        fit += column[i] * ba;
                    }
                    fit
                };
                let r = yi - fit;
                let wr = w * r;
                let w2r = w * wr;
                (b.r[i], b.w[i], b.w2[i], b.wr[i], b.w2r[i]) = (r, w, w * w, wr, w2r);
                if CURV {
                    (b.w3[i], b.w3r[i]) = (w * w * w, w * w2r);
                }
            }
            if LOG {
                for (i, &vi) in vs.iter().enumerate() {
                    acc.scalars[5][i % LANES] += (vi + tau2).ln();
                }
            }
            if ONES {
                acc.add_block_ones::<CURV>(&b, n);
            } else {
                acc.add_block::<CURV>(&b, n);
            }
        }
    }
    for (acc, out) in accs.iter().zip(outs) {
        acc.write::<LOG, CURV>(out);
    }
}

/// [`fixed_many`] at one point for any number of columns.
pub(super) fn general(data: &Data<'_>, tau2: f64, want: Want, beta0: &[f64], out: &mut Sums) {
    let p = data.p;
    let curv = want.curvature;
    out.clear();
    let s = out;
    s.m.resize(p * p, 0.0);
    s.n2.resize(p * p, 0.0);
    s.g.resize(p, 0.0);
    s.h.resize(p, 0.0);
    if curv {
        s.n3.resize(p * p, 0.0);
        s.h3.resize(p, 0.0);
    }
    for ((xi, &vi), &yi) in data.x.chunks_exact(p).zip(data.v).zip(data.y) {
        let vt = vi + tau2;
        let w = 1.0 / vt;
        if want.log_terms {
            s.sum_log_vt += vt.ln();
        }
        let fit: f64 = xi.iter().zip(beta0).map(|(x, b)| x * b).sum();
        let r = yi - fit;
        let (w2, wr) = (w * w, w * r);
        let (w2r, w3) = (w * wr, w2 * w);
        let w3r = w * w2r;
        s.sum_w += w;
        s.sum_wr2 += wr * r;
        s.sum_w2r2 += w2r * r;
        if curv {
            s.sum_w2 += w2;
            s.sum_w3r2 += w3r * r;
        }
        for a in 0..p {
            s.g[a] += xi[a] * wr;
            s.h[a] += xi[a] * w2r;
            for c in a..p {
                s.m[a * p + c] += w * xi[a] * xi[c];
                s.n2[a * p + c] += w2 * xi[a] * xi[c];
            }
            if curv {
                s.h3[a] += xi[a] * w3r;
                for c in a..p {
                    s.n3[a * p + c] += w3 * xi[a] * xi[c];
                }
            }
        }
    }
}
