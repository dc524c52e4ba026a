//! Rotation matrices of the real spherical harmonics: for a 3×3 rotation `R`, the block-diagonal
//! matrix `D(R)` with `Y(R·u) = D(R)·Y(u)` for every direction `u` (ACN order, no Condon–Shortley
//! phase). One block per order; a rotation never mixes orders.
//!
//! The blocks are built by the recursion of Ivanic & Ruedenberg (J. Phys. Chem. 1996, with the
//! corrections of their 1998 erratum; citation and coefficients from memory, which is why the
//! tests check the result against direct re-encoding), which derives order l from order l−1 and the
//! order-1 block. That recursion is stated for orthonormal real harmonics; SN3D differs from
//! them by one factor per order, which cancels in `D`, so the same blocks serve SN3D and N3D.
//!
//! Reflections are handled too: an improper orthogonal `Q` is `−(−Q)` with `−Q` a rotation, and
//! `Y(−u) = (−1)^l Y(u)`, so `D(Q) = (−1)^l D(−Q)` order by order.

use super::channel_count;

/// A 3×3 matrix in the crate's axes (x front, y left, z up), rows first.
pub type Matrix3 = [[f64; 3]; 3];

/// Determinant of a 3×3 matrix.
pub fn determinant3(m: &Matrix3) -> f64 {
    m[0][0] * (m[1][1] * m[2][2] - m[1][2] * m[2][1])
        - m[0][1] * (m[1][0] * m[2][2] - m[1][2] * m[2][0])
        + m[0][2] * (m[1][0] * m[2][1] - m[1][1] * m[2][0])
}

/// The SH transform of an orthogonal 3×3 matrix up to some order: one square block per order,
/// row-major, indexed [l][(l+m)·(2l+1) + (l+m')] for degrees m (row) and m' (column).
#[derive(Clone, Debug, PartialEq)]
pub struct ShRotation {
    blocks: Vec<Vec<f64>>,
}

impl ShRotation {
    /// `D(q)` for orders 0..=`order`. `q` must be orthogonal (a rotation or a rotation times a
    /// reflection); it is not re-orthogonalised here.
    pub fn new(order: usize, q: &Matrix3) -> Self {
        let improper = determinant3(q) < 0.0;
        let sign = if improper { -1.0 } else { 1.0 };
        let r: Matrix3 = std::array::from_fn(|i| std::array::from_fn(|j| sign * q[i][j]));
        let mut blocks = Vec::with_capacity(order + 1);
        blocks.push(vec![1.0]);
        if order >= 1 {
            // Order 1 in ACN order is (y, z, x): the rotation matrix with its axes permuted.
            const AXIS_OF_DEGREE: [usize; 3] = [1, 2, 0];
            let mut first = vec![0.0; 9];
            for (row, &a) in AXIS_OF_DEGREE.iter().enumerate() {
                for (col, &b) in AXIS_OF_DEGREE.iter().enumerate() {
                    first[row * 3 + col] = r[a][b];
                }
            }
            blocks.push(first);
        }
        for l in 2..=order {
            let next = next_block(l, &blocks[1], &blocks[l - 1]);
            blocks.push(next);
        }
        if improper {
            for (l, block) in blocks.iter_mut().enumerate() {
                if l % 2 == 1 {
                    block.iter_mut().for_each(|v| *v = -*v);
                }
            }
        }
        Self { blocks }
    }

    /// Highest order.
    pub fn order(&self) -> usize {
        self.blocks.len() - 1
    }

    /// The block of order `l`, row-major (2l+1)×(2l+1), rows and columns by degree −l..=l.
    pub fn block(&self, l: usize) -> &[f64] {
        &self.blocks[l]
    }

    /// Element (row ACN, column ACN) of the full matrix; zero across orders.
    pub fn element(&self, row_acn: usize, col_acn: usize) -> f64 {
        let (l, m) = super::order_degree(row_acn);
        let (l2, m2) = super::order_degree(col_acn);
        if l != l2 || l > self.order() {
            return 0.0;
        }
        let size = 2 * l + 1;
        self.blocks[l][(l as i32 + m) as usize * size + (l as i32 + m2) as usize]
    }

