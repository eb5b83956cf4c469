"""Run folders: every file written, atomically, and earlier results never damaged."""

from __future__ import annotations

import json
import os
import stat
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from hubnet import runfolder
from hubnet.config import HubModelParams
from hubnet.data import Demand, NetworkData, Site
from hubnet.errors import EXIT_OUTPUT_EXISTS, HubnetError, OutputExistsError
from hubnet.report import all_tables, summary_dict
from hubnet.runfolder import STANDARD_FILES, TABLE_FILES, preflight, render_run, write_run
from hubnet.solution import Solution, SolveStats, evaluate_plan


def square_plan(hub_fixed_cost: float = 10.0) -> Solution:
    """Four sites on a 10 km square, hubs at A and C, each terminal to its nearer hub.

    A(0,0) B(10,0) C(10,10) D(0,10); B goes to A and D to C (ties broken by
    the lower index). One pallet a day between every ordered pair.
    """
    coords = {"A": (0.0, 0.0), "B": (10.0, 0.0), "C": (10.0, 10.0), "D": (0.0, 10.0)}
    sites = tuple(
        Site(k, f"Depot {k}", x=x, y=y, hub_fixed_cost=hub_fixed_cost, handling_cost=0.5)
        for k, (x, y) in coords.items()
    )
    demand = tuple(Demand(o, t, 1.0) for o in coords for t in coords if o != t)
    data = NetworkData(sites, demand, volume_unit="pallets", coordinates="planar")
    xy = np.array(list(coords.values()))
    d = np.linalg.norm(xy[:, None, :] - xy[None, :, :], axis=2)
    stats = SolveStats("cbc", "optimal", None, None, 0.0, 0.5, 0.1, "hand-built", {"threads": 1})
    sol = evaluate_plan(data, d, HubModelParams(), [0, 2], np.array([0, 0, 2, 2]), stats, "sq")
    total = sol.costs["total"]  # as a solver would report it: the objective check is 0
    return replace(sol, stats=replace(stats, objective=total, best_bound=total))


def snapshot(folder: Path) -> dict[str, bytes]:
    """Every file under a folder, by relative name, with its bytes."""
    return {
        p.relative_to(folder).as_posix(): p.read_bytes()
        for p in sorted(folder.rglob("*"))
        if p.is_file()
    }


def hidden_siblings(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.parent.iterdir() if p.name.startswith("."))


# --------------------------------------------------------------------------
# What is written
# --------------------------------------------------------------------------


def test_write_run_creates_every_file_and_they_read_back_to_the_same_numbers(tmp_path):
    sol = square_plan()
    out = write_run(tmp_path / "run", sol, config_text='[scenario]\nname = "sq"\n')
    assert out == tmp_path / "run"
    assert sorted(p.name for p in out.iterdir()) == sorted(STANDARD_FILES)
    for name, table in all_tables(sol).items():
        back = pd.read_csv(out / f"{name}.csv")
        assert list(back.columns) == list(table.columns)
        pd.testing.assert_frame_equal(back, table, check_dtype=False, check_exact=True)
    summary = json.loads((out / "summary.json").read_text(encoding="utf-8"))
    assert summary == summary_dict(sol)
    assert summary["costs"]["total"] == pytest.approx(sol.costs["total"])
    assert (out / "config.toml").read_text(encoding="utf-8") == '[scenario]\nname = "sq"\n'
    assert hidden_siblings(out) == []


def test_hand_figures_survive_the_round_trip(tmp_path):
    """Square plan: A-B and C-D are 10 km feeders, A-C the 14.142 km trunk.

    Hub A takes in the volume of A and B: 3 pallets each (one to every other
    site) = 6; same for C. Trunk A->C carries the four pairs from {A, B} to
    {C, D}: 4 pallets.
    """
    out = write_run(tmp_path / "run", square_plan())
    hubs = pd.read_csv(out / "hubs.csv").set_index("hub_id")
    assert hubs.loc["A", "inbound_per_day"] == pytest.approx(6.0)
    assert hubs.loc["A", "terminal_ids"] == "A;B"
    legs = pd.read_csv(out / "legs.csv")
    trunk = legs[legs["tier"] == "trunk"].set_index(["from_site", "to_site"])
    assert trunk.loc[("A", "C"), "volume_per_day"] == pytest.approx(4.0)
    assert trunk.loc[("A", "C"), "distance_km"] == pytest.approx(200**0.5)
    routes = pd.read_csv(out / "routes.csv").set_index(["origin", "destination"])
    assert routes.loc[("B", "D"), "path"] == "B > A > C > D"
    hierarchy = pd.read_csv(out / "hierarchy.csv").set_index("tier")
    assert hierarchy.loc["trunk", "legs"] == 2
    assert hierarchy.loc["feeder", "legs"] == 4


