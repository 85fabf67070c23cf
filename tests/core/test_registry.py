"""Registry: entry-point loading, dispatch, crash wrapping, option validation, listing."""
from __future__ import annotations

import importlib.metadata
import sys
import types
from pathlib import Path

import numpy as np
import pytest

from prep import ReadError, SensorReader, Sensors, hookimpl, make_registry
from prep.errors import PluginError, UsageError


def _reader_plugin(name: str, suffixes: tuple[str, ...], *, crash: bool = False, sniff=None) -> types.ModuleType:
    mod = types.ModuleType(name)

    def read(path: Path) -> Sensors:
        if crash:
            raise ZeroDivisionError("bug in the plugin")
        return Sensors(labels=("Cz",), positions=[[0, 0, 0.1]], frame="device")

    @hookimpl
    def headprep_register_sensor_readers() -> list[SensorReader]:
        return [SensorReader(name=name, suffixes=suffixes, read=read, sniff=sniff, description="test reader",
                             defaults={"count": 3, "ratio": 0.5, "flag": False})]

    mod.headprep_register_sensor_readers = headprep_register_sensor_readers
    return mod


def test_registered_plugin_is_listed_with_its_descriptors() -> None:
    reg = make_registry(entry_points=False, plugins=[_reader_plugin("tiny", (".tiny",))])
    rows = reg.describe_plugins()
    assert rows[0]["name"] == "tiny" and rows[0]["distribution"] == "unregistered"
    assert rows[0]["provides"] == [{"kind": "sensor_reader", "name": "tiny", "description": "test reader",
                                    "suffixes": [".tiny"]}]
    assert reg.get("sensor_reader", "tiny").plugin == "tiny"


def test_longest_suffix_wins_and_ties_are_errors(tmp_path: Path) -> None:
    reg = make_registry(entry_points=False, plugins=[_reader_plugin("generic", (".tsv",)),
                                                    _reader_plugin("special", ("_electrodes.tsv",))])
    assert reg.for_file("sensor_reader", tmp_path / "sub-1_electrodes.tsv").name == "special"
    assert reg.for_file("sensor_reader", tmp_path / "other.TSV").name == "generic"
    reg2 = make_registry(entry_points=False, plugins=[_reader_plugin("one", (".x",)), _reader_plugin("two", (".x",))])
    with pytest.raises(UsageError, match="one .*two.*--reader"):
        reg2.for_file("sensor_reader", tmp_path / "a.x")
    with pytest.raises(UsageError, match="no sensor reader recognises"):
        reg2.for_file("sensor_reader", tmp_path / "a.unknown")


def test_sniff_can_refuse_a_file(tmp_path: Path) -> None:
    f = tmp_path / "a.x"
    f.write_text("hello")
    reg = make_registry(entry_points=False, plugins=[_reader_plugin("picky", (".x",), sniff=lambda p: False),
                                                    _reader_plugin("easy", (".x",))])
    assert reg.for_file("sensor_reader", f).name == "easy"


def test_crash_is_wrapped_with_the_plugin_name() -> None:
    reg = make_registry(entry_points=False, plugins=[_reader_plugin("buggy", (".b",), crash=True)])
    d = reg.get("sensor_reader", "buggy")
    with pytest.raises(PluginError, match="plugin 'buggy'.*ZeroDivisionError") as info:
        reg.call(d, "read", Path("x.b"))
    assert isinstance(info.value.__cause__, ZeroDivisionError)


def test_read_errors_pass_through_unwrapped() -> None:
    mod = _reader_plugin("strict", (".s",))

    def read(path: Path) -> Sensors:
        raise ReadError(path, 7, "expected 'label x y z'")

    reg = make_registry(entry_points=False, plugins=[mod])
    d = reg.get("sensor_reader", "strict")
    from dataclasses import replace
    with pytest.raises(ReadError, match="x.s:7: expected"):
        reg.call(replace(d, read=read), "read", Path("x.s"))


def test_duplicate_names_and_wrong_return_types_are_named() -> None:
    other = _reader_plugin("same", (".b",))
    other.__name__ = "other"
    with pytest.raises(PluginError, match="'same' is also provided by plugin"):
        make_registry(entry_points=False, plugins=[_reader_plugin("same", (".a",)), other]
                      ).descriptors("sensor_reader")
    bad = types.ModuleType("bad")
    bad.headprep_register_sensor_readers = hookimpl(lambda: ["not a descriptor"])
    with pytest.raises(PluginError, match="plugin 'bad'.*expected SensorReader"):
        make_registry(entry_points=False, plugins=[bad]).descriptors("sensor_reader")


