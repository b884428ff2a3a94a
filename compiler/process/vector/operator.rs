//! The full-vector finite-difference operator for the transverse magnetic
//! field (Hx, Hy) of a dielectric waveguide, on a Yee cell.
//!
//! Method: Zhu & Brown, "Full-vectorial finite-difference analysis of
//! microstructured optical fibers", Opt. Express 10, 853 (2002), which
//! discretises Maxwell's curl equations on the two-dimensional Yee cell
//! (Yee, IEEE Trans. Antennas Propag. 14, 302, 1966) and eliminates Ex, Ey,
//! Ez and Hz, leaving an eigenproblem for (Hx, Hy) with eigenvalue beta^2.
//! It is the staggered-grid counterpart of the node-based scheme of
//! Fallahkhair, Li & Murphy (J. Lightwave Technol. 26, 1423, 2008) and
//! solves the same equations; here it is written out for a non-uniform grid.
//!
//! With fields `~ exp(j(wt - beta z))`, H scaled by the vacuum impedance and
//! `zeta = dHy/dx - dHx/dy` (`= j k0 eps_z Ez`), the continuous equations
//! are (eliminating Ex, Ey with the curl of E and Hz with div H = 0):
//!
//! ```text
//! beta^2 Hx = k0^2 eps_y Hx - eps_y d/dy (zeta / eps_z) + d/dx (dHx/dx + dHy/dy)
//! beta^2 Hy = k0^2 eps_x Hy + eps_x d/dx (zeta / eps_z) + d/dy (dHx/dx + dHy/dy)
//! ```
//!
//! Placement (nodes at grid lines, material interfaces on them): Hx and Ey
//! at (x_i, y_j+1/2), Hy and Ex at (x_i+1/2, y_j), Ez and zeta at the nodes
//! (x_i, y_j), Hz and div H at the cell centres. Each field component's
//! permittivity is the average over its dual cell, which for this placement
//! is always across interfaces the component is tangential to (Ex across
//! horizontal interfaces, Ey across vertical ones, Ez over the four cells of
//! a node): the arithmetic, length- or area-weighted mean, the averaging of
//! the Yee cell at dielectric interfaces (Zhu & Brown 2002, section 2;
//! Fallahkhair et al. 2008 average the four cells around a node the same
//! way). Normal components sit between the interfaces and need no average.
//!
//! Boundary: a perfectly conducting wall on all four sides (tangential E
//! and normal H zero: Hx = 0 on the left and right walls, Hy = 0 on the top
//! and bottom, Ez = 0 on all). Guided fields decay exponentially into the
//! claddings, and the grid puts the wall eight decay lengths out
//! ([`super::DECAY_LENGTHS`]), where the field is down by e^-8.
//!
//! The operator is scaled by `1 / k0^2`, so its eigenvalues are `n_eff^2`.

use super::grid::Grid;

/// A square sparse matrix in compressed rows.
#[derive(Clone, Debug)]
pub(crate) struct Csr {
    pub n: usize,
    pub indptr: Vec<usize>,
    pub indices: Vec<usize>,
    pub values: Vec<f64>,
}

impl Csr {
    /// Rows of (column, value), merged and sorted.
    fn from_rows(rows: Vec<Vec<(usize, f64)>>) -> Csr {
        let n = rows.len();
        let mut indptr = Vec::with_capacity(n + 1);
        let mut indices = Vec::new();
        let mut values = Vec::new();
        indptr.push(0);
        for mut row in rows {
            row.sort_by_key(|e| e.0);
            let mut last = usize::MAX;
            for (c, v) in row {
                if c == last {
                    *values.last_mut().expect("value") += v;
                } else {
                    indices.push(c);
                    values.push(v);
                    last = c;
                }
            }
            indptr.push(indices.len());
        }
        Csr {
            n,
            indptr,
            indices,
            values,
        }
    }

    pub fn nnz(&self) -> usize {
        self.values.len()
    }

    /// `y = A x`.
    pub fn matvec(&self, x: &[f64], y: &mut [f64]) {
        for (r, out) in y.iter_mut().enumerate().take(self.n) {
            let mut s = 0.0;
            for k in self.indptr[r]..self.indptr[r + 1] {
                s += self.values[k] * x[self.indices[k]];
            }
            *out = s;
        }
    }

