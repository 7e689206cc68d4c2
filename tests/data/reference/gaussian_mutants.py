#!/usr/bin/env python3
"""Reference values for src/model/gaussian_tests.rs (mutation testing of gaussian.rs, issue 17).

Every value is computed here, outside the project, from the definition where a numerical
integral is cheap, else from the closed form evaluated with numpy/scipy (independent
implementations of the inverse, determinant and matrix square root):
- KL(p||q) = integral p ln(p/q) (Kullback & Leibler 1951); Bhattacharyya coefficient
  BC = integral sqrt(p q) (Bhattacharyya 1943), D_B = -ln BC, H = sqrt(1 - BC);
  expected-likelihood kernel ELK = integral p q (Jebara, Kondor & Howard 2004); entropy
  h = -integral p ln p (Cover & Thomas 2006, ch. 8): mpmath.quad in 1-D.
- 1-D W2 by the quantile coupling (Villani 2003, thm 2.18).
- Independent dimensions: KL, D_B, -ln ELK, h and W2^2 add over dimensions, so a diagonal
  pair is the sum of its 1-D integrals.
- Full covariances: 2-D BC and ELK by scipy dblquad; KL, 3-D values and W2 from the closed
  forms (Kullback 1959 ch. 9; Dowson & Landau 1982) with numpy.linalg / scipy.linalg.sqrtm.
Run: python3 gaussian_mutants.py (mpmath 1.3.0, numpy 2.4.6, scipy 1.17.1 were used).
"""
import mpmath as mp
import numpy as np
from scipy import integrate, linalg
from scipy.stats import multivariate_normal as mvn

mp.mp.dps = 30
INF = [-mp.inf, mp.inf]


def pdf(x, m, v):
    return mp.exp(-(x - m) ** 2 / (2 * v)) / mp.sqrt(2 * mp.pi * v)


def one_d(mp_, vp, mq, vq):
    mp_, vp, mq, vq = map(mp.mpf, (mp_, vp, mq, vq))
    p = lambda x: pdf(x, mp_, vp)
    q = lambda x: pdf(x, mq, vq)
    kl = mp.quad(lambda x: p(x) * (mp.log(p(x)) - mp.log(q(x))), INF)
    bc = mp.quad(lambda x: mp.sqrt(p(x) * q(x)), INF)
    elk = mp.quad(lambda x: p(x) * q(x), INF)
    h = mp.quad(lambda x: -p(x) * mp.log(p(x)), INF)
    fi = lambda u: mp_ + mp.sqrt(2 * vp) * mp.erfinv(2 * u - 1)
    gi = lambda u: mq + mp.sqrt(2 * vq) * mp.erfinv(2 * u - 1)
    w2sq = mp.quad(lambda u: (fi(u) - gi(u)) ** 2, [0, 0.5, 1])
    return dict(kl=kl, db=-mp.log(bc), lnelk=mp.log(elk), h=h, w2sq=w2sq)


def show(name, v):
    print(f"{name:34s} {mp.nstr(v, 16) if isinstance(v, mp.mpf) else '%.15g' % v}")


# 1-D pair: P = N(0.5, 2), Q = N(-1, 0.5) (second number = variance)
a = one_d(0.5, 2.0, -1.0, 0.5)
b = one_d(-1.0, 0.5, 0.5, 2.0)
print("1-D P = N(0.5, 2), Q = N(-1, 0.5)")
show("KL(P||Q)", a["kl"]); show("KL(Q||P)", b["kl"]); show("D_B", a["db"])
show("BC", mp.exp(-a["db"])); show("H", mp.sqrt(1 - mp.exp(-a["db"])))
show("ln ELK", a["lnelk"]); show("W2", mp.sqrt(a["w2sq"])); show("h(P)", a["h"])

# diagonal 2-D pair: P = N((0.5, -1), diag(2, 0.5)), Q = N((-1, 0.25), diag(0.5, 3))
d1 = one_d(0.5, 2.0, -1.0, 0.5)
d2 = one_d(-1.0, 0.5, 0.25, 3.0)
r1 = one_d(-1.0, 0.5, 0.5, 2.0)
r2 = one_d(0.25, 3.0, -1.0, 0.5)
print("2-D diagonal P = N((0.5,-1), diag(2,.5)), Q = N((-1,.25), diag(.5,3))")
show("KL(P||Q)", d1["kl"] + d2["kl"]); show("KL(Q||P)", r1["kl"] + r2["kl"])
show("D_B", d1["db"] + d2["db"]); show("ln ELK", d1["lnelk"] + d2["lnelk"])
show("W2", mp.sqrt(d1["w2sq"] + d2["w2sq"])); show("h(P)", d1["h"] + d2["h"])

