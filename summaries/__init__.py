"""massarc.summaries: observables the field publishes (largest-mass statistics, occupation
law, G(r, t) and l(t), extreme-value fits), computed from the same single pass as the
checks. Not built yet: see the open issues."""

__all__: list[str] = []
