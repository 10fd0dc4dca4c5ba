"""Pause points of long computations (lowgmap.physics.pacing) in the bands and the worst-case margin.

Wiring checks: the numbers are those of tests/test_bands.py (closed forms on the drift-flux line of
Dukler et al. 1988); here the checks are that a caller's pacer is reached often, that abandoning stops
the computation instead of being taken for a model failure, and that nothing half-done is kept.
"""
import threading

import pytest

from lowgmap.physics.chart.bands import _holder, boundary_band, worst_case_margins
from lowgmap.physics.chart.composition import Chart
from lowgmap.physics.examples import example_case
from lowgmap.physics.pacing import Abandoned, checkpoint, paced

BS = "bubble_slug_dukler_1988"


def _chart():
    return Chart.build(example_case(), [BS])


class _StopAt:
    """A pacer that counts its calls and abandons at the ``n``-th one (once: one Abandoned must stop it all)."""

    def __init__(self, n):
        self.n, self.calls = n, 0

    def __call__(self):
        self.calls += 1
        if self.calls == self.n:
            raise Abandoned("no longer wanted")


def test_the_worst_case_and_the_bands_reach_the_pacer_throughout():
    # Catches: pause points missing from the band's column evaluations or the margin objective (a background
    # job would then hold the processor for seconds while a slider is dragged).
    chart = _chart()
    count = _StopAt(10**9)
    with paced(count):
        wc = worst_case_margins(chart, 1e-5, 0.5e-5)
    assert count.calls >= 50
    assert wc.worst_case == pytest.approx(worst_case_margins(_chart(), 1e-5, 0.5e-5).worst_case, abs=1e-12)
    band_calls = _StopAt(10**9)
    with paced(band_calls):
        boundary_band(_chart(), BS)
    assert band_calls.calls >= 20


@pytest.mark.parametrize("stop_at", [1, 7, 40])
def test_abandoning_stops_the_worst_case_and_keeps_nothing_half_done(stop_at):
    # Catches: Abandoned taken for a model failure (a subclass of ValueError/RuntimeError is caught along the
    # way and the search goes on with a gap, returning a wrong worst case), a band or a worst case cached
    # after an abandoned search (the next caller would read a result nobody finished).
    chart = _chart()
    with paced(_StopAt(stop_at)), pytest.raises(Abandoned):
        worst_case_margins(chart, 1e-5, 0.5e-5)
    h = _holder(chart)
    assert not h.worst and all(b is not None for b in h.bands.values())
    fresh = worst_case_margins(_chart(), 1e-5, 0.5e-5)
    again = worst_case_margins(chart, 1e-5, 0.5e-5)                       # no pacer: computed in full
    assert again.worst_case == pytest.approx(fresh.worst_case, abs=1e-12)
    assert again.constants == fresh.constants and again.limiting_constant == fresh.limiting_constant


def test_a_pacer_applies_to_its_own_thread_only():
    # Catches: a module-level pacer (one session's drag would pause, or abandon, every other session's jobs).
    seen = []
    done = threading.Event()

    def other():
        checkpoint()
        done.set()
    with paced(lambda: seen.append(threading.current_thread().name)):
        t = threading.Thread(target=other, name="other")
        t.start()
        assert done.wait(30)
        t.join(30)
        checkpoint()
    assert seen == [threading.current_thread().name]


def test_abandoned_is_not_a_model_error():
    # Catches: Abandoned made a subclass of an error the models raise (MODEL_ERRORS are caught as "not available").
    from lowgmap.physics.chart.lines import MODEL_ERRORS

    assert not issubclass(Abandoned, MODEL_ERRORS)
