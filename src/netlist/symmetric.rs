//! Circuits of resistors and capacitors only, driven by a voltage or a current and observed
//! as a node voltage: nodal analysis gives the symmetric-definite pencil (G, C), and the
//! modes come from a symmetric eigenproblem, cheaper and more accurate than the general one.
//!
//! Nodes without capacitors are eliminated exactly (Schur complement of their conductance
//! block, which keeps symmetry); a capacitor to the driven node brings a u′ term, removed by
//! a change of state. With C = L·Lᵀ (Cholesky; C diagonal in the common case) the state
//! matrix is −S with S = L⁻¹ Ĝ L⁻ᵀ symmetric (the symmetric-definite reduction of the
//! generalised eigenproblem, Golub & Van Loan, Matrix Computations, 4th ed. 2013, §8.7.2).
//! When S is tridiagonal (or a permutation of one: RC lines and ladders) the tridiagonal
//! eigensolver is used directly; otherwise the dense one (both faer).
//!
//! Slow poles carry the absolute error ε‖S‖ of any dense eigensolver. Each is refined by the
//! Rayleigh quotient of its eigenvector evaluated as a ratio of branch energies,
//! Σ g·(Δv)² / Σ c·(Δv)², a sum of positive terms: exact to rounding for the vector given,
//! and stationary, so the eigenvector's error enters squared (Parlett, The Symmetric
//! Eigenvalue Problem, 1998, §4.6).

use faer::linalg::solvers::Solve;
use faer::{Mat, Side};
use nalgebra::{DMatrix, DVector};
use num_complex::Complex64;

use super::check::Circuit;
use super::function::{CircuitFunction, CircuitMode, all_finite, drop_negligible, sort_modes};
use super::spec::{NetlistSpec, Output, PartKind, StateSpace, Stimulus};

/// Largest order for which zeros are computed (as for the general path).
const MAX_ZERO_ORDER: usize = 40;

/// Nodal matrices of an RC circuit over every node (ground excluded).
struct Nodal {
    g: Mat<f64>,
    c: Mat<f64>,
    /// Excitation of each node's KCL row per unit u (current stimulus), and output weights.
    b: Vec<f64>,
    out: Vec<f64>,
    /// The node held at u (voltage stimulus).
    driven: Option<usize>,
    /// Two-terminal branches (node, node, value): conductances and capacitances.
    resistors: Vec<(Option<usize>, Option<usize>, f64)>,
    capacitors: Vec<(Option<usize>, Option<usize>, f64)>,
}

/// The analysis, or `None` when the circuit is not of this kind (the general path runs);
/// the zeros (for display) only when `with_zeros`.
pub(crate) fn analyse(
    spec: &NetlistSpec,
    circuit: &Circuit,
    with_zeros: bool,
) -> Option<CircuitFunction> {
    let nodal = stamp(spec, circuit)?;
    let cond = condense(&nodal)?;
    let sys = reduce_store(&cond)?;
    let (lam, q) = eigen(&sys.s)?;
    let mut f = finish(&nodal, &cond, &sys, lam, &q)?;
    if with_zeros {
        f.zeros = zeros(&sys);
    }
    Some(f)
}

fn stamp(spec: &NetlistSpec, circuit: &Circuit) -> Option<Nodal> {
    let nn = circuit.nodes.len();
    let rs = spec.source_resistance.filter(|&r| r > 0.0);
    let with_source_node = spec.stimulus == Stimulus::Voltage && rs.is_some();
    let nt = nn + usize::from(with_source_node);
    let input = circuit.node(&spec.input);
    let mut resistors = Vec::new();
    let mut capacitors = Vec::new();
    for p in &spec.parts {
        match &p.kind {
            PartKind::Resistor { nodes, value } => resistors.push((
                circuit.node(&nodes[0]),
                circuit.node(&nodes[1]),
                1.0 / value,
            )),
            PartKind::Capacitor { nodes, value } => {
                capacitors.push((circuit.node(&nodes[0]), circuit.node(&nodes[1]), *value))
            }
            _ => return None,
        }
    }
    let mut b = vec![0.0; nt];
    let driven = match spec.stimulus {
        Stimulus::Voltage if with_source_node => {
            resistors.push((Some(nn), input, 1.0 / rs?));
            Some(nn)
        }
        Stimulus::Voltage => Some(input?),
        Stimulus::Current => {
            b[input?] = 1.0;
            if let Some(r) = rs {
                resistors.push((input, None, 1.0 / r));
            }
            None
        }
    };
    let mut out = vec![0.0; nt];
    match &spec.output {
        Output::Node(name) => {
            if let Some(k) = circuit.node(name) {
                out[k] += 1.0;
            }
        }
        Output::Differential(p, q) => {
            if let Some(k) = circuit.node(p) {
                out[k] += 1.0;
            }
            if let Some(k) = circuit.node(q) {
                out[k] -= 1.0;
            }
        }
        Output::CurrentThrough(_) => return None,
    }
    let mut g = Mat::<f64>::zeros(nt, nt);
    let mut c = Mat::<f64>::zeros(nt, nt);
    for (m, list) in [(&mut g, &resistors), (&mut c, &capacitors)] {
        for &(a, bn, y) in list {
            admittance(m, a, bn, y);
        }
    }
    Some(Nodal {
        g,
        c,
        b,
        out,
        driven,
        resistors,
        capacitors,
    })
}

