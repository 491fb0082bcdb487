"""Reference for core/shortcut.c's association statistics (tests/cli/shortcut_stats.sh).

Random contingency tables go to kiln-assoc-check; its chi2 and Cramér's V are compared with
scipy.stats (chi2_contingency(correction=False), contingency.association(method="cramer")),
or with numpy when scipy is missing; the bias-corrected V with Bergsma (2013), "A
bias-correction for Cramér's V and Tschuprow's T", J. Korean Stat. Soc. 42, 323-328, and lambda
with Goodman and Kruskal (1954), JASA 49, 732-764, transcribed in numpy below.
"""
import subprocess
import sys

import numpy as np

try:
    from scipy.stats import chi2_contingency
    from scipy.stats.contingency import association
except ImportError:  # scipy is optional: numpy alone then
    chi2_contingency = association = None


def reference(t):
    n = t.sum()
    r, k = t.shape
    expected = np.outer(t.sum(1), t.sum(0)) / n
    chi2 = ((t - expected) ** 2 / expected).sum()
    v = np.sqrt(chi2 / n / min(r - 1, k - 1))
    if chi2_contingency is not None:
        chi2_sp = chi2_contingency(t, correction=False)[0]
        assert abs(chi2_sp - chi2) <= 1e-9 * max(1.0, chi2), (chi2_sp, chi2)
        v = association(t, method="cramer", correction=False)
        chi2 = chi2_sp
    phi2 = chi2 / n
    phi2c = max(0.0, phi2 - (k - 1) * (r - 1) / (n - 1))
    rc = r - (r - 1) ** 2 / (n - 1)
    kc = k - (k - 1) ** 2 / (n - 1)
    m = min(kc - 1, rc - 1)
    vc = np.sqrt(phi2c / m) if m > 0 else 0.0
    top = t.sum(0).max()
    lam = (t.max(1).sum() - top) / (n - top) if n > top else 0.0
    return chi2, v, vc, lam


def main():
    rng = np.random.default_rng(16)
    tables = []
    for _ in range(300):
        r, k = rng.integers(2, 9, size=2)
        # Mixtures of independent and associated tables, no empty row or column (scipy's
        # association refuses those; kiln drops them, tested in tests/unit/test_shortcut.c).
        base = rng.integers(0, 40, size=(r, k))
        if rng.random() < 0.5:
            for i in range(min(r, k)):
                base[i, i] += rng.integers(0, 200)
        base[:, 0] += 1
        base[0, :] += 1
        tables.append(base)
    text = "".join(f"{t.shape[0]} {t.shape[1]}\n" + " ".join(map(str, t.ravel())) + "\n"
                   for t in tables)
    out = subprocess.run([sys.argv[1]], input=text, capture_output=True, text=True, check=True)
    lines = out.stdout.split("\n")[:-1]
    assert len(lines) == len(tables), (len(lines), len(tables))
    worst = 0.0
    for t, line in zip(tables, lines):
        got = [float(x) for x in line.split()]
        want = reference(t)
        for g, w, name in zip(got, want, ("chi2", "V", "corrected V", "lambda")):
            err = abs(g - w) / max(1.0, abs(w))
            worst = max(worst, err)
            if err > 1e-9:
                print(f"table {t.tolist()}: {name} {g!r}, reference {w!r}", file=sys.stderr)
                return 1
    print(f"{len(tables)} tables agree with "
          f"{'scipy.stats' if association else 'numpy'} (worst relative difference {worst:.2g})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
