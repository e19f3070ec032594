"""The collector pause around bulk reading (pipeline.gcpause): state restored, and no collection
runs while a large design is read or its graph built (counted through gc.callbacks, not timed)."""

from __future__ import annotations

import gc

import pytest

from pipeline.gcpause import paused_gc


@pytest.mark.parametrize("enabled", [True, False])
def test_the_collector_state_is_restored(enabled):
    (gc.enable if enabled else gc.disable)()
    try:
        with pytest.raises(ValueError):
            with paused_gc():
                assert not gc.isenabled()
                with paused_gc():
                    pass
                assert not gc.isenabled()  # an inner block leaves it off for the outer one
                raise ValueError
        assert gc.isenabled() is enabled
    finally:
        gc.enable()


def _collections_during(fn):
    seen = []

    def count(phase, info):
        if phase == "start":
            seen.append(info["generation"])

    gc.callbacks.append(count)
    try:
        out = fn()
    finally:
        gc.callbacks.remove(count)
    return out, seen


def test_reading_a_large_design_and_its_graph_run_no_collection(tmp_path, library, monkeypatch):
    import contextlib

    import networkx  # noqa: F401  (imported first: its own import runs collections)

    from pipeline import design as dz, graph
    from pipeline.design import read_design
    from pipeline.graph import build_graph

    text = "".join(f'[parts.R{i}]\nkind = "resistor"\npackage = "0603"\nvalue = "10k"\n' for i in range(1, 3001))
    text += "[nets]\n" + "".join(f'N{i} = ["R{i}.2", "R{i + 1}.1"]\n' for i in range(1, 3000))
    path = tmp_path / "design.toml"
    path.write_text(text)
    gc.enable()
    # at most the one young collection the allocation count owes when the pause ends
    (design, _), seen = _collections_during(lambda: read_design(path, library))
    assert len(design.parts) == 3000 and len(seen) <= 1
    g, seen = _collections_during(lambda: build_graph(design))
    assert g.number_of_edges() == 2 * 2999 and len(seen) <= 1
    # the counter can fail: without the pause the same reading runs many collections
    monkeypatch.setattr(dz, "paused_gc", contextlib.nullcontext)
    monkeypatch.setattr(graph, "paused_gc", contextlib.nullcontext)
    (design, _), seen = _collections_during(lambda: read_design(path, library))
    _, seen_graph = _collections_during(lambda: build_graph(design))
    assert len(seen) > 10 and len(seen_graph) > 10
