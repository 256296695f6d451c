"""The benchmark's hand-built channel stays a valid review input as the review gains inputs (nothing else runs the
benchmark's own builders: a stale one would only show when someone runs ``make bench``)."""

from __future__ import annotations

import sys
from pathlib import Path

from calcsvc.core import channel

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "benchmarks"))
import run


def test_the_benchmark_channel_builds_and_reviews_at_a_fixed_and_a_ranged_ambient() -> None:
    for inputs in (run.channel(), run.channel(25.0, 0.0, 45.0)):
        assert channel.validate(inputs) == []
        assert channel.review(inputs, validated=True).checks