fn admittance(m: &mut Mat<f64>, a: Option<usize>, b: Option<usize>, y: f64) {
    if let Some(a) = a {
        m[(a, a)] += y;
    }
    if let Some(b) = b {
        m[(b, b)] += y;
    }
    if let (Some(a), Some(b)) = (a, b) {
        m[(a, b)] -= y;
        m[(b, a)] -= y;
    }
}

/// The system on the capacitive nodes K after eliminating the resistive nodes R:
/// C_KK v′ + Ĝ v = b̂ u + e u′, y = ĉᵀv + d₀ u.
struct Condensed {
    /// Node indices of K and R.
    k: Vec<usize>,
    r: Vec<usize>,
    ghat: Mat<f64>,
    ckk: Mat<f64>,
    bhat: Vec<f64>,
    e: Vec<f64>,
    chat: Vec<f64>,
    d0: f64,
    /// G_RR⁻¹ G_RK: the resistive nodes' voltages are −X·v_K when u = 0.
    x: Mat<f64>,
}

fn condense(n: &Nodal) -> Option<Condensed> {
    let nt = n.b.len();
    let unknown: Vec<usize> = (0..nt).filter(|&i| Some(i) != n.driven).collect();
    let (k, r): (Vec<usize>, Vec<usize>) = unknown
        .iter()
        .partition(|&&i| (0..nt).any(|j| n.c[(i, j)] != 0.0));
    if k.is_empty() {
        return None;
    }
    // Right-hand sides per unit u and u′: a voltage stimulus moves the driven column over.
    let rhs = |i: usize| match n.driven {
        Some(d) => (-n.g[(i, d)], -n.c[(i, d)]),
        None => (n.b[i], 0.0),
    };
    let sub = |m: &Mat<f64>, rows: &[usize], cols: &[usize]| {
        Mat::<f64>::from_fn(rows.len(), cols.len(), |i, j| m[(rows[i], cols[j])])
    };
    let (nk, nr) = (k.len(), r.len());
    let c_d = n.driven.map_or(0.0, |d| n.out[d]);
    let mut ghat = sub(&n.g, &k, &k);
    let mut bhat: Vec<f64> = k.iter().map(|&i| rhs(i).0).collect();
    let mut chat: Vec<f64> = k.iter().map(|&i| n.out[i]).collect();
    let mut d0 = c_d;
    let mut x = Mat::<f64>::zeros(nr, nk);
    if nr > 0 {
        let grr = sub(&n.g, &r, &r);
        let llt = grr.llt(Side::Lower).ok()?;
        if !well_posed(llt.L(), &grr) {
            return None;
        }
        let gkr = sub(&n.g, &k, &r);
        // One solve for [G_RK | b_R | c_R].
        let mut rhs_m = Mat::<f64>::zeros(nr, nk + 2);
        for (a, &ri) in r.iter().enumerate() {
            for (j, &kj) in k.iter().enumerate() {
                rhs_m[(a, j)] = n.g[(ri, kj)];
            }
            rhs_m[(a, nk)] = rhs(ri).0;
            rhs_m[(a, nk + 1)] = n.out[ri];
        }
        let sol = llt.solve(&rhs_m);
        let prod = &gkr * &sol;
        for i in 0..nk {
            for j in 0..nk {
                ghat[(i, j)] -= prod[(i, j)];
            }
            bhat[i] -= prod[(i, nk)];
            chat[i] -= prod[(i, nk + 1)];
        }
        d0 += (0..nr).map(|a| n.out[r[a]] * sol[(a, nk)]).sum::<f64>();
        x = sol.subcols(0, nk).to_owned();
    }
    Some(Condensed {
        ckk: sub(&n.c, &k, &k),
        e: k.iter().map(|&i| rhs(i).1).collect(),
        k,
        r,
        ghat,
        bhat,
        chat,
        d0,
        x,
    })
}

