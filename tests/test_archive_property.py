"""Property: the catalogue kept up to date import by import equals one rebuilt from the
run files, whatever sequence of imports and tree edits came before."""

from __future__ import annotations

import tempfile
import warnings
from pathlib import Path

import pytest
from _archive_helpers import recording, taken
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from engine.archive import create_archive, open_archive

SITE, TAG = "Works", "P-101"

op = st.one_of(
    st.tuples(st.just("import"), st.integers(0, 3), st.integers(0, 6), st.integers(0, 20)),
    st.tuples(st.just("point"), st.integers(0, 3)),
    st.tuples(st.just("edit"), st.integers(0, 3), st.sampled_from([400, 800, 3200])),
    st.tuples(st.just("flush")),
)


def _rows(arc) -> dict:
    return {r.run_id: r.as_dict() for r in arc.runs()}


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(ops=st.lists(op, min_size=1, max_size=12))
@pytest.mark.filterwarnings("ignore::engine.errors.EngineWarning")
def test_incremental_catalogue_equals_rebuilt(ops):
    with tempfile.TemporaryDirectory() as tmp, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        folder = Path(tmp) / "p.shaftwatch"
        with create_archive(folder, plant_name="prop") as arc:
            arc.add_site(SITE)
            arc.add_machine(SITE, TAG)
            points = [arc.add_point(SITE, TAG, "p0").path]
            for o in ops:
                if o[0] == "point" and len(points) < 4:
                    points.append(arc.add_point(SITE, TAG, f"p{len(points)}").path)
                elif o[0] == "import":
                    _, p, seed, week = o
                    # The same seed twice is a duplicate, whatever point it is sent to.
                    arc.import_recording(recording(seed, n=2048), points[p % len(points)],
                                         taken=taken(week), rpm=1400.0 + seed)
                elif o[0] == "edit":
                    arc.update_point(points[o[1] % len(points)], lines=o[2])
                elif o[0] == "flush":
                    arc.flush()
            incremental = _rows(arc)
        with open_archive(folder) as reader:
            assert _rows(reader) == incremental  # as written to catalogue.h5
        with open_archive(folder, mode="w") as arc:
            arc.rebuild()
            assert _rows(arc) == incremental
            assert arc.check() == []
        with open_archive(folder) as reader:
            assert _rows(reader) == incremental
