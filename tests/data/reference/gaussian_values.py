#!/usr/bin/env python3
"""Reference values for tests/independent_values.rs, computed outside the project.

Each value is computed by numerical integration of its definition (not from the closed
form the project uses), and the closed form is printed beside it as a cross-check:
- Bhattacharyya coefficient BC = integral of sqrt(p q) (Bhattacharyya 1943), distance
  D_B = -ln BC, Hellinger H = sqrt(1 - BC): mpmath.quad in 1-D, scipy dblquad in 2-D.
- 1-D 2-Wasserstein distance by the quantile coupling, W2^2 = integral over u in (0, 1) of
  (F^-1(u) - G^-1(u))^2 (Villani 2003, Topics in Optimal Transportation, thm 2.18).
- Full-covariance W2 from the Gaussian closed form (Dowson & Landau 1982) evaluated with
  scipy.linalg.sqrtm (an independent implementation of the matrix square root).
- Coverage of N(0,1) by the 90 % intervals of N(-1,1) and N(1,1): the union of the two
  intervals is [-1 - r, 1 + r] with r = z_0.95, so coverage = 2 Phi(1 + r) - 1.
Run: python3 gaussian_values.py (mpmath 1.3.0, numpy 2.4.6, scipy 1.17.1 were used).
"""
import mpmath as mp
import numpy as np
from scipy import integrate, linalg
from scipy.stats import multivariate_normal as mvn

mp.mp.dps = 30


def pdf(x, m, v):
    return mp.exp(-(x - m) ** 2 / (2 * v)) / mp.sqrt(2 * mp.pi * v)


# N(0, 1) vs N(1, 2) (2 is the variance)
bc = mp.quad(lambda x: mp.sqrt(pdf(x, 0, 1) * pdf(x, 1, 2)), [-mp.inf, mp.inf])
print("1-D BC", mp.nstr(bc, 15), "D_B", mp.nstr(-mp.log(bc), 15), "H", mp.nstr(mp.sqrt(1 - bc), 15))
db = mp.mpf(1) / 12 + mp.log(3 / (2 * mp.sqrt(2))) / 2
print("  closed-form D_B", mp.nstr(db, 15))
q = lambda u: mp.sqrt(2) * mp.erfinv(2 * u - 1)
w2 = mp.sqrt(mp.quad(lambda u: (q(u) - (1 + mp.sqrt(2) * q(u))) ** 2, [0, 0.5, 1]))
print("1-D W2 (quantile coupling)", mp.nstr(w2, 15), "closed form", mp.nstr(mp.sqrt(1 + (1 - mp.sqrt(2)) ** 2), 15))

# 2-D, unequal full covariances
m1 = np.array([0.0, 0.0]); S1 = np.array([[1.0, 0.5], [0.5, 2.0]])
m2 = np.array([1.0, -1.0]); S2 = np.array([[2.0, -0.3], [-0.3, 0.5]])
p, qq = mvn(m1, S1), mvn(m2, S2)
bc2, err = integrate.dblquad(lambda y, x: np.sqrt(p.pdf([x, y]) * qq.pdf([x, y])), -15, 15, -15, 15,
                             epsabs=1e-12, epsrel=1e-12)
print("2-D BC %.12f (err %.1e) D_B %.12f H %.12f" % (bc2, err, -np.log(bc2), np.sqrt(1 - bc2)))
r2 = linalg.sqrtm(S2)
d = m1 - m2
w2f = np.sqrt(d @ d + np.trace(S1) + np.trace(S2) - 2 * np.trace(linalg.sqrtm(r2 @ S1 @ r2)).real)
print("2-D W2 %.12f" % w2f)

# coverage of N(0,1) by the 90 % regions of N(-1,1) and N(1,1)
r = mp.sqrt(2) * mp.erfinv(mp.mpf("0.9"))
print("coverage", mp.nstr(2 * mp.ncdf(1 + r) - 1, 15))
print("coverage by N(-1,1) alone", mp.nstr(mp.ncdf(r - 1) - mp.ncdf(-1 - r), 15))