/// A Cholesky factor whose pivots are not at rounding level of the matrix (a structurally
/// singular block passes Cholesky with noise pivots; such circuits take the general path).
fn well_posed(l: faer::MatRef<'_, f64>, m: &Mat<f64>) -> bool {
    let n = m.nrows();
    let dmax = (0..n).map(|i| m[(i, i)].abs()).fold(0.0, f64::max);
    (0..n).all(|i| {
        let p = l[(i, i)] * l[(i, i)];
        p.is_finite() && p > 1e-10 * dmax
    })
}

/// The symmetric state equation z′ = −S z + β u, y = γᵀz + D u, z = Lᵀ(v − C⁻¹e·u).
struct Symmetric {
    s: Mat<f64>,
    beta: Vec<f64>,
    gamma: Vec<f64>,
    d: f64,
    /// The Cholesky factor of C_KK, or its diagonal's square roots when C_KK is diagonal.
    factor: Factor,
}

enum Factor {
    Diagonal(Vec<f64>),
    Full(Mat<f64>),
}

impl Factor {
    /// L⁻¹·v.
    fn solve_l(&self, v: &[f64]) -> Vec<f64> {
        match self {
            Factor::Diagonal(l) => v.iter().zip(l).map(|(x, l)| x / l).collect(),
            Factor::Full(l) => {
                let mut m = Mat::<f64>::from_fn(v.len(), 1, |i, _| v[i]);
                faer::linalg::triangular_solve::solve_lower_triangular_in_place(
                    l.as_ref(),
                    m.as_mut(),
                    faer::Par::Seq,
                );
                (0..v.len()).map(|i| m[(i, 0)]).collect()
            }
        }
    }

    /// L⁻ᵀ·v.
    fn solve_lt(&self, v: &[f64]) -> Vec<f64> {
        match self {
            Factor::Diagonal(_) => self.solve_l(v),
            Factor::Full(l) => {
                let mut m = Mat::<f64>::from_fn(v.len(), 1, |i, _| v[i]);
                faer::linalg::triangular_solve::solve_upper_triangular_in_place(
                    l.transpose(),
                    m.as_mut(),
                    faer::Par::Seq,
                );
                (0..v.len()).map(|i| m[(i, 0)]).collect()
            }
        }
    }
}

fn reduce_store(c: &Condensed) -> Option<Symmetric> {
    let nk = c.k.len();
    let diagonal = (0..nk).all(|i| (0..nk).all(|j| i == j || c.ckk[(i, j)] == 0.0));
    let factor = if diagonal {
        let l: Vec<f64> = (0..nk).map(|i| c.ckk[(i, i)].sqrt()).collect();
        if l.iter().any(|x| !(x.is_finite() && *x > 0.0)) {
            return None;
        }
        Factor::Diagonal(l)
    } else {
        let llt = c.ckk.llt(Side::Lower).ok()?;
        if !well_posed(llt.L(), &c.ckk) {
            return None;
        }
        Factor::Full(llt.L().to_owned())
    };
    let s = match &factor {
        Factor::Diagonal(l) => Mat::<f64>::from_fn(nk, nk, |i, j| c.ghat[(i, j)] / (l[i] * l[j])),
        Factor::Full(l) => {
            // S = L⁻¹ (L⁻¹ Ĝ)ᵀ, Ĝ symmetric.
            let mut y = c.ghat.clone();
            let par = super::dense::par_for(nk);
            faer::linalg::triangular_solve::solve_lower_triangular_in_place(
                l.as_ref(),
                y.as_mut(),
                par,
            );
            let mut s = y.transpose().to_owned();
            faer::linalg::triangular_solve::solve_lower_triangular_in_place(
                l.as_ref(),
                s.as_mut(),
                par,
            );
            Mat::<f64>::from_fn(nk, nk, |i, j| 0.5 * (s[(i, j)] + s[(j, i)]))
        }
    };
    // C⁻¹e, then β = L⁻¹(b̂ − Ĝ C⁻¹e), γ = L⁻¹ĉ, D = d₀ + ĉᵀC⁻¹e.
    let cinv_e = factor.solve_lt(&factor.solve_l(&c.e));
    let mut bb = c.bhat.clone();
    if cinv_e.iter().any(|&x| x != 0.0) {
        for (i, bi) in bb.iter_mut().enumerate() {
            *bi -= (0..nk).map(|j| c.ghat[(i, j)] * cinv_e[j]).sum::<f64>();
        }
    }
    let d = c.d0 + c.chat.iter().zip(&cinv_e).map(|(a, b)| a * b).sum::<f64>();
    Some(Symmetric {
        beta: factor.solve_l(&bb),
        gamma: factor.solve_l(&c.chat),
        s,
        d,
        factor,
    })
}