def test_misspelled_hook_is_refused() -> None:
    mod = types.ModuleType("typo")
    mod.headprep_register_sensor_reader = hookimpl(lambda: [])  # missing the final 's'
    with pytest.raises(PluginError, match="typo"):
        make_registry(entry_points=False, plugins=[mod])


def test_missing_requirement_makes_descriptor_unavailable() -> None:
    mod = types.ModuleType("needy")

    @hookimpl
    def headprep_register_sensor_readers() -> list[SensorReader]:
        return [SensorReader(name="needy", suffixes=(".n",), read=lambda p: None,
                             requires=("a_module_that_does_not_exist_42",))]

    mod.headprep_register_sensor_readers = headprep_register_sensor_readers
    reg = make_registry(entry_points=False, plugins=[mod])
    assert reg.descriptors("sensor_reader") == []
    with pytest.raises(UsageError, match="unavailable.*a_module_that_does_not_exist_42"):
        reg.get("sensor_reader", "needy")
    assert reg.describe_plugins()[0]["unavailable"][0]["missing"] == ["a_module_that_does_not_exist_42"]


def test_options_are_validated_against_defaults() -> None:
    reg = make_registry(entry_points=False, plugins=[_reader_plugin("opt", (".o",))])
    d = reg.get("sensor_reader", "opt")
    assert reg.options(d, {"count": 5, "ratio": 1}, "r.toml [x]") == {"count": 5, "ratio": 1.0, "flag": False}
    with pytest.raises(UsageError, match=r"r.toml \[x\]: unknown option 'cont'"):
        reg.options(d, {"cont": 5}, "r.toml [x]")
    with pytest.raises(UsageError, match="'count' must be int"):
        reg.options(d, {"count": "five"}, "r.toml [x]")
    with pytest.raises(UsageError, match="'flag' must be bool"):
        reg.options(d, {"flag": 1}, "r.toml [x]")


# ---------------------------------------------------------------- entry points (faked, as pluggy's own tests do)
class _FakeEP:
    def __init__(self, name: str, module: types.ModuleType, dist: object) -> None:
        self.name, self.group, self.value = name, "headprep", module.__name__
        self._module, self.dist = module, dist

    def load(self) -> types.ModuleType:
        return self._module


class _FakeDist:
    def __init__(self, eps: list) -> None:
        self.metadata = {"name": "headprep-fake"}
        self.version = "9.9"
        self.entry_points = eps


def _fake_install(monkeypatch: pytest.MonkeyPatch, plugins: dict[str, types.ModuleType]) -> None:
    dist = _FakeDist([])
    dist.entry_points = [_FakeEP(n, m, dist) for n, m in plugins.items()]
    monkeypatch.setattr(importlib.metadata, "distributions", lambda **kw: [dist])
    monkeypatch.setattr(importlib.metadata, "entry_points", lambda group=None, **kw:
                        [ep for ep in dist.entry_points if group in (None, ep.group)])


def test_entry_point_plugins_report_their_distribution(monkeypatch: pytest.MonkeyPatch) -> None:
    _fake_install(monkeypatch, {"tiny": _reader_plugin("tiny", (".tiny",))})
    reg = make_registry()
    row = next(r for r in reg.describe_plugins() if r["name"] == "tiny")
    assert (row["distribution"], row["version"], row["builtin"]) == ("headprep-fake", "9.9", False)


def test_broken_plugin_import_is_named(monkeypatch: pytest.MonkeyPatch) -> None:
    class Broken(_FakeEP):
        def load(self) -> types.ModuleType:
            raise ImportError("No module named 'nonexistent_dep'")

    dist = _FakeDist([])
    dist.entry_points = [Broken("broken", types.ModuleType("broken"), dist)]
    monkeypatch.setattr(importlib.metadata, "distributions", lambda **kw: [dist])
    monkeypatch.setattr(importlib.metadata, "entry_points", lambda group=None, **kw: dist.entry_points)
    with pytest.raises(PluginError, match="plugin 'broken' \\(headprep-fake==9.9\\) failed during loading"):
        make_registry()
    # blocking it lets everything else load
    make_registry(blocked=["broken"])


def test_allow_list_environment_variable(monkeypatch: pytest.MonkeyPatch) -> None:
    _fake_install(monkeypatch, {"a": _reader_plugin("a", (".a",)), "b": _reader_plugin("b", (".b",))})
    monkeypatch.setenv("HEADPREP_PLUGINS", "b")
    assert [d.name for d in make_registry().descriptors("sensor_reader")] == ["b"]


def test_builtins_load_through_entry_points() -> None:
    reg = make_registry()
    rows = {r["name"]: r for r in reg.describe_plugins()}
    assert "forward_spheres" in rows and rows["forward_spheres"]["builtin"]
    assert sys.modules["prep_plugins.forward_spheres"].__name__ == "prep_plugins.forward_spheres"
