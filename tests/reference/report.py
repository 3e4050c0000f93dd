"""One record per check: what was compared, the measured difference, the tolerance, the
reason for the tolerance and the source of the formula."""

import math


class Check:
    def __init__(self, where, name, measured, tol, source, why, engine=None, ref=None, kind="rel", labels=("engine", "ref")):
        self.where = where
        self.name = name
        self.measured = float(measured)
        self.tol = float(tol)
        self.source = source
        self.why = why
        self.engine = engine
        self.ref = ref
        self.kind = kind  # "rel": relative difference, "abs": absolute difference
        self.labels = labels

    @property
    def passed(self):
        return math.isfinite(self.measured) and self.measured <= self.tol

    def line(self):
        status = "PASS" if self.passed else "FAIL"
        vals = ""
        if self.engine is not None and self.ref is not None:
            vals = f" | {self.labels[0]} {fmt(self.engine)} {self.labels[1]} {fmt(self.ref)}"
        return (
            f"{status} [{self.where}] {self.name}: {self.kind} diff {self.measured:.2e} <= tol {self.tol:.1e}"
            f"{vals} | tol: {self.why} | source: {self.source}"
        )


def fmt(x):
    if isinstance(x, (bool, str)) or x is None:
        return str(x)
    return f"{x:.10g}"


def rel(a, b):
    """|a - b| / |b| (b the reference)."""
    a, b = float(a), float(b)
    if b == 0.0:
        return abs(a)
    return abs(a - b) / abs(b)


def rel_var(a_sd, b_sd):
    """Relative difference of the variances of two deviations."""
    return rel(float(a_sd) ** 2, float(b_sd) ** 2)
