"""Reference values for porewise's random-effects means (src/fit/pooling.rs).

Never run by the tests: its output is copied into tests/pooling_reference.rs. Run with
Python 3, numpy 2.4 and statsmodels 0.15 (pip install numpy statsmodels):

    python3 tests/data/random_effects/dersimonian_laird.py

Case A (one group, five studies): statsmodels.stats.meta_analysis.combine_effects with
method_re="dl" (DerSimonian & Laird 1986) gives tau^2, the random-effects mean and its
standard error.

Case B (three groups of two or three studies, each with its own mean, one tau^2): the pooled
method-of-moments estimate tau^2 = max(0, (sum Q_g - sum (k_g - 1)) / sum C_g) (Borenstein,
Hedges, Higgins & Rothstein 2009, Introduction to Meta-Analysis, chapter 19) by hand formulas
in numpy, then each group's random-effects mean with that tau^2. A one-group case of the same
hand formulas is checked against statsmodels first, so the formulas are the published ones.

The numbers are invented (available water of lab cores, m3/m3, and their variances).
"""

import numpy as np
from statsmodels.stats.meta_analysis import combine_effects


def moments(y, v):
    w = 1.0 / v
    mean = np.sum(w * y) / np.sum(w)
    q = np.sum(w * (y - mean) ** 2)
    c = np.sum(w) - np.sum(w**2) / np.sum(w)
    return q, c, len(y) - 1


def re_mean(y, v, tau2):
    w = 1.0 / (v + tau2)
    mean = np.sum(w * y) / np.sum(w)
    return mean, 1.0 / np.sum(w)


a_y = np.array([0.152, 0.171, 0.139, 0.188, 0.160])
a_v = np.array([1.2e-4, 0.8e-4, 2.0e-4, 1.5e-4, 0.6e-4])
res = combine_effects(a_y, a_v, method_re="dl")
print("case A (statsmodels combine_effects, method_re='dl')")
print(f"  tau2 {res.tau2:.17g}")
print(f"  mean {res.mean_effect_re:.17g}")
print(f"  se   {res.sd_eff_w_re:.17g}")
q, c, df = moments(a_y, a_v)
hand = max(0.0, (q - df) / c)
assert abs(hand - res.tau2) < 1e-15, (hand, res.tau2)
assert abs(re_mean(a_y, a_v, hand)[0] - res.mean_effect_re) < 1e-15

groups = [
    (np.array([0.121, 0.148]), np.array([0.9e-4, 1.4e-4])),
    (np.array([0.098, 0.112, 0.131]), np.array([0.5e-4, 0.7e-4, 1.1e-4])),
    (np.array([0.175, 0.158]), np.array([2.1e-4, 1.6e-4])),
]
qs, cs, dfs = zip(*(moments(y, v) for y, v in groups))
tau2 = max(0.0, (sum(qs) - sum(dfs)) / sum(cs))
print("case B (pooled over three groups, numpy by hand formulas)")
print(f"  tau2 {tau2:.17g}  (sum Q {sum(qs):.17g}, sum df {sum(dfs)}, sum C {sum(cs):.17g})")
for i, (y, v) in enumerate(groups):
    mean, var = re_mean(y, v, tau2)
    print(f"  group {i}: mean {mean:.17g} variance {var:.17g}")