def test_summary_argument_is_written_as_given(tmp_path):
    sol = square_plan()
    summary = summary_dict(sol, extra={"run_id": "nightly-7"})
    out = write_run(tmp_path / "run", sol, summary=summary)
    assert json.loads((out / "summary.json").read_text())["run_id"] == "nightly-7"
    assert not (out / "config.toml").exists()


def test_extra_files_are_written_including_subfolders(tmp_path):
    out = write_run(
        tmp_path / "run",
        square_plan(),
        extra_files={"map.html": "<html>é</html>", "maps/trunk.html": b"\x00\x01"},
    )
    assert (out / "map.html").read_text(encoding="utf-8") == "<html>é</html>"
    assert (out / "maps" / "trunk.html").read_bytes() == b"\x00\x01"


@pytest.mark.parametrize("name", ["../escape.txt", "/abs.txt", "", "a/../../b", "C:/x.txt"])
def test_extra_file_names_leaving_the_folder_are_refused_before_writing(tmp_path, name):
    with pytest.raises(ValueError, match="relative name"):
        write_run(tmp_path / "run", square_plan(), extra_files={name: "x"})
    assert list(tmp_path.iterdir()) == []


def test_extra_file_may_not_replace_a_standard_file(tmp_path):
    with pytest.raises(ValueError, match="standard run file"):
        render_run(square_plan(), extra_files={"hubs.csv": "x"})
    with pytest.raises(ValueError, match="standard run file"):
        render_run(square_plan(), extra_files={"./summary.json": "x"})


def test_render_run_lists_the_tables_with_unix_line_ends():
    files = render_run(square_plan())
    assert set(files) == {"summary.json", *TABLE_FILES}
    assert all(b"\r\n" not in data for data in files.values())


def test_parent_folders_are_created_and_permissions_are_the_usual_ones(tmp_path):
    out = write_run(tmp_path / "a" / "b" / "run", square_plan())
    assert (out / "summary.json").is_file()
    umask = os.umask(0)
    os.umask(umask)
    if os.name == "posix":
        assert stat.S_IMODE(out.stat().st_mode) == 0o777 & ~umask


# --------------------------------------------------------------------------
# Existing folders
# --------------------------------------------------------------------------


def test_existing_folder_is_refused_before_anything_is_written(tmp_path, monkeypatch):
    out = tmp_path / "run"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    calls = []
    monkeypatch.setattr(runfolder, "_write_file", lambda *a: calls.append(a))
    with pytest.raises(OutputExistsError, match="already exists") as info:
        write_run(out, square_plan())
    assert info.value.exit_code == EXIT_OUTPUT_EXISTS
    assert calls == []
    assert snapshot(out) == {"notes.txt": b"mine"}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run"]


def test_preflight(tmp_path):
    out = tmp_path / "run"
    assert preflight(out) == out
    assert not out.exists()  # preflight writes nothing
    write_run(out, square_plan())
    with pytest.raises(OutputExistsError):
        preflight(out)
    assert preflight(out, force=True) == out
    assert preflight(str(out), force=True) == out


def test_force_replaces_the_folder_and_leaves_no_hidden_folder(tmp_path):
    out = tmp_path / "run"
    write_run(out, square_plan(hub_fixed_cost=10.0), extra_files={"old-only.txt": "x"})
    write_run(out, square_plan(hub_fixed_cost=99.0), force=True)
    hubs = pd.read_csv(out / "hubs.csv")
    assert hubs["fixed_cost_per_day"].tolist() == [99.0, 99.0]
    assert not (out / "old-only.txt").exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run"]


def test_force_accepts_an_empty_folder(tmp_path):
    out = tmp_path / "run"
    out.mkdir()
    write_run(out, square_plan(), force=True)
    assert (out / "summary.json").is_file()


def test_force_refuses_a_folder_that_is_not_a_run_folder(tmp_path):
    out = tmp_path / "home"
    out.mkdir()
    (out / "thesis.docx").write_bytes(b"precious")
    with pytest.raises(OutputExistsError, match="does not look like a hubnet run folder"):
        write_run(out, square_plan(), force=True)
    assert snapshot(out) == {"thesis.docx": b"precious"}


def test_force_refuses_a_file_and_a_link(tmp_path):
    a_file = tmp_path / "run.txt"
    a_file.write_text("x")
    with pytest.raises(OutputExistsError, match="not a folder"):
        write_run(a_file, square_plan(), force=True)
    target = tmp_path / "real"
    write_run(target, square_plan())
    link = tmp_path / "link"
    link.symlink_to(target, target_is_directory=True)
    with pytest.raises(OutputExistsError, match="link"):
        write_run(link, square_plan(), force=True)


