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
    # rank of a 2-atom parent takes seconds: the signal arrives while imports or the screen are running
    proc = subprocess.Popen([sys.executable, "-m", "screener", "rank", str(DATA / "GeTe_rocksalt_parent.cif"), "--quiet"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
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
