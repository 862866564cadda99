"""Placeholder while the engine is written (issue 3); replaced by the real solve loop."""


def solve(problem, gap=1e-4, time_limit=None, **kwargs):
    raise NotImplementedError("the engine is being written")
