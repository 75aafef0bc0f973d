"""The sweep form's pure helpers: which numbers of a set-up it offers, and the --vary texts it makes."""

from heatsoak.core.app.sweep.plan import parse_vary
from heatsoak.plugin.sweep.actions import sweepable_keys, vary_texts


def test_the_form_offers_every_plain_number_but_file_reading_and_output():
    data = {"mesh": {"file": "a.msh", "unit": "mm", "feature_angle": 30.0},
            "material": {"body": {"density": 7900, "conductivity": [[1, 0, 0], [0, 1, 0], [0, 0, 1]], "label": "x"}},
            "boundary": {"bore": {"kind": "temperature", "ramp": {"start": 20, "end": 180, "at": 0, "over": 600}},
                         "rim": {"kind": "convection", "h": 10, "ambient": 22}},
            "time": {"end": 3600, "step": 20, "theta": 1.0, "mass": "consistent"},
            "probe": [{"name": "core", "at": [0, 0, 0], "threshold": 100}],
            "output": {"every": 5}, "initial": {"temperature": 22}}
    assert sweepable_keys(data) == [
        "material.body.density", "boundary.bore.ramp.start", "boundary.bore.ramp.end", "boundary.bore.ramp.at",
        "boundary.bore.ramp.over", "boundary.rim.h", "boundary.rim.ambient", "time.end", "time.step", "time.theta",
        "probe.core.threshold", "initial.temperature"]


def test_filled_slots_become_vary_texts_the_sweep_reads():
    texts = vary_texts([("boundary.rim.h", "5, 50"), (None, "1, 2"), ("time.step", ""), ("time.end", "[60, 120]")])
    assert texts == ["boundary.rim.h=[5, 50]", "time.end=[60, 120]"]
    assert [parse_vary(t) for t in texts] == [("boundary.rim.h", [5, 50]), ("time.end", [60, 120])]
