#!/usr/bin/env bash
# The shortcut check's statistics (core/shortcut.c) against reference libraries on random
# tables: Pearson's chi-squared and Cramér's V against scipy.stats (chi2_contingency without
# Yates' correction, contingency.association), falling back to numpy when scipy is absent;
# Bergsma's (2013) bias-corrected V and Goodman and Kruskal's lambda against a numpy
# transcription of their published formulas (tests/ref/assoc_ref.py).
. "$(dirname "$0")/lib.sh"
"$PYTHON" -c 'import numpy' 2>/dev/null || skip "$PYTHON without numpy (Debian: python3-numpy)"
"$PYTHON" "$KILN_SRC/tests/ref/assoc_ref.py" "$KILN_TOOLS/kiln-assoc-check" ||
    fail "association statistics differ from the reference (above)"
