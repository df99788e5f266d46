"""The model crosses the child→parent boundary as JSON plus arrays, never pickle."""

from __future__ import annotations

import json
import zipfile

import numpy as np
import pytest

from figproof.model.records import ArrayStore, ScriptError, Source, dump_run, load_run
from tests import builders as b


def _figure() -> b.FigureModel:
    ax = b.axes(xlim=(0, 10), ylim=(-1, 1), ylabel="signal (mV)",
                points=[b.points([1, 2, 3], [0.1, 0.2, float("nan")], xlim=(0, 10), ylim=(-1, 1))],
                bars=[b.bars([1.5, 2.5])], errorbars=[b.errorbars([0, 1], [1.5, 2.5], [0.2, 0.3])])
    return b.figure(ax, outputs=("figures/a.png",),
                    tables=(b.LoadedTable(path="data/x.csv", reader="pandas.read_csv",
                                          columns={"v": np.array([1.0, 2.0])}, groups={"g": np.array([0, 1])}),))


def _same(a: object, c: object) -> None:
    """Compare models field by field, arrays with NaN-aware equality."""
    ja, jc = ArrayStore(), ArrayStore()
    assert json.dumps(a.to_json(ja), sort_keys=True) == json.dumps(c.to_json(jc), sort_keys=True)
    assert len(ja.arrays) == len(jc.arrays)
    for k in ja.arrays:
        np.testing.assert_array_equal(ja.arrays[k], jc.arrays[k])


def test_round_trip_in_memory() -> None:
    fig = _figure()
    store = ArrayStore()
    again = type(fig).from_json(fig.to_json(store), store)
    _same(fig, again)
    assert again.axes[0].y.label == "signal (mV)"
    assert isinstance(again.axes[0].points[0].x, np.ndarray)


def test_round_trip_on_disk_without_pickle(tmp_path) -> None:
    run = b.run(_figure(), error=ScriptError(kind="exception", type="KeyError", message="'x'",
                                             source=Source(path="fig.py", line=3)))
    dump_run(run, tmp_path)
    # the arrays file is a plain zip of .npy members (numpy's documented .npz layout)
    with zipfile.ZipFile(tmp_path / "arrays.npz") as zf:
        assert all(n.endswith(".npy") for n in zf.namelist())
    again = load_run(tmp_path)
    _same(run, again)
    assert again.error.source.line == 3


def test_json_is_strict(tmp_path) -> None:
    """NaN and infinities never reach the JSON text (it must parse with allow_nan=False readers)."""
    fig = b.figure(b.axes(xlim=(0, float("inf"))))
    dump_run(b.run(fig), tmp_path)
    text = (tmp_path / "run.json").read_text()
    assert "Infinity" not in text.replace('"inf"', "")
    assert load_run(tmp_path).figures[0].axes[0].x.lim[1] == float("inf")


def test_object_arrays_are_refused() -> None:
    with pytest.raises(TypeError):
        ArrayStore().put(np.array([{"a": 1}], dtype=object))


def test_wrong_schema_is_an_error(tmp_path) -> None:
    dump_run(b.run(), tmp_path)
    data = json.loads((tmp_path / "run.json").read_text())
    data["schema"] = 99
    (tmp_path / "run.json").write_text(json.dumps(data))
    with pytest.raises(ValueError, match="unsupported model schema"):
        load_run(tmp_path)
