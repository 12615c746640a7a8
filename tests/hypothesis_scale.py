"""Hypothesis example counts: small in CI, larger locally with SKIPWISE_HYPOTHESIS_SCALE=10."""

import os

SCALE = max(1, int(os.environ.get("SKIPWISE_HYPOTHESIS_SCALE", "1")))


def examples(n: int) -> int:
    return n * SCALE
