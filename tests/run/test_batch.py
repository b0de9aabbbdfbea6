"""The batch runner and its store: everything once, nothing lost, the same answers as `rank`."""

import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from screener.run.batch import run_batch
from screener.run.store import load_store
from screener.screen.rank import rank
from screener.screen.settings import ScreenSettings
from screener.structure.formats import read_structure

KNOWN = Path(__file__).parents[1] / "data" / "known_phases"
# quick cases of the literature set (sources in known_phases.csv) and coarse settings: the test is about the
# bookkeeping, not the physics (common practice, no source)
GOOD = ["K_bcc", "NaCl_rocksalt", "Si_diamond", "ZnS_zincblende", "MgO_rocksalt", "GaAs_zincblende"]
SETTINGS = ScreenSettings(k_step_per_A=0.35, max_refinements=2)


def _folder(tmp_path, names=GOOD, bad=True):
    folder = tmp_path / "inputs"
    (folder / "more").mkdir(parents=True)
    for k, name in enumerate(names):
        shutil.copy(KNOWN / f"{name}.cif", (folder / "more" if k % 2 else folder) / f"{name}.cif")
    if bad:
        (folder / "no_cell.cif").write_text("data_nothing\n_chemical_name_common 'no cell here'\n")
        (folder / "more" / "broken.json").write_text("{ not json")
    (folder / "notes.md").write_text("not a structure: ignored by the folder search\n")
    return folder


def test_mixed_folder_gives_one_row_per_structure_with_rank_s_answers(tmp_path):
    folder = _folder(tmp_path, GOOD[:4])
    store = tmp_path / "s.sqlite"
    summary = run_batch([folder], store=store, workers=1, progress=False, settings=SETTINGS)
    assert (summary.ranked, summary.failed, summary.skipped) == (4, 2, 0)
    table = load_store(store)
    assert len(table) == 6 and sorted(table.status) == ["error"] * 2 + ["ranked"] * 4
    errors = table[table.status == "error"].set_index(table[table.status == "error"].path.map(lambda p: Path(p).name))
    assert "no data block has a cell" in errors.loc["no_cell.cif", "error"]
    assert "not valid JSON" in errors.loc["broken.json", "error"]
    for _, row in table[table.status == "ranked"].iterrows():
        direct = rank(read_structure(row.path), settings=SETTINGS, progress=False).candidates[0]
        assert row.verdict == direct.verdict
        assert row.delta_E_meV_per_atom == pytest.approx(direct.delta_E_meV_per_atom, abs=0.1)
    # every candidate of every ranked structure is in the candidates table
    with sqlite3.connect(store) as conn:
        n_cand = conn.execute("SELECT COUNT(*) FROM candidates").fetchone()[0]
        assert n_cand >= 4
    # a second run finds everything done
    again = run_batch([folder], store=store, workers=1, progress=False, settings=SETTINGS)
    assert (again.ranked, again.failed, again.skipped) == (0, 0, 6)
    assert len(load_store(store)) == 6
    # other settings are another screen: everything is ranked again, into the same store
    other = run_batch([folder], store=store, workers=1, progress=False,
                      settings=ScreenSettings(k_step_per_A=0.4, max_refinements=1))
    assert (other.ranked, other.failed) == (4, 2)


def test_two_workers_store_the_same_answers_as_one(tmp_path):
    folder = _folder(tmp_path, GOOD[:4], bad=False)
    one, two = tmp_path / "one.sqlite", tmp_path / "two.sqlite"
    run_batch([folder], store=one, workers=1, progress=False, settings=SETTINGS)
    run_batch([folder], store=two, workers=2, progress=False, settings=SETTINGS)
    a = load_store(one).set_index("content_hash").sort_index()
    b = load_store(two).set_index("content_hash").sort_index()
    assert list(a.index) == list(b.index)
    assert list(a.verdict) == list(b.verdict)
    assert (a.delta_E_meV_per_atom - b.delta_E_meV_per_atom).abs().max() < 1e-9