/// Eigenvalues (ascending) and orthonormal eigenvectors of the symmetric S.
fn eigen(s: &Mat<f64>) -> Option<(Vec<f64>, Mat<f64>)> {
    let n = s.nrows();
    if s.col_iter().any(|c| c.iter().any(|x| !x.is_finite())) {
        return None;
    }
    if let Some(order) = path_order(s) {
        return tridiagonal_eigen(s, &order);
    }
    let evd = s.self_adjoint_eigen(Side::Lower).ok()?;
    let lam = (0..n).map(|i| evd.S()[i]).collect();
    Some((lam, evd.U().to_owned()))
}

/// An ordering of the indices that makes S tridiagonal, when its graph is a set of paths.
fn path_order(s: &Mat<f64>) -> Option<Vec<usize>> {
    let n = s.nrows();
    let mut adj: Vec<Vec<usize>> = vec![Vec::new(); n];
    for j in 0..n {
        for i in j + 1..n {
            if s[(i, j)] != 0.0 {
                if adj[i].len() == 2 || adj[j].len() == 2 {
                    return None;
                }
                adj[i].push(j);
                adj[j].push(i);
            }
        }
    }
    let mut order = Vec::with_capacity(n);
    let mut seen = vec![false; n];
    for start in (0..n).filter(|&i| adj[i].len() < 2) {
        if seen[start] {
            continue;
        }
        let (mut prev, mut cur) = (usize::MAX, start);
        loop {
            seen[cur] = true;
            order.push(cur);
            match adj[cur].iter().find(|&&x| x != prev) {
                Some(&next) if !seen[next] => {
                    prev = cur;
                    cur = next;
                }
                _ => break,
            }
        }
    }
    // Every remaining node lies on a cycle: not a set of paths.
    (order.len() == n).then_some(order)
}

fn tridiagonal_eigen(s: &Mat<f64>, order: &[usize]) -> Option<(Vec<f64>, Mat<f64>)> {
    use faer::linalg::evd;
    let n = s.nrows();
    let mut diag = faer::diag::Diag::<f64>::zeros(n);
    let mut sub = faer::diag::Diag::<f64>::zeros(n);
    for (i, &oi) in order.iter().enumerate() {
        diag[i] = s[(oi, oi)];
        if i + 1 < n {
            sub[i] = s[(order[i + 1], oi)];
        }
    }
    let mut w = faer::diag::Diag::<f64>::zeros(n);
    let mut u = Mat::<f64>::zeros(n, n);
    let par = super::dense::par_for(n);
    let params = Default::default();
    let need = evd::self_adjoint_evd_scratch::<f64>(n, evd::ComputeEigenvectors::Yes, par, params);
    let mut buf = faer::dyn_stack::MemBuffer::try_new(need).ok()?;
    let stack = faer::dyn_stack::MemStack::new(&mut buf);
    evd::tridiagonal_self_adjoint_evd(
        diag.as_ref(),
        sub.as_ref(),
        w.as_mut(),
        Some(u.as_mut()),
        par,
        stack,
        params,
    )
    .ok()?;
    // Rows of U are in path order; put them back in node order.
    let mut q = Mat::<f64>::zeros(n, n);
    for (i, &oi) in order.iter().enumerate() {
        for j in 0..n {
            q[(oi, j)] = u[(i, j)];
        }
    }
    Some(((0..n).map(|i| w[i]).collect(), q))
}