@pytest.mark.parametrize("name", [".", "..", "/"])
def test_a_path_naming_no_folder_is_refused(name):
    with pytest.raises(HubnetError, match="give the path of a folder"):
        preflight(Path(name), force=True)


def test_a_file_in_the_parent_path_is_reported(tmp_path):
    (tmp_path / "blocker").write_text("x")
    with pytest.raises(HubnetError, match="is a file"):
        preflight(tmp_path / "blocker" / "run")


# --------------------------------------------------------------------------
# Failures while writing
# --------------------------------------------------------------------------


def _failing_writer(monkeypatch, fail_on_call: int) -> list[Path]:
    """Make the n-th file write raise, after the earlier ones really wrote."""
    real = runfolder._write_file
    written: list[Path] = []

    def writer(path: Path, data: bytes) -> None:
        if len(written) + 1 == fail_on_call:
            raise OSError(28, "No space left on device (injected)")
        real(path, data)
        written.append(path)

    monkeypatch.setattr(runfolder, "_write_file", writer)
    return written


def test_failure_mid_write_leaves_the_earlier_folder_byte_identical(tmp_path, monkeypatch):
    out = tmp_path / "run"
    write_run(out, square_plan(hub_fixed_cost=10.0), config_text="a = 1\n")
    before = snapshot(out)
    written = _failing_writer(monkeypatch, fail_on_call=3)
    with pytest.raises(OSError, match="injected"):
        write_run(out, square_plan(hub_fixed_cost=99.0), force=True)
    assert len(written) == 2  # the failure really came mid-write
    assert snapshot(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run"]


def test_failure_mid_write_creates_nothing(tmp_path, monkeypatch):
    _failing_writer(monkeypatch, fail_on_call=4)
    with pytest.raises(OSError, match="injected"):
        write_run(tmp_path / "run", square_plan())
    assert list(tmp_path.iterdir()) == []


def test_interrupt_mid_write_also_cleans_up(tmp_path, monkeypatch):
    def interrupted(path: Path, data: bytes) -> None:
        raise KeyboardInterrupt

    monkeypatch.setattr(runfolder, "_write_file", interrupted)
    with pytest.raises(KeyboardInterrupt):
        write_run(tmp_path / "run", square_plan())
    assert list(tmp_path.iterdir()) == []


def test_failure_while_swapping_puts_the_old_folder_back(tmp_path, monkeypatch):
    out = tmp_path / "run"
    write_run(out, square_plan(hub_fixed_cost=10.0))
    before = snapshot(out)
    real_rename = os.rename
    calls: list[tuple[str, str]] = []

    def rename(src, dst):
        calls.append((Path(src).name, Path(dst).name))
        if len(calls) == 2:  # the new folder moving in
            raise OSError("rename failed (injected)")
        real_rename(src, dst)

    monkeypatch.setattr(runfolder.os, "rename", rename)
    with pytest.raises(OSError, match="injected"):
        write_run(out, square_plan(hub_fixed_cost=99.0), force=True)
    assert calls[0][0] == "run" and calls[0][1].startswith(".run.old-")
    assert calls[1][0].startswith(".run.tmp-") and calls[1][1] == "run"
    assert snapshot(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run"]


def test_folder_appearing_during_the_write_is_not_overwritten(tmp_path, monkeypatch):
    out = tmp_path / "run"
    real = runfolder._write_file

    def writer(path: Path, data: bytes) -> None:
        if not out.exists():  # another process creates the folder meanwhile
            out.mkdir()
            (out / "theirs.txt").write_text("theirs")
        real(path, data)

    monkeypatch.setattr(runfolder, "_write_file", writer)
    with pytest.raises(OutputExistsError):
        write_run(out, square_plan())
    assert snapshot(out) == {"theirs.txt": b"theirs"}
    assert sorted(p.name for p in tmp_path.iterdir()) == ["run"]


def test_undeletable_old_copy_gives_a_warning_not_an_error(tmp_path, monkeypatch):
    out = tmp_path / "run"
    write_run(out, square_plan(hub_fixed_cost=10.0))

    def rmtree(path, *args, **kwargs):
        raise PermissionError("busy (injected)")

    monkeypatch.setattr(runfolder.shutil, "rmtree", rmtree)
    with pytest.warns(UserWarning, match="could not be deleted"):
        write_run(out, square_plan(hub_fixed_cost=99.0), force=True)
    assert pd.read_csv(out / "hubs.csv")["fixed_cost_per_day"].tolist() == [99.0, 99.0]
    leftovers = hidden_siblings(out)
    assert len(leftovers) == 1 and leftovers[0].startswith(".run.old-")
