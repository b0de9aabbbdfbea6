"""Band paths: special points of Setyawan & Curtarolo, Comput. Mater. Sci. 49, 299 (2010), in the input cell."""

import itertools

import numpy as np
import pytest

from screener import Crystal, ParameterError
from screener.bz.routes import parse_kpoints, special_points, zone_route


def _rhombohedral(a, alpha_deg):
    """Rhombohedral lattice rows with |a_i| = a and pairwise angle alpha."""
    ca = np.cos(np.radians(alpha_deg))
    ch = np.cos(np.radians(alpha_deg) / 2)
    sh = np.sin(np.radians(alpha_deg) / 2)
    # primitive vectors of the rhombohedral lattice, Setyawan & Curtarolo (2010), RHL entry (from memory)
    return a * np.array([[ch, -sh, 0], [ch, sh, 0], [ca / ch, 0, np.sqrt(1 - ca**2 / ch**2)]])


def _one_atom(lattice, el="Po"):
    return Crystal(np.asarray(lattice, float), [[0, 0, 0]], [el])


def _conventional(lattice, centring, el="Po"):
    base = {"P": [[0, 0, 0]], "I": [[0, 0, 0], [0.5, 0.5, 0.5]],
            "F": [[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]}[centring]
    return Crystal(np.asarray(lattice, float), base, [el] * len(base))


def _hexagonal(a, c):
    return np.array([[a, 0, 0], [-a / 2, a * np.sqrt(3) / 2, 0], [0, 0, c]])


CASES = {
    "CUB": _one_atom(np.eye(3) * 3.3),
    "FCC": _conventional(np.eye(3) * 4.0, "F", "Cu"),
    "BCC": _conventional(np.eye(3) * 3.2, "I", "W"),
    "TET": _one_atom(np.diag([3.0, 3.0, 4.1])),
    "BCT1": _conventional(np.diag([4.0, 4.0, 3.0]), "I"),  # c < a
    "BCT2": _conventional(np.diag([3.0, 3.0, 5.0]), "I"),  # c > a
    "ORC": _one_atom(np.diag([4.0, 5.0, 3.0])),  # deliberately not a < b < c
    "ORCI": _conventional(np.diag([5.0, 3.0, 4.0]), "I"),  # axes to be sorted a < b < c
    "ORCC": Crystal(np.diag([4.0, 3.0, 5.0]), [[0, 0, 0], [0.5, 0.5, 0]], ["Po"] * 2),  # C-centred, a > b
    "HEX": _one_atom(_hexagonal(3.0, 4.5)),
    "RHL1": _one_atom(_rhombohedral(3.5, 70.0), "Bi"),  # alpha < 90°
    "RHL2": _one_atom(_rhombohedral(3.5, 100.0), "Bi"),  # alpha > 90°
}


def _cart(crystal, kfrac):
    return np.asarray(kfrac) @ crystal.reciprocal_A  # without 2π


def _equivalent(crystal, f1, f2):
    """True if k-points f1 and f2 (fractions of crystal's reciprocal vectors) are related by a point-group
    operation of the crystal, time reversal and a reciprocal lattice vector."""
    from screener.structure.symmetry import analyse

    # x' = W x in real-space fractions sends k to k W^-1; the group contains every inverse, so try k W for all W
    for w in analyse(crystal).rotations:
        for sign in (1, -1):
            d = sign * np.asarray(f1) @ w - np.asarray(f2)
            if np.allclose(d, np.round(d), atol=1e-8):
                return True
    return False


def _on_zone_surface(crystal, k_cart):
    """True if k lies on the Brillouin-zone boundary: as close to Γ as to its nearest other reciprocal point."""
    prim = crystal  # one atom or a centred cell: the zone of the Bravais lattice is what matters
    import spglib

    from screener.structure.symmetry import _cell

    lat, _, _ = spglib.standardize_cell(_cell(prim), to_primitive=True)
    rot = spglib.get_symmetry_dataset(_cell(prim)).std_rotation_matrix
    rec = np.linalg.inv(lat).T @ rot  # primitive reciprocal rows in the input frame (no 2π)
    g = np.array(list(itertools.product(range(-3, 4), repeat=3))) @ rec
    d = np.linalg.norm(k_cart[None, :] - g, axis=1)
    d_gamma = np.linalg.norm(k_cart)
    others = d[np.linalg.norm(g, axis=1) > 1e-9]
    return d_gamma <= others.min() + 1e-9 and abs(others.min() - d_gamma) < 1e-9


@pytest.mark.parametrize("name", list(CASES))
def test_lattice_type_and_points_on_zone_surface(name):
    # Setyawan & Curtarolo (2010), Figs. 1-11: every special point other than Γ lies on the zone boundary
    crystal = CASES[name]
    lattice_type, points, path = special_points(crystal)
    assert lattice_type == name
    assert np.allclose(points["Γ"], 0)
    for label, f in points.items():
        if label == "Γ":
            continue
        assert _on_zone_surface(crystal, _cart(crystal, f)), f"{name}: {label}={f} is not on the zone surface"
    assert all(lab in points for piece in path for lab in piece)


def test_simple_cubic_points_in_cubic_cell():
    # Setyawan & Curtarolo (2010), Table 2 (CUB) (from memory)
    _, pts, path = special_points(CASES["CUB"])
    assert np.allclose(pts["X"], [0, 0.5, 0])
    assert np.allclose(pts["M"], [0.5, 0.5, 0])
    assert np.allclose(pts["R"], [0.5, 0.5, 0.5])
    assert path == [["Γ", "X", "M", "Γ", "R", "X"], ["M", "R"]]


def test_fcc_points_in_standard_primitive_cell():
    # Setyawan & Curtarolo (2010), Table 3 (FCC) (from memory); their primitive a1=(0,a/2,a/2), a2=(a/2,0,a/2),
    # a3=(a/2,a/2,0)
    a = 4.0
    crystal = _one_atom([[0, a / 2, a / 2], [a / 2, 0, a / 2], [a / 2, a / 2, 0]], "Cu")
    t, pts, _ = special_points(crystal)
    assert t == "FCC"
    assert np.allclose(pts["X"], [0.5, 0, 0.5])
    assert np.allclose(pts["L"], [0.5, 0.5, 0.5])
    assert np.allclose(pts["W"], [0.5, 0.25, 0.75])
    assert np.allclose(pts["K"], [3 / 8, 3 / 8, 3 / 4])
    assert np.allclose(pts["U"], [5 / 8, 1 / 4, 5 / 8])


def test_bcc_hex_points_cartesian():
    # Setyawan & Curtarolo (2010), Tables 4 and 11 (from memory): BCC H = (1/2,-1/2,1/2) in their primitive basis,
    # which is the Cartesian point 2π/a (0, 0, 1); HEX K = (1/3,1/3,0) at |k| = 4π/(3a), A = (0,0,1/2) at π/c
    a = 3.2
    crystal = CASES["BCC"]
    _, pts, _ = special_points(crystal)
    assert np.allclose(np.sort(np.abs(_cart(crystal, pts["H"]))), [0, 0, 1 / a])
    assert np.isclose(np.linalg.norm(_cart(crystal, pts["P"])), np.sqrt(3) / (2 * a))
    hexa = CASES["HEX"]
    _, pts, _ = special_points(hexa)
    assert np.isclose(2 * np.pi * np.linalg.norm(_cart(hexa, pts["K"])), 4 * np.pi / (3 * 3.0))
    assert np.isclose(2 * np.pi * np.linalg.norm(_cart(hexa, pts["A"])), np.pi / 4.5)
    assert np.isclose(2 * np.pi * np.linalg.norm(_cart(hexa, pts["M"])), 2 * np.pi / (np.sqrt(3) * 3.0))


def test_rhl_eta_nu_formulas():
    # Setyawan & Curtarolo (2010), Table 10 (RHL1): eta = (1 + 4 cos α)/(2 + 4 cos α), nu = 3/4 - eta/2;
    # RHL2: eta = 1/(2 tan²(α/2)) (from memory). The input cell here *is* their primitive cell.
    _, pts, _ = special_points(CASES["RHL1"])
    ca = np.cos(np.radians(70.0))
    eta = (1 + 4 * ca) / (2 + 4 * ca)
    nu = 3 / 4 - eta / 2
    # which of the three equivalent axes spglib puts first may differ: compare as sets under permutations
    perms = [np.array(p) for p in itertools.permutations(range(3))]
    assert any(np.allclose(pts["P"][p], [eta, nu, nu]) for p in perms)
    assert any(np.allclose(pts["Z"][p], [0.5, 0.5, 0.5]) for p in perms)
    _, pts, _ = special_points(CASES["RHL2"])
    eta2 = 1 / (2 * np.tan(np.radians(100.0) / 2) ** 2)
    assert any(np.allclose(np.abs(pts["Q"][p]), [eta2, eta2, eta2]) for p in perms)


@pytest.mark.parametrize("name", ["FCC", "HEX", "RHL1", "BCT2", "ORC"])
def test_supercell_points_at_same_cartesian_positions(name):
    # the special points are properties of the crystal, not of the cell chosen to describe it
    crystal = CASES[name]
    big = crystal.supercell([[1, 1, 0], [0, 1, 0], [0, 0, 2]])
    _, p1, _ = special_points(crystal)
    _, p2, _ = special_points(big)
    assert p1.keys() == p2.keys()
    for lab in p1:
        # spglib may orient the conventional cell differently, so compare up to symmetry
        f2_in_small = _cart(big, p2[lab]) @ crystal.lattice_A.T
        assert _equivalent(crystal, p1[lab], f2_in_small), lab


def test_rotated_input_gives_same_fractions():
    # fractions of k relative to the cell do not change when the whole crystal is rotated (up to the choice among
    # symmetry-equivalent points that spglib's orientation of the conventional cell makes)
    rng = np.random.default_rng(7)
    q, _ = np.linalg.qr(rng.normal(size=(3, 3)))
    q *= np.sign(np.linalg.det(q))
    for name in ["HEX", "BCT1", "RHL2"]:
        c = CASES[name]
        rot = c.replace(lattice_A=c.lattice_A @ q.T)
        _, p1, _ = special_points(c)
        _, p2, _ = special_points(rot)
        for lab in p1:
            assert _equivalent(c, p1[lab], p2[lab]), (name, lab)


def test_hexagonal_setting_of_rhombohedral_crystal():
    # the same rhombohedral lattice given in its triple hexagonal cell (International Tables A, obverse setting)
    a_h, c_h = 4.0, 10.0
    hexcell = Crystal(_hexagonal(a_h, c_h), [[0, 0, 0], [2 / 3, 1 / 3, 1 / 3], [1 / 3, 2 / 3, 2 / 3]], ["As"] * 3)
    t, pts, _ = special_points(hexcell)
    assert t.startswith("RHL")
    # Z lies on the threefold axis at half the primitive reciprocal spacing along c*: 3/(2 c_h) (no 2π)
    assert np.allclose(np.abs(_cart(hexcell, pts["Z"])), [0, 0, 1.5 / c_h])
    assert _on_zone_surface(hexcell, _cart(hexcell, pts["L"]))


def test_a_centred_orthorhombic_is_turned_into_c():
    # Amm2 (International Tables A, No. 38): atoms on 2a (0,0,z) with the A centring (0,1/2,1/2)
    lat = np.diag([3.0, 4.0, 5.5])
    crystal = Crystal(lat, [[0, 0, 0], [0, 0.5, 0.5], [0, 0, 0.31], [0, 0.5, 0.81]], ["Ge", "Ge", "Te", "Te"])
    import spglib

    from screener.structure.symmetry import _cell

    assert spglib.get_symmetry_dataset(_cell(crystal)).international == "Amm2"
    lattice_type, points, _ = special_points(crystal)
    assert lattice_type == "ORCC"
    for label, f in points.items():
        if label != "Γ":
            assert _on_zone_surface(crystal, _cart(crystal, f)), label


def test_fallback_for_triclinic():
    crystal = _one_atom([[3.0, 0.1, 0.2], [0.4, 3.5, 0.3], [0.2, 0.5, 4.2]])
    t, pts, path = special_points(crystal)
    assert t == "fallback-TRI"
    assert set(pts) == {"Γ", "X", "Y", "Z"}
    assert path == [["Γ", "X"], ["Y", "Γ", "Z"]]


def test_zone_route_sampling_and_ticks():
    crystal = CASES["CUB"]
    bp = zone_route(crystal, points_per_inv_A=30)
    a = 3.3
    # path Γ-X-M-Γ-R-X|M-R: lengths (2π/a) * (1/2, 1/2, √2/2, √3/2, √2/2 | √2/2 ... ) -- simple geometry
    legs = np.array([0.5, 0.5, np.sqrt(2) / 2, np.sqrt(3) / 2, np.sqrt(2) / 2, 0.5]) * 2 * np.pi / a
    assert np.allclose(bp.tick_x, np.concatenate([[0], np.cumsum(legs)]))
    assert bp.tick_labels == ("Γ", "X", "M", "Γ", "R", "X|M", "R")
    assert len(bp.segments) == 2 and bp.segments[0][1] == bp.segments[1][0]
    assert bp.segments[-1][1] == len(bp.kfrac) == len(bp.x_inv_A)
    assert np.all(np.diff(bp.x_inv_A) >= 0)
    # cumulative length equals the summed Cartesian step lengths inside each piece
    k = 2 * np.pi * bp.kfrac @ crystal.reciprocal_A
    for s, e in bp.segments:
        steps = np.linalg.norm(np.diff(k[s:e], axis=0), axis=1)
        assert np.allclose(np.diff(bp.x_inv_A[s:e]), steps)
    for idx, lab in bp.vertices:
        assert np.array_equal(bp.kfrac[idx], bp.points_frac[lab])


def test_explicit_kpoints_string():
    crystal = CASES["CUB"]
    bp = zone_route(crystal, kpoints="0,0,0; X=0,0.5,0 ;0.5,0.5,0")
    assert bp.lattice_type == "explicit"
    assert [lab for _, lab in bp.vertices] == ["0,0,0", "X", "0.5,0.5,0"]
    assert np.array_equal(bp.kfrac[bp.vertices[1][0]], [0, 0.5, 0])
    single = zone_route(crystal, kpoints="0.25,0,0")
    assert single.kfrac.shape == (1, 3) and single.x_inv_A.tolist() == [0.0]


@pytest.mark.parametrize("bad", ["", "0,0", "0,0,0;1,a,0", "0,0,0,0", "nan,0,0"])
def test_bad_kpoints_string(bad):
    with pytest.raises(ParameterError, match="--kpoints .* is not three numbers"):
        parse_kpoints(bad)


def test_bad_kpoints_array():
    with pytest.raises(ParameterError, match=r"\(m, 3\) array"):
        parse_kpoints(np.zeros((2, 2)))


# ------------------------------------------------------------------------------------------------ property tests
from hypothesis import given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402

_SPECIAL_ALPHA = (60.0, 90.0, np.degrees(np.arccos(-1 / 3)))  # rhombohedral angles that are cubic (fcc, sc, bcc)


@settings(max_examples=12, derandomize=True, deadline=None)
@given(alpha=st.floats(35.0, 115.0).filter(lambda a: min(abs(a - s) for s in _SPECIAL_ALPHA) > 2.0))
def test_rhombohedral_points_on_zone_surface_for_any_angle(alpha):
    # Setyawan & Curtarolo (2010), RHL1/RHL2: the η, ν formulas put every special point on the zone boundary
    # (three equal vectors with equal pairwise angles exist only for α < 120°)
    crystal = _one_atom(_rhombohedral(3.5, alpha), "Bi")
    lattice_type, points, _ = special_points(crystal)
    assert lattice_type == ("RHL1" if alpha < 90 else "RHL2")
    for label, f in points.items():
        if label != "Γ":
            assert _on_zone_surface(crystal, _cart(crystal, f)), (alpha, label)


@settings(max_examples=12, derandomize=True, deadline=None)
@given(c_over_a=st.floats(0.5, 2.5).filter(lambda r: abs(r - 1) > 0.03 and abs(r - np.sqrt(2)) > 0.03))
def test_body_centred_tetragonal_points_on_zone_surface(c_over_a):
    # Setyawan & Curtarolo (2010), BCT1 (c < a) and BCT2 (c > a)
    crystal = _conventional(np.diag([3.0, 3.0, 3.0 * c_over_a]), "I")
    lattice_type, points, _ = special_points(crystal)
    assert lattice_type == ("BCT1" if c_over_a < 1 else "BCT2")
    for label, f in points.items():
        if label != "Γ":
            assert _on_zone_surface(crystal, _cart(crystal, f)), (c_over_a, label)
