"""Measured accuracy on the labelled literature set tests/data/known_phases/ (sources in known_phases.csv).

The set holds structures whose behaviour at ambient pressure is published: parents that really distort (A7
pnictogens, group-IV chalcogenides, black P, Se, Te from simple cubic or rocksalt) and structures that stay
undistorted (lead chalcogenides, alkali halides, MgO, tetrahedral semiconductors, bcc alkali and fcc metals,
alpha-Po). `benchmarks/accuracy.py` prints the confusion matrix; this test pins the accuracy reached so that it
cannot silently drop, and the named cases the screen must get right.
"""

import csv
from pathlib import Path

import pytest

from screener.screen.rank import rank
from screener.structure.formats import read_structure

FOLDER = Path(__file__).parents[1] / "data" / "known_phases"
#: accuracy reached (30/33 with the default settings when the set was added; 31/33 since the closure's bond-bending
#: term fitted to measured shear constants, which turned bcc Li stable); the misses — simple-cubic Te and rocksalt
#: SnS (marginal) — are explained in the table
PINNED_CORRECT = 31


def _cases():
    with open(FOLDER / "known_phases.csv", newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(line for line in fh if not line.startswith("#")))


@pytest.fixture(scope="module")
def verdicts():
    out = {}
    for row in _cases():
        result = rank(read_structure(FOLDER / row["file"]), progress=False)
        out[Path(row["file"]).stem] = (row["expected"], result.candidates[0].verdict if result.candidates else "stable")
    return out


def test_known_phases_accuracy_does_not_drop(verdicts):
    assert len(verdicts) >= 30
    right = sum((v == "unstable") == (e == "unstable") for e, v in verdicts.values())
    assert right >= PINNED_CORRECT, {k: v for k, v in verdicts.items() if (v[1] == "unstable") != (v[0] == "unstable")}


@pytest.mark.parametrize("stem", ["PbTe_rocksalt", "NaCl_rocksalt", "MgO_rocksalt", "Na_bcc", "Si_diamond"])
def test_undistorted_materials_are_not_flagged(verdicts, stem):
    assert verdicts[stem][1] != "unstable"


@pytest.mark.parametrize("stem", ["GeTe_rocksalt_parent", "As_simple_cubic_parent", "Bi_simple_cubic_parent"])
def test_peierls_distorted_materials_are_flagged(verdicts, stem):
    assert verdicts[stem][1] == "unstable"
