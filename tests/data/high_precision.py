#!/usr/bin/env python3
"""High-precision reference values for the precision tests (mpmath 1.3.0, 50 digits).

Prints every value the tests compare against, with the inputs it was computed from. The
tests carry these numbers as literals beside the name of this script; it is not run by the
tests or the build. Run: python3 tests/data/high_precision.py   (needs mpmath)

Parameters are invented; the formulas are the published ones:
  van Genuchten (1980)  Se = [1 + (alpha h)^n]^(-m)
  Brooks & Corey (1964) Se = (h_b / h)^lambda above h_b
  Kosugi (1996)         Se = Q(ln(h / h_m) / sigma) = erfc(z / sqrt 2) / 2
  Fredlund & Xing (1994) Se = theta / theta_s = C(h) / ln(e + (h / a)^n)^m,
                        C(h) = 1 - ln(1 + h / h_r) / ln(1 + 10^6 kPa / h_r)
  Durner (1994)         Se = w1 Se1 + (1 - w1) Se2, m_i = 1 - 1/n_i
  Campbell (1974)       Se = theta / theta_s = (h_e / h)^(1/b) above h_e
  Mualem (1976)         Kr = Se^L [int_0^Se dS / h(S) / int_0^1 dS / h(S)]^2
"""
from mpmath import mp, mpf, erfc, sqrt, log, exp, e, betainc, quad, power

mp.dps = 50

# The oven-dry suction 10^6 kPa in cm as the program holds it: the double 1000 / 98.0665 * 1e6
# (near h_dry the model is sensitive to the last bit of its own constant).
H_DRY = mpf(1000.0 / 98.0665 * 1e6)


def vg(h, alpha, n, m):
    return (1 + (alpha * h) ** n) ** (-m)


def kosugi(h, h_m, sigma):
    z = log(h / h_m) / sigma
    return erfc(z / sqrt(2)) / 2


def fx(h, a, n, m, h_r):
    corr = 1 - log(1 + h / h_r) / log(1 + H_DRY / h_r)
    return corr / log(e + (h / a) ** n) ** m


def show(label, value):
    print(f"{label}: {mp.nstr(value, 20)}")


def f(text):
    """A decimal as the double the tests pass, exactly."""
    return mpf(float(text))


def se_values():
    print("# effective saturation (models' shape functions)")
    show("vg alpha=0.05 n=5 (m=0.8) h=1e6", vg(f("1e6"), f("0.05"), f(5), f("0.8")))
    show("vg alpha=0.02 n=1.5 (m=1/3) h=1e5", vg(f("1e5"), f("0.02"), f("1.5"), f(1 - 1 / 1.5)))
    show("vg-free-m alpha=0.02 n=3 m=2 h=1e5", vg(f("1e5"), f("0.02"), f(3), f(2)))
    show("bc h_b=10 lambda=3 h=1e7", (f(10) / f("1e7")) ** 3)
    show("kosugi h_m=100 sigma=0.8 h=1e6", kosugi(f("1e6"), f(100), f("0.8")))
    show("kosugi h_m=100 sigma=1.5 h=1e5", kosugi(f("1e5"), f(100), f("1.5")))
    show("fx a=100 n=3 m=2 h_r=1500 h=1e7", fx(f("1e7"), f(100), f(3), f(2), f(1500)))
    # 1 cm below the oven-dry suction.
    h = H_DRY - 1
    show(f"fx a=100 n=3 m=2 h_r=1500 h={float(h)!r}", fx(h, f(100), f(3), f(2), f(1500)))
    w1 = f("0.4")
    s1 = vg(f("1e6"), f("0.1"), f(3), f(1 - 1 / 3))
    s2 = vg(f("1e6"), f("0.005"), f(4), f(1 - 1 / 4))
    show("durner w1=0.4 a1=0.1 n1=3 a2=0.005 n2=4 h=1e6", w1 * s1 + (1 - w1) * s2)
    show("campbell h_e=5 b=0.5 h=1e7", (f(5) / f("1e7")) ** 2)


def erfc_values():
    print("# erfc at exactly representable arguments")
    for x in ["-3", "0.5", "1", "2.5", "5", "10", "15", "20", "26.5"]:
        show(f"erfc({x})", erfc(mpf(x)))


def beta_values():
    print("# regularised incomplete beta I_x(a, b) (mpmath betainc, regularized=True)")
    for a, b, x in [
        ("0.9666666666666666", "0.3333333333333333", "0.0001"),
        ("2.5", "0.5", "0.3"),
        ("1.0", "0.05", "0.999"),
        ("10.5", "0.9", "0.95"),
        ("0.05", "0.9", "1e-12"),
        ("3.25", "0.75", "0.5"),
    ]:
        # The arguments as the doubles the test passes.
        a_, b_, x_ = f(a), f(b), f(x)
        show(f"I({x}; {a}, {b})", betainc(a_, b_, 0, x_, regularized=True))
    # 1 - x tiny: I_x(a, b) with x = 1 - 1e-15 (the test passes both x and 1 - x).
    a_, b_ = mpf("2.5"), mpf("0.05")
    y = f("1e-15")
    show("1 - I(1 - 1e-15; 2.5, 0.05)", betainc(b_, a_, 0, y, regularized=True))


def mualem_free_m(h, alpha, n, m, l):
    """Kr by direct quadrature of Mualem's integral in Se (no incomplete beta)."""
    se = vg(h, alpha, n, m)
    inv_h = lambda s: alpha * (s ** (-1 / m) - 1) ** (-1 / n)
    num = quad(inv_h, [0, se])
    den = quad(inv_h, [0, 1])
    return se ** l * (num / den) ** 2


def mualem_values():
    print("# Mualem (1976) Kr of van Genuchten with free m, by quadrature (tanh-sinh)")
    for h in ["100", "1", "1e4"]:
        show(
            f"Kr h={h} alpha=0.02 n=1.5 m=0.3 L=0.5",
            mualem_free_m(f(h), f("0.02"), f("1.5"), f("0.3"), f("0.5")),
        )
    show("Kr h=50 alpha=0.05 n=3 m=2 L=0.5",
         mualem_free_m(f(50), f("0.05"), f(3), f(2), f("0.5")))


def conversion_values():
    print("# double-double suction conversions (src/model/units/exact.rs)")
    show40 = lambda label, v: print(f"{label}: {mp.nstr(v, 40)}")
    show40("ln 2", log(2))
    show40("ln 10", log(10))
    print(f"e: {mp.nstr(e, 47)}")
    print(f"cm per kPa = 10^7 / 980665: {mp.nstr(mpf(10) ** 7 / 980665, 50)}")
    print(f"10^2.526993264 (the double): {mp.nstr(power(10, f('2.526993264')), 50)}")


if __name__ == "__main__":
    conversion_values()
    se_values()
    erfc_values()
    beta_values()
    mualem_values()