# 2-D full pair
m1 = np.array([0.5, -0.25]); S1 = np.array([[1.0, 0.5], [0.5, 2.0]])
m2 = np.array([1.0, -1.0]); S2 = np.array([[2.0, -0.3], [-0.3, 0.5]])
p, q = mvn(m1, S1), mvn(m2, S2)
opts = dict(epsabs=1e-13, epsrel=1e-13)
bc2, e1 = integrate.dblquad(lambda y, x: np.sqrt(p.pdf([x, y]) * q.pdf([x, y])), -12, 12, -12, 12, **opts)
elk2, e2 = integrate.dblquad(lambda y, x: p.pdf([x, y]) * q.pdf([x, y]), -12, 12, -12, 12, **opts)


def kl_closed(ma, Sa, mb, Sb):
    d = len(ma)
    ib = np.linalg.inv(Sb)
    diff = mb - ma
    return 0.5 * (np.trace(ib @ Sa) + diff @ ib @ diff - d
                  + np.linalg.slogdet(Sb)[1] - np.linalg.slogdet(Sa)[1])


def w2_closed(ma, Sa, mb, Sb):
    rb = linalg.sqrtm(Sb)
    diff = ma - mb
    return np.sqrt(diff @ diff + np.trace(Sa) + np.trace(Sb)
                   - 2 * np.trace(linalg.sqrtm(rb @ Sa @ rb)).real)


print("2-D full P = N((.5,-.25), [[1,.5],[.5,2]]), Q = N((1,-1), [[2,-.3],[-.3,.5]])")
print("D_B (dblquad)                      %.15g (err %.1e)" % (-np.log(bc2), e1))
print("ln ELK (dblquad)                   %.15g (err %.1e)" % (np.log(elk2), e2))
print("ln ELK closed (mvn logpdf)         %.15g" % mvn(m2, S1 + S2).logpdf(m1))
print("KL(P||Q) closed                    %.15g" % kl_closed(m1, S1, m2, S2))
print("KL(Q||P) closed                    %.15g" % kl_closed(m2, S2, m1, S1))
print("W2                                 %.15g" % w2_closed(m1, S1, m2, S2))
print("h(P) (mvn.entropy)                 %.15g" % p.entropy())

# 3-D full pair, Sigma = L L^T from a chosen integer factor
L = np.array([[2.0, 0, 0], [1, 3, 0], [-1, 2, 1]])
S = L @ L.T
mu = np.array([0.5, -1.0, 2.0])
T = np.array([[3.0, 1, 0.5], [1, 2, -0.4], [0.5, -0.4, 1.5]])
nu = np.array([-0.5, 0.25, 1.0])
x = np.array([1.0, 2.0, -1.0])
print("3-D Sigma = L L^T =", S.tolist(), "T =", T.tolist())
print("ln det Sigma                       %.15g" % np.linalg.slogdet(S)[1])
print("Mahalanobis^2 of x under N(mu,S)   %.15g" % ((x - mu) @ np.linalg.solve(S, x - mu)))
print("KL(N(mu,S)||N(nu,T))               %.15g" % kl_closed(mu, S, nu, T))
print("KL(N(nu,T)||N(mu,S))               %.15g" % kl_closed(nu, T, mu, S))
print("D_B closed                         %.15g" % (
    (mu - nu) @ np.linalg.solve((S + T) / 2, mu - nu) / 8
    + 0.5 * (np.linalg.slogdet((S + T) / 2)[1]
             - 0.5 * np.linalg.slogdet(S)[1] - 0.5 * np.linalg.slogdet(T)[1])))
print("ln ELK (mvn logpdf)                %.15g" % mvn(nu, S + T).logpdf(mu))
print("W2                                 %.15g" % w2_closed(mu, S, nu, T))
print("chi2 quantile dof 2 at 1 - 1e-15   %.15g" % (-2 * np.log(1e-15)))