    /// Entries of `A - shift I` as (row, column, value).
    pub fn shifted_triplets(&self, shift: f64) -> Vec<(usize, usize, f64)> {
        let mut t = Vec::with_capacity(self.nnz() + self.n);
        for r in 0..self.n {
            for k in self.indptr[r]..self.indptr[r + 1] {
                t.push((r, self.indices[k], self.values[k]));
            }
            t.push((r, r, -shift));
        }
        t
    }
}

/// Where the unknowns live: Hx(i, j) at (x_i, y_j+1/2) for i in 1..nx,
/// j in 0..ny, then Hy(i, j) at (x_i+1/2, y_j) for i in 0..nx, j in 1..ny.
#[derive(Clone, Copy, Debug)]
pub(crate) struct Layout {
    pub nx: usize,
    pub ny: usize,
}

impl Layout {
    pub fn n_hx(&self) -> usize {
        (self.nx - 1) * self.ny
    }

    pub fn n(&self) -> usize {
        self.n_hx() + self.nx * (self.ny - 1)
    }

    /// Hx at (x_i, y_j+1/2); `None` on the left and right walls.
    pub fn hx(&self, i: usize, j: usize) -> Option<usize> {
        (i > 0 && i < self.nx && j < self.ny).then(|| (i - 1) * self.ny + j)
    }

    /// Hy at (x_i+1/2, y_j); `None` on the top and bottom walls.
    pub fn hy(&self, i: usize, j: usize) -> Option<usize> {
        (j > 0 && j < self.ny && i < self.nx).then(|| self.n_hx() + i * (self.ny - 1) + (j - 1))
    }
}

/// The discretised operator (eigenvalues n_eff^2) and what it needs to
/// interpret its eigenvectors.
#[derive(Clone, Debug)]
pub(crate) struct Operator {
    pub a: Csr,
    pub layout: Layout,
    /// Dual-cell areas of the unknowns, for field norms.
    pub area: Vec<f64>,
}

type Stencil = Vec<(usize, f64)>;

fn axpy(into: &mut Stencil, scale: f64, st: &Stencil) {
    into.extend(st.iter().map(|&(c, v)| (c, scale * v)));
}