    /// `out = D·input` for ACN vectors of (order+1)² values (extra values are left alone).
    pub fn apply(&self, input: &[f64], out: &mut [f64]) {
        assert!(
            input.len() >= channel_count(self.order())
                && out.len() >= input.len().min(channel_count(self.order()))
        );
        for (l, block) in self.blocks.iter().enumerate() {
            let size = 2 * l + 1;
            let base = l * l;
            for row in 0..size {
                let coefficients = &block[row * size..(row + 1) * size];
                out[base + row] = coefficients
                    .iter()
                    .zip(&input[base..base + size])
                    .map(|(a, b)| a * b)
                    .sum();
            }
        }
    }
}

/// Order-`l` block from the order-1 block `r1` and the order-(l−1) block `prev`.
fn next_block(l: usize, r1: &[f64], prev: &[f64]) -> Vec<f64> {
    let li = l as i32;
    let size = 2 * l + 1;
    let mut block = vec![0.0; size * size];
    for m in -li..=li {
        for n in -li..=li {
            let (u, v, w) = uvw_coefficients(li, m, n);
            let mut value = 0.0;
            if u != 0.0 {
                value += u * term_u(li, m, n, r1, prev);
            }
            if v != 0.0 {
                value += v * term_v(li, m, n, r1, prev);
            }
            if w != 0.0 {
                value += w * term_w(li, m, n, r1, prev);
            }
            block[(m + li) as usize * size + (n + li) as usize] = value;
        }
    }
    block
}

/// Element (i, j) of the order-1 block, degrees −1..=1.
fn first(r1: &[f64], i: i32, j: i32) -> f64 {
    r1[((i + 1) * 3 + (j + 1)) as usize]
}

/// Element (a, b) of the order-(l−1) block, degrees −(l−1)..=(l−1).
fn previous(l: i32, prev: &[f64], a: i32, b: i32) -> f64 {
    let size = 2 * l - 1;
    prev[((a + l - 1) * size + (b + l - 1)) as usize]
}

/// The recursion's coefficients u, v, w of element (m, n) of order l.
fn uvw_coefficients(l: i32, m: i32, n: i32) -> (f64, f64, f64) {
    let delta = if m == 0 { 1.0 } else { 0.0 };
    let denominator = if n.abs() == l {
        (2 * l * (2 * l - 1)) as f64
    } else {
        ((l + n) * (l - n)) as f64
    };
    let am = m.abs();
    let u = (((l + m) * (l - m)) as f64 / denominator).sqrt();
    let v = 0.5
        * ((1.0 + delta) * ((l + am - 1) * (l + am)) as f64 / denominator).sqrt()
        * (1.0 - 2.0 * delta);
    let w = -0.5 * (((l - am - 1) * (l - am)) as f64 / denominator).sqrt() * (1.0 - delta);
    (u, v, w)
}

/// The recursion's helper P_i(l, a, b).
fn helper_p(i: i32, l: i32, a: i32, b: i32, r1: &[f64], prev: &[f64]) -> f64 {
    if b == l {
        first(r1, i, 1) * previous(l, prev, a, l - 1)
            - first(r1, i, -1) * previous(l, prev, a, -l + 1)
    } else if b == -l {
        first(r1, i, 1) * previous(l, prev, a, -l + 1)
            + first(r1, i, -1) * previous(l, prev, a, l - 1)
    } else {
        first(r1, i, 0) * previous(l, prev, a, b)
    }
}

fn term_u(l: i32, m: i32, n: i32, r1: &[f64], prev: &[f64]) -> f64 {
    helper_p(0, l, m, n, r1, prev)
}

fn term_v(l: i32, m: i32, n: i32, r1: &[f64], prev: &[f64]) -> f64 {
    let p = |i, a| helper_p(i, l, a, n, r1, prev);
    if m == 0 {
        p(1, 1) + p(-1, -1)
    } else if m > 0 {
        let d: f64 = if m == 1 { 1.0 } else { 0.0 };
        p(1, m - 1) * (1.0 + d).sqrt() - p(-1, -m + 1) * (1.0 - d)
    } else {
        let d: f64 = if m == -1 { 1.0 } else { 0.0 };
        p(1, m + 1) * (1.0 - d) + p(-1, -m - 1) * (1.0 + d).sqrt()
    }
}

fn term_w(l: i32, m: i32, n: i32, r1: &[f64], prev: &[f64]) -> f64 {
    let p = |i, a| helper_p(i, l, a, n, r1, prev);
    if m > 0 {
        p(1, m + 1) + p(-1, -m - 1)
    } else {
        // m < 0 (the coefficient w is zero for m = 0).
        p(1, m - 1) - p(-1, -m + 1)
    }
}
