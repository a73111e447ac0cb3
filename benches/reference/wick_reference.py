"""Reference computation of C_D and <D D D> of the free scalar with a wall,
done the straightforward way in SymPy, to time wardsmith against
(benches/reference/run.sh; never run by `cargo test`).

The same physics as wardsmith's free-scalar model (docs/conventions.md §4):
the propagator by the method of images,

    G(x, x') = C_phi (|x - x'|^(2-d) ± |x - xbar'|^(2-d)),
    C_phi = 1/((d-2) S_d),  S_d = 2 pi^(d/2)/Gamma(d/2),

(+ Neumann, - Dirichlet; common practice), and the displacement operator
D = T_nn at the wall (docs/conventions.md §4, derived): ½ (∂_n φ)² for
Dirichlet, -½ (∂_a φ)² + ξ ∂_a ∂_a φ² = (2ξ - ½) ∂_aφ ∂_aφ + 2ξ φ ∂_a∂_a φ
for Neumann (a over the d - 1 directions along the wall, ξ = (d-2)/(4(d-1))),
normal-ordered on the wall (no self-contractions). Each field sits at its
own point while the derivatives are taken; then the points are set to the
insertion points on the wall (y = 0).

Wick's theorem: <A B> is the sum over the two pairings of the legs of each
term, <A B C> over the eight cycles. Every contraction is differentiated
symbolically in the coordinates of two generic points and then evaluated at
the placed (exact rational) points; nothing is cached between contractions.

Without a wall (`ct`), the propagator is C_phi |x - x'|^(2-d) and the
improved stress tensor (common practice)

    T_mn = d_m phi d_n phi - 1/2 delta_mn (d phi)^2 - xi (d_m d_n - delta_mn d^2) phi^2,

with d_m d_n phi^2 = 2 d_m phi d_n phi + 2 phi d_m d_n phi, is normal-ordered;
every component of <T_mn(x1) T_rs(x2)> is checked against
C_T/|x|^(2d) (1/2 (I_mr I_ns + I_ms I_nr) - delta_mn delta_rs/d),
I_mn = delta_mn - 2 x_m x_n/x^2, C_T = d/((d-1) S_d^2) (Osborn & Petkou
1994, hep-th/9307010).

Usage:  python wick_reference.py cd WALL D     (prints C_D, checks 2/S_d^2)
        python wick_reference.py ddd WALL      (prints <D(s1) D(s2) D(s3)>, d = 4)
        python wick_reference.py ct none D     (checks every component of <T T>)
The last line printed is `compute seconds: T` (CPU time after the imports).
"""

import sys
import time

import sympy as sp

# The positions of benches/wick.rs and benches/reference/cases/*.ward
# (invented): s1, s2 for C_D, s1, s2, s3 for <D D D>, all on the wall y = 0.
CD_POINTS = (
    (0, 0, 0, 0, 0),
    (1, sp.Rational(1, 2), sp.Rational(-1, 4), sp.Rational(1, 3), sp.Rational(2, 7)),
)
CT_POINTS = (
    (sp.Rational(3, 10), sp.Rational(-1, 5), sp.Rational(1, 10), sp.Rational(1, 7)),
    (1, sp.Rational(1, 2), sp.Rational(1, 4), sp.Rational(-1, 6)),
)
DDD_POINTS = (
    (0, 0, 0),
    (1, sp.Rational(1, 2), sp.Rational(-1, 4)),
    (sp.Rational(-1, 3), sp.Rational(2, 5), 1),
)


def sphere(d):
    return 2 * sp.pi ** sp.Rational(d, 2) / sp.gamma(sp.Rational(d, 2))