impl Operator {
    /// Assembles the operator of Zhu & Brown (module doc) on `grid` at
    /// `wavelength_um`.
    // The stencils address neighbours (i - 1, i + 1) of several arrays.
    #[allow(clippy::needless_range_loop)]
    pub fn new(grid: &Grid, wavelength_um: f64) -> Operator {
        let (nx, ny) = (grid.nx(), grid.ny());
        let layout = Layout { nx, ny };
        let k0 = 2.0 * std::f64::consts::PI / wavelength_um;
        let inv_k02 = 1.0 / (k0 * k0);
        let dx: Vec<f64> = grid.x.windows(2).map(|w| w[1] - w[0]).collect();
        let dy: Vec<f64> = grid.y.windows(2).map(|w| w[1] - w[0]).collect();
        // Dual steps at interior nodes (0 at the walls, never used).
        let dual = |d: &[f64], i: usize| -> f64 {
            if i == 0 || i == d.len() {
                0.0
            } else {
                0.5 * (d[i - 1] + d[i])
            }
        };
        let e = |i: usize, j: usize| grid.cell_eps(i, j);
        // eps_y at Hx(i, j): across the vertical line x_i.
        let eps_y =
            |i: usize, j: usize| (e(i - 1, j) * dx[i - 1] + e(i, j) * dx[i]) / (dx[i - 1] + dx[i]);
        // eps_x at Hy(i, j): across the horizontal line y_j.
        let eps_x =
            |i: usize, j: usize| (e(i, j - 1) * dy[j - 1] + e(i, j) * dy[j]) / (dy[j - 1] + dy[j]);
        // eps_z at node (i, j): over the four cells.
        let eps_z = |i: usize, j: usize| {
            let mut num = 0.0;
            let mut den = 0.0;
            for (ci, cj) in [(i - 1, j - 1), (i, j - 1), (i - 1, j), (i, j)] {
                let w = dx[ci] * dy[cj];
                num += e(ci, cj) * w;
                den += w;
            }
            num / den
        };
        let hx = |i: usize, j: usize, c: f64, st: &mut Stencil| {
            if let Some(k) = layout.hx(i, j) {
                st.push((k, c));
            }
        };
        let hy = |i: usize, j: usize, c: f64, st: &mut Stencil| {
            if let Some(k) = layout.hy(i, j) {
                st.push((k, c));
            }
        };
        // zeta / eps_z at node (i, j); zero on the walls (Ez = 0).
        let z = |i: usize, j: usize| -> Stencil {
            let mut st = Stencil::new();
            if i == 0 || i == nx || j == 0 || j == ny {
                return st;
            }
            let ez = eps_z(i, j);
            let (ax, ay) = (1.0 / (dual(&dx, i) * ez), 1.0 / (dual(&dy, j) * ez));
            hy(i, j, ax, &mut st);
            hy(i - 1, j, -ax, &mut st);
            hx(i, j, -ay, &mut st);
            hx(i, j - 1, ay, &mut st);
            st
        };
        // div H (transverse part) at cell (i, j).
        let div = |i: usize, j: usize| -> Stencil {
            let mut st = Stencil::new();
            hx(i + 1, j, 1.0 / dx[i], &mut st);
            hx(i, j, -1.0 / dx[i], &mut st);
            hy(i, j + 1, 1.0 / dy[j], &mut st);
            hy(i, j, -1.0 / dy[j], &mut st);
            st
        };
        let n = layout.n();
        let mut rows: Vec<Stencil> = vec![Vec::new(); n];
        let mut area = vec![0.0; n];
        for i in 1..nx {
            for j in 0..ny {
                let r = layout.hx(i, j).expect("interior Hx");
                let ey = eps_y(i, j);
                let mut st = vec![(r, ey)];
                // -eps_y d/dy (zeta/eps_z) at (x_i, y_j+1/2)
                let c = -ey * inv_k02 / dy[j];
                axpy(&mut st, c, &z(i, j + 1));
                axpy(&mut st, -c, &z(i, j));
                // d/dx div at x_i
                let c = inv_k02 / dual(&dx, i);
                axpy(&mut st, c, &div(i, j));
                axpy(&mut st, -c, &div(i - 1, j));
                rows[r] = st;
                area[r] = dual(&dx, i) * dy[j];
            }
        }
        for i in 0..nx {
            for j in 1..ny {
                let r = layout.hy(i, j).expect("interior Hy");
                let ex = eps_x(i, j);
                let mut st = vec![(r, ex)];
                // eps_x d/dx (zeta/eps_z) at (x_i+1/2, y_j)
                let c = ex * inv_k02 / dx[i];
                axpy(&mut st, c, &z(i + 1, j));
                axpy(&mut st, -c, &z(i, j));
                // d/dy div at y_j
                let c = inv_k02 / dual(&dy, j);
                axpy(&mut st, c, &div(i, j));
                axpy(&mut st, -c, &div(i, j - 1));
                rows[r] = st;
                area[r] = dx[i] * dual(&dy, j);
            }
        }
        Operator {
            a: Csr::from_rows(rows),
            layout,
            area,
        }
    }

    /// The share of `|Hy|^2` in the field energy `|Hx|^2 + |Hy|^2`,
    /// integrated over the cross-section: 1 for a pure TE (Ex, Hy) field.
    pub fn hy_fraction(&self, v: &[f64]) -> f64 {
        let nh = self.layout.n_hx();
        let part = |r: std::ops::Range<usize>| -> f64 {
            r.map(|k| v[k] * v[k] * self.area[k]).sum::<f64>()
        };
        let (px, py) = (part(0..nh), part(nh..v.len()));
        if px + py > 0.0 { py / (px + py) } else { 0.5 }
    }
}

#[cfg(test)]
mod tests {
    use super::super::grid::{Grid, Section};
    use super::*;

    fn uniform(n: usize, len: f64) -> Vec<f64> {
        (0..=n).map(|k| len * k as f64 / n as f64).collect()
    }

    fn dense_eigenvalues(a: &Csr) -> Vec<f64> {
        let m = faer::Mat::<f64>::from_fn(a.n, a.n, |r, c| {
            (a.indptr[r]..a.indptr[r + 1])
                .find(|&k| a.indices[k] == c)
                .map_or(0.0, |k| a.values[k])
        });
        let ev = m.eigenvalues().unwrap();
        for z in &ev {
            assert!(z.im.abs() < 1e-9, "complex eigenvalue {z:?}");
        }
        let mut re: Vec<f64> = ev.iter().map(|z| z.re).collect();
        re.sort_by(|a, b| b.total_cmp(a));
        re
    }

