"""Invented as-found errors, shared by the demo history and the synthetic fleet (scheduling/synthetic.py)."""

NOMINALS = (10, 25, 50, 75, 100)


def invented_found_errors(rng, offset, mpe):
    """As-found errors at the nominal points: a common offset tilted up or down the range, plus scatter."""
    shape = rng.uniform(-0.3, 0.3)
    return [offset * (1 + shape * (n - 50) / 50) + rng.gauss(0, 0.05 * mpe) for n in NOMINALS]