class Model:
    def __init__(self, wall, d):
        self.d = d
        self.x = sp.symbols(f"x0:{d}", real=True)
        self.z = sp.symbols(f"z0:{d}", real=True)
        sign = {"neumann": 1, "dirichlet": -1, "none": 0}[wall]
        c_phi = 1 / ((d - 2) * sphere(d))
        r2 = sum((self.x[i] - self.z[i]) ** 2 for i in range(d))
        image2 = sum((self.x[i] - self.z[i]) ** 2 for i in range(d - 1)) + (
            self.x[d - 1] + self.z[d - 1]
        ) ** 2
        e = sp.Rational(2 - d, 2)
        self.propagator = c_phi * (r2**e + sign * image2**e)
        n = d - 1
        xi = sp.Rational(d - 2, 4 * (d - 1))
        self.stress = {}
        for m in range(d):
            for k in range(d):
                terms = [(1 - 2 * xi, (m,), (k,)), (-2 * xi, (), (m, k))]
                if m == k:
                    terms += [(2 * xi - sp.Rational(1, 2), (a,), (a,)) for a in range(d)]
                    terms += [(2 * xi, (), (a, a)) for a in range(d)]
                self.stress[(m, k)] = terms
        if wall == "dirichlet":
            self.displacement = [(sp.Rational(1, 2), (n,), (n,))]
        else:
            xi = sp.Rational(d - 2, 4 * (d - 1))
            self.displacement = [(2 * xi - sp.Rational(1, 2), (a,), (a,)) for a in range(n)]
            self.displacement += [(2 * xi, (), (a, a)) for a in range(n)]

    def contraction(self, p, dp, q, dq):
        """∂^dp at p and ∂^dq at q of the propagator, at the wall points p, q."""
        g = self.propagator
        for i in dp:
            g = sp.diff(g, self.x[i])
        for i in dq:
            g = sp.diff(g, self.z[i])
        at = {}
        for i in range(self.d):
            at[self.x[i]] = p[i]
            at[self.z[i]] = q[i]
        return g.subs(at)


def on_wall(point):
    return tuple(point) + (0,)


def two_point(m, p, q, first=None, second=None):
    total = 0
    for ca, a1, a2 in first or m.displacement:
        for cb, b1, b2 in second or m.displacement:
            total += ca * cb * (
                m.contraction(p, a1, q, b1) * m.contraction(p, a2, q, b2)
                + m.contraction(p, a1, q, b2) * m.contraction(p, a2, q, b1)
            )
    return total


def three_point(m, p, q, r):
    total = 0
    for ca, *a in m.displacement:
        for cb, *b in m.displacement:
            for cc, *c in m.displacement:
                for i in range(2):
                    for j in range(2):
                        for k in range(2):
                            total += ca * cb * cc * (
                                m.contraction(p, a[i], q, b[j])
                                * m.contraction(q, b[1 - j], r, c[k])
                                * m.contraction(r, c[1 - k], p, a[1 - i])
                            )
    return total


def main(argv):
    start = time.process_time()
    kind, wall = argv[1], argv[2]
    if kind == "ct":
        d = int(argv[3])
        m = Model("none", d)
        x1, x2 = (p[:d] for p in CT_POINTS)
        x = [a - b for a, b in zip(x1, x2)]
        r2 = sum(c**2 for c in x)
        c_t = sp.Rational(d, d - 1) / sphere(d) ** 2
        inv = [[sp.KroneckerDelta(i, j) - 2 * x[i] * x[j] / r2 for j in range(d)] for i in range(d)]
        worst = 0
        for mu in range(d):
            for nu in range(d):
                for rho in range(d):
                    for sigma in range(d):
                        value = sp.N(two_point(m, x1, x2, m.stress[(mu, nu)], m.stress[(rho, sigma)]), 30)
                        expected = sp.N(
                            c_t / r2**d * (
                                sp.Rational(1, 2) * (inv[mu][rho] * inv[nu][sigma] + inv[mu][sigma] * inv[nu][rho])
                                - sp.KroneckerDelta(mu, nu) * sp.KroneckerDelta(rho, sigma) / d
                            ),
                            30,
                        )
                        worst = max(worst, abs(value - expected) / abs(c_t / r2**d).evalf(30))
        print(f"d = {d}: every component of <T T> against C_T = {sp.N(c_t, 15)}, largest difference {sp.N(worst, 3)} (units of C_T/|x|^(2d))")
        if worst > sp.Float("1e-20"):
            print("MISMATCH")
            return 1
    elif kind == "cd":
        d = int(argv[3])
        m = Model(wall, d)
        s1, s2 = (on_wall(p[: d - 1]) for p in CD_POINTS)
        value = sp.N(two_point(m, s1, s2), 30)
        r2 = sum((a - b) ** 2 for a, b in zip(s1, s2))
        expected = sp.N(2 / sphere(d) ** 2 * r2 ** (-d), 30)
        ratio = value / expected
        print(f"{wall} d = {d}: <D D> = {value:.15e}, 2/S_d^2 |s1 - s2|^(-2d) = {expected:.15e}")
        if abs(ratio - 1) > sp.Float("1e-20"):
            print(f"MISMATCH: ratio {ratio}")
            return 1
    else:
        m = Model(wall, 4)
        s1, s2, s3 = (on_wall(p) for p in DDD_POINTS)
        value = sp.N(three_point(m, s1, s2, s3), 30)
        print(f"{wall} d = 4: <D(s1) D(s2) D(s3)> = {value:.15e}")
    print(f"compute seconds: {time.process_time() - start:.3f}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