    #[test]
    fn a_filled_metal_box_has_the_yee_spectrum_of_its_te_and_tm_modes() {
        // A hollow rectangular metallic guide a x b filled with eps has TE_mn
        // (m, n >= 0, not both 0) and TM_mn (m, n >= 1) modes with
        // beta^2 = k0^2 eps - (m pi / a)^2 - (n pi / b)^2 (Pozar, Microwave
        // Engineering, 4th ed., 2012, section 3.3). On a uniform Yee grid the
        // second differences replace (m pi / a)^2 by (2 / h sin(m pi h / 2a))^2
        // exactly (the discrete sine transform), so every eigenvalue of the
        // operator must match, both families, and there must be no others
        // (no spurious modes).
        let (a, b, nx, ny, eps, wl) = (1.0, 0.6, 7, 5, 2.25, 1.55);
        let sec = Section {
            eps_below: eps,
            eps_above: eps,
            rects: vec![],
        };
        let grid = Grid::new(
            uniform(nx, a),
            uniform(ny, b).iter().map(|y| y - 0.3).collect(),
            &sec,
        );
        let op = Operator::new(&grid, wl);
        assert_eq!(op.layout.n(), 2 * nx * ny - nx - ny);
        let k0 = 2.0 * std::f64::consts::PI / wl;
        let (hx, hy) = (a / nx as f64, b / ny as f64);
        let kx = |m: usize| {
            (2.0 / hx * (m as f64 * std::f64::consts::PI * hx / (2.0 * a)).sin()).powi(2)
        };
        let ky = |n: usize| {
            (2.0 / hy * (n as f64 * std::f64::consts::PI * hy / (2.0 * b)).sin()).powi(2)
        };
        let mut want = Vec::new();
        for m in 0..nx {
            for n in 0..ny {
                let v = eps - (kx(m) + ky(n)) / (k0 * k0);
                if m + n > 0 {
                    want.push(v); // TE_mn
                }
                if m > 0 && n > 0 {
                    want.push(v); // TM_mn
                }
            }
        }
        want.sort_by(|a, b| b.total_cmp(a));
        let got = dense_eigenvalues(&op.a);
        assert_eq!(got.len(), want.len());
        for (g, w) in got.iter().zip(&want) {
            assert!((g - w).abs() < 1e-9 * w.abs().max(1.0), "{g} vs {w}");
        }
    }

    #[test]
    fn a_non_uniform_grid_converges_to_the_metal_box_cutoffs() {
        // Same box on a graded grid: the TE10 and TE01 values
        // eps - ((pi/a)^2 or (pi/b)^2) / k0^2 (Pozar 2012, section 3.3) are
        // approached at second order: halving every cell cuts the error by
        // about 4.
        let (a, b, eps, wl) = (1.0, 0.6, 2.25, 1.55);
        let k0 = 2.0 * std::f64::consts::PI / wl;
        let pi = std::f64::consts::PI;
        let te10 = eps - (pi / a).powi(2) / (k0 * k0);
        let te01 = eps - (pi / b).powi(2) / (k0 * k0);
        let sec = Section {
            eps_below: eps,
            eps_above: eps,
            rects: vec![],
        };
        let graded = |n: usize, len: f64| -> Vec<f64> {
            // x = len (t + 0.3 sin(pi t) ... ) stretched, monotone
            (0..=n)
                .map(|k| {
                    let t = k as f64 / n as f64;
                    len * (t - 0.25 * (2.0 * pi * t).sin() / (2.0 * pi))
                })
                .collect()
        };
        let err = |n: usize| {
            let grid = Grid::new(graded(2 * n, a), graded(n, b), &sec);
            let op = Operator::new(&grid, wl);
            let ev = dense_eigenvalues(&op.a);
            ((ev[0] - te10).abs(), (ev[1] - te01).abs())
        };
        let (e1, f1) = err(6);
        let (e2, f2) = err(12);
        assert!(e2 < 1e-2 && f2 < 3e-2, "{e2} {f2}");
        let (p, q) = ((e1 / e2).log2(), (f1 / f2).log2());
        assert!(
            (1.7..2.3).contains(&p) && (1.7..2.3).contains(&q),
            "orders {p} {q}"
        );
    }
}