def test_killed_batch_resumes_with_every_structure_exactly_once(tmp_path):
    folder = _folder(tmp_path, GOOD, bad=False)
    listing = tmp_path / "inputs.txt"
    listing.write_text("# a list of paths, relative to this file\n" +
                       "\n".join(str(p.relative_to(tmp_path)) for p in sorted(folder.rglob("*.cif"))) + "\n")
    store = tmp_path / "s.sqlite"
    cmd = [sys.executable, "-m", "screener.show.cli", "batch", str(listing), "--store", str(store), "--workers", "1",
           "--k-step", "0.35", "--quiet"]
    proc = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 120
    stored = 0
    while time.time() < deadline and proc.poll() is None:
        time.sleep(0.2)
        if store.exists():
            try:
                with sqlite3.connect(store, timeout=1) as conn:
                    stored = conn.execute("SELECT COUNT(*) FROM structures").fetchone()[0]
            except sqlite3.OperationalError:
                continue
            if stored >= 2:
                break
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    assert 2 <= stored < len(GOOD), "the batch should have been killed part-way"
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    with sqlite3.connect(store) as conn:
        rows = conn.execute("SELECT content_hash, COUNT(*) FROM structures GROUP BY content_hash").fetchall()
    assert len(rows) == len(GOOD) and all(n == 1 for _, n in rows)
    assert f"{len(GOOD) - stored} ranked" in done.stdout or "ranked" in done.stdout


def test_missing_input_is_a_clear_error(tmp_path):
    from screener.errors import ParameterError

    with pytest.raises(ParameterError, match="does not exist"):
        run_batch([tmp_path / "nowhere.cif"], store=tmp_path / "s.sqlite", progress=False)
    with pytest.raises(ParameterError, match="is a folder"):
        run_batch([], store=tmp_path, progress=False)


def test_dask_cluster_fills_the_same_store_as_local_workers(tmp_path):
    # a LocalCluster started by the test stands in for a real scheduler (Dask distributed documentation)
    distributed = pytest.importorskip("distributed")
    folder = _folder(tmp_path, GOOD[:3], bad=True)
    local, remote = tmp_path / "local.sqlite", tmp_path / "dask.sqlite"
    run_batch([folder], store=local, workers=2, progress=False, settings=SETTINGS)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cl:
        summary = run_batch([folder], store=remote, dask=cl.scheduler_address, progress=False, settings=SETTINGS)
    assert (summary.ranked, summary.failed) == (3, 2)
    a = load_store(local).set_index("content_hash").sort_index()
    b = load_store(remote).set_index("content_hash").sort_index()
    assert list(a.index) == list(b.index) and list(a.status) == list(b.status)
    assert list(a.verdict.fillna("")) == list(b.verdict.fillna(""))
    assert (a.delta_E_meV_per_atom - b.delta_E_meV_per_atom).abs().max() < 1e-9


def test_batch_command_writes_csv_and_report(tmp_path, capsys):
    from screener.show.cli import main

    folder = _folder(tmp_path, GOOD[:2], bad=True)
    store, csv, rep = tmp_path / "s.sqlite", tmp_path / "out.csv", tmp_path / "rep"
    args = ["batch", str(folder), "--store", str(store), "--workers", "1", "--k-step", "0.35", "--quiet"]
    assert main(args + ["--csv", str(csv), "--report", str(rep)]) == 0
    out = capsys.readouterr().out
    assert "2 ranked, 2 failed, 0 skipped" in out
    assert csv.read_text().count("\n") == 5  # header + 4 structures
    summary = (rep / "summary.txt").read_text()
    assert "structures: 4 (2 ranked, 2 errors)" in summary and "no data block has a cell" in summary
    assert (rep / "delta_E_histogram.png").stat().st_size > 0
    assert (rep / "delta_E_vs_volume_per_atom.png").stat().st_size > 0
    assert main(args) == 0
    assert "nothing to do" in capsys.readouterr().out
    assert main(["batch", str(folder), "--store", str(store), "--csv", str(tmp_path)]) == 2
    assert "is a folder" in capsys.readouterr().err