/// Rayleigh quotient of the pencil at the node voltages v_K = L⁻ᵀq, as branch energies.
fn branch_quotient(n: &Nodal, c: &Condensed, f: &Factor, q: &[f64]) -> Option<f64> {
    let nt = n.b.len();
    let w = f.solve_lt(q);
    let mut v = vec![0.0; nt];
    for (a, &i) in c.k.iter().enumerate() {
        v[i] = w[a];
    }
    for (a, &i) in c.r.iter().enumerate() {
        v[i] = -(0..c.k.len()).map(|j| c.x[(a, j)] * w[j]).sum::<f64>();
    }
    let energy = |list: &[(Option<usize>, Option<usize>, f64)]| -> f64 {
        list.iter()
            .map(|&(a, b, y)| {
                let at = |k: Option<usize>| k.map_or(0.0, |k| v[k]);
                let dv = at(a) - at(b);
                y * dv * dv
            })
            .sum()
    };
    let den = energy(&n.capacitors);
    let lam = energy(&n.resistors) / den;
    lam.is_finite().then_some(lam)
}

fn finish(
    n: &Nodal,
    c: &Condensed,
    sys: &Symmetric,
    mut lam: Vec<f64>,
    q: &Mat<f64>,
) -> Option<CircuitFunction> {
    let nk = lam.len();
    let lmax = lam.iter().map(|l| l.abs()).fold(0.0, f64::max);
    let allowed = 1e3 * f64::EPSILON * lmax;
    let col = |j: usize| -> Vec<f64> { (0..nk).map(|i| q[(i, j)]).collect() };
    for (j, l) in lam.iter_mut().enumerate() {
        // Only where the solver's relative error ε‖S‖/λ could exceed about 1e-13.
        if l.abs() <= 1e-3 * lmax
            && let Some(r) = branch_quotient(n, c, &sys.factor, &col(j))
            && (r - *l).abs() <= allowed
        {
            *l = r;
        }
    }
    let qg = project(q, &sys.gamma);
    let qb = project(q, &sys.beta);
    let modes = merge_repeated(&lam, &qg, &qb, allowed);
    if !all_finite(&modes) {
        return None;
    }
    let mut modes = drop_negligible(modes);
    sort_modes(&mut modes);
    let h0: f64 = sys.gamma.iter().zip(&sys.beta).map(|(a, b)| a * b).sum();
    let h0_scale = norm(&sys.gamma) * norm(&sys.beta);
    let s_norm = sys.s.norm_l2();
    Some(CircuitFunction {
        modes,
        direct: sys.d,
        improper: Vec::new(),
        zeros: Vec::new(),
        zero_scale: s_norm,
        h0_ivt: super::function::unless_rounding(h0, h0_scale),
    })
}

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum::<f64>().sqrt()
}

/// Qᵀ·v.
fn project(q: &Mat<f64>, v: &[f64]) -> Vec<f64> {
    let n = v.len();
    (0..q.ncols())
        .map(|j| (0..n).map(|i| q[(i, j)] * v[i]).sum())
        .collect()
}

/// Modes p = −λ with residue (Qᵀγ)(Qᵀβ); eigenvalues equal within the solver's resolution
/// are one simple pole (S is symmetric, so a repeated eigenvalue is semisimple) whose
/// residue is the sum.
fn merge_repeated(lam: &[f64], qg: &[f64], qb: &[f64], tol: f64) -> Vec<CircuitMode> {
    let mut modes: Vec<(f64, f64, usize)> = Vec::new();
    let mut idx: Vec<usize> = (0..lam.len()).collect();
    idx.sort_by(|&a, &b| lam[a].total_cmp(&lam[b]));
    for &j in &idx {
        let r = qg[j] * qb[j];
        match modes.last_mut() {
            Some((l, acc, count)) if (lam[j] - *l / *count as f64).abs() <= tol => {
                *l += lam[j];
                *acc += r;
                *count += 1;
            }
            _ => modes.push((lam[j], r, 1)),
        }
    }
    modes
        .into_iter()
        .map(|(l, r, count)| CircuitMode {
            pole: Complex64::new(-l / count as f64, 0.0),
            residues: vec![Complex64::new(r, 0.0)],
        })
        .collect()
}

/// Zeros for display from the equivalent state space (small circuits only).
fn zeros(sys: &Symmetric) -> Vec<Complex64> {
    let n = sys.beta.len();
    if n > MAX_ZERO_ORDER {
        return Vec::new();
    }
    let ss = StateSpace {
        a: DMatrix::from_fn(n, n, |i, j| -sys.s[(i, j)]),
        b: DVector::from_column_slice(&sys.beta),
        c: DVector::from_column_slice(&sys.gamma),
        d: sys.d,
    };
    super::zeros::zeros(&ss)
}
