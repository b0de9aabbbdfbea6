"""Stopping the CLI from outside: one line on stderr and the conventional exit status 128 + signal number
(130 for SIGINT/Ctrl-C, 143 for SIGTERM; POSIX shell convention, common practice, no source)."""

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

DATA = Path(__file__).parents[1] / "data" / "known_phases"

pytestmark = pytest.mark.skipif(os.name != "posix", reason="POSIX signals")


def _stop(sig, after_s):
    # rank of a 2-atom parent on a fine k-step takes several seconds (about 4.6 s of CPU here): the signal arrives
    # while imports or the screen are running, however fast the default screen becomes
    cmd = [sys.executable, "-m", "screener", "rank", str(DATA / "GeTe_rocksalt_parent.cif"), "--quiet",
           "--k-step", "0.07"]
    proc = subprocess.Popen(cmd, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    time.sleep(after_s)
    proc.send_signal(sig)
    out, err = proc.communicate(timeout=60)
    return proc.returncode, err.strip().splitlines()


@pytest.mark.parametrize("after_s", [0.5, 2.0])
def test_sigterm_exits_143_with_one_line(after_s):
    rc, err = _stop(signal.SIGTERM, after_s)
    assert rc == 143
    assert err == ["screener: terminated"]


@pytest.mark.parametrize("after_s", [0.5, 2.0])
def test_ctrl_c_exits_130_with_one_line(after_s):
    rc, err = _stop(signal.SIGINT, after_s)
    assert rc == 130
    assert err == ["screener: interrupted"]


def test_sigterm_during_a_batch_exits_143_after_storing_the_work_in_flight(tmp_path):
    # a batch catches the interrupt to store what is in flight, then owes the caller the signal's status
    store = tmp_path / "s.sqlite"
    proc = subprocess.Popen([sys.executable, "-m", "screener", "batch", str(DATA), "--store", str(store),
                             "--workers", "1", "--quiet"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    time.sleep(3.0)  # 33 structures take well over a minute: the signal lands mid-batch
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 143, err
    assert "stopped before the end; run the same command again to finish" in err
