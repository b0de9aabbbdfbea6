"""Is an observed distortion driven by the bands? Parent → observed structure along a straight path.

The parent (found by `structure.idealise.find_parents`, or given) is written in the observed primitive cell with
the observed atom order; the path r(λ) = r_parent + λ (r_observed − r_parent) moves positions and cell together
(λ = 0 parent, 1 observed, up to 1.5), with the parent's bond set followed to the moving atoms, so short and long
bonds of an alternated network both stay in the model. Band energy on one mesh for every λ; elastic energy from
the parent's closure (`screen.parent.parent_energetics`, the same fit and uncertainty range as `rank`).

Decomposition (issue 11, item 2; `project_on_generator_patterns`): the displacement observed − parent, uniform
translation removed, split orthonormally on the parent's candidate patterns (the families of
`screen.generators.default_candidates`, optionally the soft-mode patterns) with amplitudes in Å, plus the cell
strain and the residual no pattern covers.

Attribution (issue 11): ``band-driven`` when the total energy (bands + closure) at the observed structure lies
below the parent's and the model's optimum along the path lies within 0.5–1.5 of the observed amplitude;
``band-assisted`` when the model gains along the path but its optimum lies elsewhere; ``not band-driven`` when
the model gains nothing along the path. Each member of the closure's range gets its own attribution.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from scipy.linalg import polar
from scipy.optimize import minimize_scalar

from screener.errors import ParameterError, StructureError
from screener.structure.crystal import Crystal

#: λ of the path: parent 0, observed 1, beyond to 1.5 (issue 11).
PATH_LAMBDA = np.round(np.linspace(0.0, 1.5, 16), 6)
#: The optimum must lie within this range of the observed amplitude for 'band-driven' (issue 11).
BAND_DRIVEN_RANGE = (0.5, 1.5)


@dataclass(frozen=True, eq=False)
class PathEnergies:
    """Energies along the straight path parent → observed."""

    lambda_: tuple[float, ...]
    """Path coordinate λ (0 parent, 1 observed)."""
    delta_E_band_meV_per_atom: tuple[float, ...]
    """Band energy relative to the parent, meV/atom."""
    delta_E_elastic_meV_per_atom: tuple[float, ...]
    """Elastic energy of the nominal closure relative to the parent, meV/atom."""
    delta_E_meV_per_atom: tuple[float, ...]
    """Total, meV/atom."""
    member_delta_E_meV_per_atom: tuple[tuple[float, ...], ...]
    """Total for each member of the closure's range (ParentEnergetics.ensemble order), meV/atom."""
    member_labels: tuple[str, ...]
    """Labels of those members."""
    optimum_lambda: float
    """λ of the nominal total's minimum (0: no gain)."""
    member_optimum_lambda: tuple[float, ...]
    """λ of each member's minimum on the grid, parabola-refined."""
    kmesh: tuple[int, int, int]
    """k-mesh used at every λ."""


@dataclass(frozen=True, eq=False)
class ExplainResult:
    """Everything `explain` found."""

    parent_symbol: str
    """Space group of the parent."""
    parent_number: int
    """Its number."""
    index: int
    """Group–subgroup index observed ⊂ parent."""
    chain: tuple[tuple[str, int], ...]
    """(space group, index) of every parent found, lowest first."""
    parent_structure: Crystal = field(repr=False)
    """The parent in the observed primitive cell and atom order."""
    observed_structure: Crystal = field(repr=False)
    """The observed primitive cell."""
    modes: tuple[tuple[str, float], ...] = ()
    """(pattern, amplitude in Å) of the orthonormal decomposition of the displacement."""
    strain: np.ndarray = None
    """(3, 3) symmetric cell strain observed relative to parent."""
    path: PathEnergies = None
    """Energies along the path."""
    bonds: tuple[dict, ...] = ()
    """Per distinct bond: lengths and band-energy shares in parent and observed structure."""
    attribution: str = ""
    """'band-driven', 'band-assisted' or 'not band-driven'."""
    member_attributions: tuple[str, ...] = ()
    """Attribution under each member of the closure's range."""
    reasons: tuple[str, ...] = ()
    """Why, in words."""
    decomposition: Decomposition | None = None
    """The displacement split on the parent's candidate patterns (`project_on_generator_patterns`)."""

    def as_dict(self) -> dict:
        """JSON-ready dictionary (keys of the `screener explain --json` output)."""
        p = self.path
        return {
            "parent": {"space_group": self.parent_symbol, "space_group_number": self.parent_number,
                       "structure": _crystal_dict(self.parent_structure)},
            "index": self.index,
            "chain": [{"space_group": s, "index": i} for s, i in self.chain],
            "modes": [{"pattern": n, "amplitude_A": a} for n, a in self.modes],
            "strain": np.asarray(self.strain).round(6).tolist(),
            "path": {"lambda": list(p.lambda_), "delta_E_band_meV_per_atom": list(p.delta_E_band_meV_per_atom),
                     "delta_E_elastic_meV_per_atom": list(p.delta_E_elastic_meV_per_atom),
                     "delta_E_meV_per_atom": list(p.delta_E_meV_per_atom), "kmesh": list(p.kmesh)},
            "optimum_lambda": p.optimum_lambda,
            "member_optimum_lambda": list(p.member_optimum_lambda),
            "bonds": list(self.bonds),
            "attribution": self.attribution,
            "member_attributions": list(self.member_attributions),
            "reasons": list(self.reasons),
            **({"decomposition": self.decomposition.as_dict()} if self.decomposition is not None else {}),
        }


def _crystal_dict(c: Crystal) -> dict:
    return {"lattice_A": np.round(c.lattice_A, 6).tolist(), "frac": np.round(c.frac, 6).tolist(),
            "species": list(c.species)}


def _interpolate(parent: Crystal, observed: Crystal, lam: float) -> tuple[Crystal, np.ndarray]:
    """Structure at λ and the integer shift its wrapping applied to each atom."""
    d = observed.frac - parent.frac
    d -= np.rint(d)
    lat = parent.lattice_A + lam * (observed.lattice_A - parent.lattice_A)
    frac = parent.frac + lam * d
    c = Crystal(lat, frac, parent.species, parent.labels, min_distance_A=min(parent.min_distance_A, 0.3))
    return c, np.rint(frac - c.frac).astype(int)


def _vertex(x, y) -> float:
    """x of the minimum of y on grid x, refined by the parabola through its neighbours."""
    j = int(np.argmin(y))
    if 0 < j < len(y) - 1:
        (x0, x1, x2), (y0, y1, y2) = x[j - 1:j + 2], y[j - 1:j + 2]
        den = (x0 - x1) * (x0 - x2) * (x1 - x2)
        a = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den
        b = (x2**2 * (y0 - y1) + x1**2 * (y2 - y0) + x0**2 * (y1 - y2)) / den
        if a > 0:
            return float(np.clip(-b / (2 * a), x0, x2))
    return float(x[j])


class _Path:
    """Band and elastic energies at any λ, on one mesh, with the parent's bonds followed."""

    def __init__(self, context, observed: Crystal, mesh):
        from screener.screen.closure import elastic_model_for

        self.context, self.observed, self.mesh = context, observed, mesh
        self.parent = context.crystal
        en = context.energetics
        self.members = [elastic_model_for(self.parent, context.params, context.bonds, a, m, k)
                        for _, a, m, k in en.ensemble]
        self.labels = tuple(member[0] for member in en.ensemble)
        self.nominal = len(self.members) // 2
        d = observed.frac - self.parent.frac
        d -= np.rint(d)
        self.dmax_A = float(np.max(np.linalg.norm(d @ self.parent.lattice_A, axis=1)))
        self._cache = {}

    def structure(self, lam):
        from screener.screen.generators import follow_bonds
        from screener.tb.bonds import BondList

        c, shift = _interpolate(self.parent, self.observed, lam)
        b = self.context.bonds
        return c, shift, BondList(b.i, b.j, follow_bonds(b.i, b.j, b.image, shift))

    def energies(self, lam: float) -> tuple[float, np.ndarray]:
        """(band energy per atom, elastic energy per atom of each member), eV."""
        key = round(float(lam), 9)
        if key not in self._cache:
            from screener.bz.integrate import solve_on_mesh
            from screener.screen.generators import follow_bonds
            from screener.tb.model import build_model

            c, shift, bonds = self.structure(lam)
            model = build_model(c, self.context.params, bonds=bonds)
            s = self.context.settings
            symprec = s.symprec_A if lam == 0 else min(s.symprec_A, 0.1 * lam * self.dmax_A)
            rot = self.context.symmetry.rotations if lam == 0 else None
            res = solve_on_mesh(model, self.mesh, method=s.method, width_eV=s.width_eV, symprec=symprec,
                                rotations=rot)
            n = c.n_atoms
            el = np.array([e.energy_eV(c.lattice_A, c.frac, follow_bonds(e.i, e.j, e.image, shift)) / n
                           for e in self.members])
            self._cache[key] = (res.band_energy_eV / n, el)
        return self._cache[key]


def energy_along_path(context, observed: Crystal, lambdas=PATH_LAMBDA, mesh=None) -> PathEnergies:
    """Band, elastic and total energy along parent (``context.crystal``, λ = 0) → ``observed`` (λ = 1)."""
    from screener.bz.kmesh import mesh_from_spacing

    s = context.settings
    if mesh is None:
        mesh = mesh_from_spacing(context.crystal, s.k_step_per_A * s.refine_factor**2, context.model.periodic)
    path = _Path(context, observed, mesh)
    lams = np.asarray(lambdas, dtype=float)
    rows = [path.energies(x) for x in lams]
    band = np.array([r[0] for r in rows])
    el = np.array([r[1] for r in rows])  # (nλ, members)
    d_band = (band - band[0]) * 1e3
    d_el = (el - el[0]) * 1e3
    totals = d_band[:, None] + d_el
    k = path.nominal
    tot = totals[:, k]
    tol = s.stable_tolerance_meV_per_atom
    j = int(np.argmin(tot))
    if tot[j] > -tol:
        opt = 0.0
    elif 0 < j < len(lams) - 1:
        def f(x):
            b, e = path.energies(x)
            return (b - band[0]) * 1e3 + (e[k] - el[0, k]) * 1e3

        r = minimize_scalar(f, bounds=(lams[j - 1], lams[j + 1]), method="bounded", options={"xatol": 1e-3})
        opt = float(r.x) if r.fun < tot[j] else float(lams[j])
    else:
        opt = float(lams[j])
    member_opt = tuple(0.0 if totals[:, m].min() > -tol else _vertex(lams, totals[:, m])
                       for m in range(totals.shape[1]))
    return PathEnergies(
        lambda_=tuple(float(x) for x in lams), delta_E_band_meV_per_atom=tuple(float(x) for x in d_band),
        delta_E_elastic_meV_per_atom=tuple(float(x) for x in d_el[:, k]),
        delta_E_meV_per_atom=tuple(float(x) for x in tot),
        member_delta_E_meV_per_atom=tuple(tuple(float(x) for x in totals[:, m]) for m in range(totals.shape[1])),
        member_labels=path.labels, optimum_lambda=opt, member_optimum_lambda=member_opt, kmesh=tuple(mesh),
    )


def decompose(parent: Crystal, observed: Crystal) -> tuple[tuple[tuple[str, float], ...], np.ndarray]:
    """Orthonormal split of the displacement observed − parent, with amplitudes in Å, and the cell strain.

    The patterns are the displacement restricted to each set of symmetry-equivalent atoms of the parent (these
    restrictions are mutually orthogonal); each is normalised to one and its amplitude is the root of the summed
    squared displacements of its atoms, Å, so the amplitudes add in quadrature to the whole displacement. The
    strain is the symmetric ε = U − 1 of observed lattice = parent lattice · (rotation) · U.
    """
    from screener.structure.symmetry import analyse

    d = observed.frac - parent.frac
    d -= np.rint(d)
    disp = d @ parent.lattice_A
    info = analyse(parent, 1e-4)
    modes = []
    for rep in np.unique(info.equivalent_atoms):
        sel = info.equivalent_atoms == rep
        amp = float(np.sqrt(np.sum(disp[sel] ** 2)))
        if amp > 1e-6:
            modes.append((f"{parent.species[rep]} {info.wyckoff[rep]} ({np.count_nonzero(sel)} atoms)", amp))
    _, u = polar(np.linalg.solve(parent.lattice_A, observed.lattice_A))
    return tuple(modes), u - np.eye(3)


#: Singular values below this (of orthonormal columns, so relative) mean a direction already covered.
_RANK_TOL = 1e-6
#: Largest distance, Å, between an observed atom moved back by a parent operation and a site of a family's cell.
_SITE_TOL_A = 1e-2


@dataclass(frozen=True, eq=False)
class PatternComponent:
    """One family's part of the displacement observed − parent (see `project_on_generator_patterns`)."""

    generator: str
    """Generator of the family ('dimerise', 'rhombohedral-split', 'modulate', 'soft-mode')."""
    description: str
    """The family's own one-line description."""
    q_label: str
    """Its wave-vector in the parent's reciprocal basis."""
    supercell_matrix: tuple
    """Its supercell, rows in the parent's primitive basis."""
    commensurate: bool
    """Whether some symmetry image of the pattern is periodic in the observed cell (else it cannot contribute)."""
    images: int = 0
    """Independent symmetry images of the pattern periodic in the observed cell (dimension of its subspace)."""
    new_directions: int = 0
    """Of those, directions not already spanned by the families before it in the list."""
    amplitude_A: float = 0.0
    """Norm of the displacement's component on the orthonormalised directions, Å (see module function)."""
    raw_amplitude_A: float = 0.0
    """Norm of the projection on the family's own subspace before orthonormalisation, Å."""
    max_displacement_A: float = 0.0
    """Largest atomic displacement of the orthonormalised component, Å (the generators' λ convention)."""
    share: float = 0.0
    """amplitude² / |displacement|²: the fraction of the squared displacement this family carries."""
    best_image_share: float = 0.0
    """The largest (image · d)² / (|image|² |d|²) over the single images: how much one variant carries alone."""
    note: str = ""
    """Why the family cannot contribute, when it cannot."""


@dataclass(frozen=True, eq=False)
class Decomposition:
    """Orthonormal split of the displacement observed − parent on the parent's patterns, plus strain."""

    components: tuple[PatternComponent, ...]
    """Every family, in the order of the list (Gram–Schmidt order); incommensurate ones with amplitude 0."""
    displacement_A: float
    """Norm of the whole displacement (uniform translation removed), Å."""
    residual_A: float
    """Norm of what no pattern covers, Å."""
    residual_share: float
    """residual² / |displacement|²."""
    overlap: np.ndarray
    """(F, F) largest cosine between the raw (not orthonormalised) subspaces of the commensurate families."""
    overlap_labels: tuple[str, ...]
    """Row/column labels of ``overlap``."""
    strain: np.ndarray
    """(3, 3) symmetric cell strain ε = U − 1 observed relative to parent."""
    notes: tuple[str, ...] = ()
    """What was left out and why."""

    def as_dict(self) -> dict:
        """JSON-ready dictionary (the `decomposition` key of `screener explain --json`)."""
        w = np.linalg.eigvalsh(np.asarray(self.strain))
        return {
            "amplitude_definition": "norm over the atoms of the observed primitive cell of the displacement "
                                    "component, sqrt(sum_i |u_i|^2), Å; share = amplitude^2 / |displacement|^2",
            "displacement_A": round(self.displacement_A, 6),
            "patterns": [{
                "generator": c.generator, "description": c.description, "q": c.q_label,
                "supercell_matrix": [list(map(int, r)) for r in c.supercell_matrix],
                "commensurate": c.commensurate, "images": c.images, "new_directions": c.new_directions,
                "amplitude_A": round(c.amplitude_A, 6), "raw_amplitude_A": round(c.raw_amplitude_A, 6),
                "max_displacement_A": round(c.max_displacement_A, 6), "share": round(c.share, 6),
                "best_image_share": round(c.best_image_share, 6),
                **({"note": c.note} if c.note else {}),
            } for c in self.components],
            "residual_A": round(self.residual_A, 6),
            "residual_share": round(self.residual_share, 6),
            "overlap": {"labels": list(self.overlap_labels), "largest_cosine": np.round(self.overlap, 6).tolist()},
            "strain": {"tensor": np.round(self.strain, 6).tolist(), "principal": np.round(w, 6).tolist(),
                       "volume": round(float(np.linalg.det(np.eye(3) + self.strain) - 1), 6)},
            "notes": list(self.notes),
        }


def _family_label(f) -> str:
    return f"{f.generator} q={f.q_label}"


def _pattern_images(fam, prim: Crystal, rotations, translations, sites_frac, species, cell_lattice_A):
    """Symmetry images of ``fam.pattern_A`` evaluated on the observed atoms, those periodic in the observed cell.

    ``sites_frac`` are the observed atoms' parent sites in fractions of ``prim`` (the cell the family was built
    on). An operation g = (R, t) of the parent (x → R x + t, with every lattice translation of the parent inside
    the family's supercell added to t) carries the pattern u to (g u)(x) = R u(g⁻¹ x);
    u at a site is read off the family's reference cell (the site moved into that cell by a lattice vector of
    the family's supercell). An image is kept when it takes the same value at every atom moved by each observed
    lattice vector, i.e. when it lives on the observed cell. Returns (k, n, 3) Cartesian images, Å per unit.
    """
    ref = fam.reference
    lp = prim.lattice_A
    to_fam = np.linalg.inv(ref.lattice_A)
    ref_species = np.array(ref.species)
    lt, lti = lp.T, np.linalg.inv(lp.T)
    shifts = np.vstack([np.zeros(3), cell_lattice_A @ np.linalg.inv(lp)])  # observed lattice vectors, prim frac

    def value_at(x_frac):
        """pattern at parent sites given in prim fractions, (n, 3)."""
        d = (x_frac @ lp)[:, None, :] @ to_fam - ref.frac[None, :, :]
        d -= np.rint(d)
        dist = np.linalg.norm(d @ ref.lattice_A, axis=2)
        dist[np.array(species)[:, None] != ref_species[None, :]] = np.inf
        j = np.argmin(dist, axis=1)
        if np.max(dist[np.arange(len(j)), j]) > _SITE_TOL_A:
            raise ParameterError(f"the {fam.generator} family at q = {fam.q_label} was not built on the parent's "
                                 "primitive cell: its sites are not the parent's")
        return fam.pattern_A[j]

    from screener.structure.crystal import lattice_points_in_supercell

    # the parent's lattice translations inside the family's supercell are operations too: they shift the wave's
    # phase (a cosine wave's sine partner is its image under a translation)
    lattice_t = lattice_points_in_supercell(fam.supercell_matrix)
    out = []
    for r, t in zip(rotations, translations, strict=True):
        r_inv = np.linalg.inv(r)
        r_cart = lt @ r @ lti  # acts on Cartesian columns
        for tt in t + lattice_t:
            vals = [value_at((sites_frac + s - tt) @ r_inv.T) @ r_cart.T for s in shifts]  # R u(g⁻¹ x)
            if all(np.allclose(v, vals[0], atol=1e-8) for v in vals[1:]):
                out.append(vals[0])
    return np.array(out).reshape(-1, len(sites_frac), 3)


def project_on_generator_patterns(parent_cell: Crystal, observed: Crystal, families=None, soft_modes: bool = False,
                                  params=None, settings=None) -> Decomposition:
    """Split the displacement observed − parent into the parent's candidate patterns, orthonormally, in Å.

    ``parent_cell`` is the parent written in the observed cell with the observed atom order (as `explain` and
    `structure.idealise` give it), so the observed cell is a supercell of the parent's primitive cell.

    * Displacement: d_i = (x_i(observed) − x_i(parent), nearest image) · parent lattice, one vector per atom of
      the observed cell, measured in the parent's cell (the cell change is the strain below); its mean over the
      atoms (a uniform translation: the origin is free) is removed.
    * Patterns: the families of `screen.generators.default_candidates` on the parent's primitive cell
      (dimerise, rhombohedral-split, modulate; with ``soft_modes`` also `generators.soft_modes`), or
      ``families`` given (a list, or a function of the parent's `screen.parent.Parent` returning one, built on
      that parent's primitive cell ``build_parent(parent_cell).crystal``). A family's pattern lives on its own
      supercell; every image of it under the parent's space group (its lattice translations included) is
      evaluated on the observed atoms and kept when it is periodic in the observed cell (a structure may have
      picked any of the symmetry-equivalent variants, e.g. any body diagonal). The kept
      images, uniform translation removed, span the family's subspace. A family none of whose images is periodic
      in the observed cell (its supercell does not hold the observed cell) cannot contribute and is reported so.
    * Orthonormalisation: block Gram–Schmidt in the order of the family list: each family keeps only the
      directions of its subspace not already spanned by the families before it (so its amplitude does not count
      again what an earlier family covers); ``overlap`` gives the largest cosine between the raw subspaces and
      ``raw_amplitude_A`` the projection before orthonormalisation.
    * Amplitude of a component c: |c| = sqrt(Σ_i |c_i|²) over the atoms of the observed cell, Å, so amplitudes
      and residual add in quadrature to |d|; ``share`` = |c|² / |d|²; ``max_displacement_A`` is the component's
      largest atomic displacement (the amplitude λ of the generators' families).
    * Strain: ε = U − 1, the symmetric part of observed lattice = parent lattice · (rotation) · U.
    """
    from screener.screen.generators import default_candidates
    from screener.screen.generators import soft_modes as find_soft_modes
    from screener.screen.parent import build_parent

    if parent_cell.n_atoms != observed.n_atoms or tuple(parent_cell.species) != tuple(observed.species):
        raise StructureError("the parent must be written in the observed cell with the observed atom order")
    d = observed.frac - parent_cell.frac
    d -= np.rint(d)
    disp = d @ parent_cell.lattice_A
    disp = disp - disp.mean(axis=0)
    vec = disp.reshape(-1)
    total = float(np.linalg.norm(vec))
    _, u = polar(np.linalg.solve(parent_cell.lattice_A, observed.lattice_A))
    strain = u - np.eye(3)

    ctx = build_parent(parent_cell, params, settings)  # standardised primitive cell, same Cartesian frame
    prim = ctx.crystal
    notes = []
    if callable(families):
        families = list(families(ctx))
    elif families is None:
        families = list(default_candidates(ctx, notes=notes))
        if soft_modes:
            families += find_soft_modes(ctx, notes=notes)
    # the observed atoms' parent sites in the primitive cell's fractions and origin
    sites = (parent_cell.cart_A + ctx.primitive.origin_shift_A) @ np.linalg.inv(prim.lattice_A)
    rots, trans = ctx.symmetry.rotations, ctx.symmetry.translations
    n = observed.n_atoms

    basis = np.zeros((3 * n, 0))
    raw, comps = [], []
    for fam in families:
        imgs = _pattern_images(fam, prim, rots, trans, sites, parent_cell.species, parent_cell.lattice_A)
        common = dict(generator=fam.generator, description=fam.description, q_label=fam.q_label,
                      supercell_matrix=tuple(tuple(int(x) for x in r) for r in fam.supercell_matrix))
        sub = np.zeros((3 * n, 0))
        best = 0.0
        if len(imgs):
            imgs = imgs - imgs.mean(axis=1, keepdims=True)
            a = imgs.reshape(len(imgs), -1).T
            norms = np.linalg.norm(a, axis=0)
            if total > 0 and norms.max() > _RANK_TOL:
                ok = norms > _RANK_TOL
                best = float(np.max((vec @ a[:, ok] / norms[ok]) ** 2) / total**2)
            uu, sv, _ = np.linalg.svd(a, full_matrices=False)
            sub = uu[:, sv > _RANK_TOL * max(1.0, float(sv.max(initial=0.0)))]
        if sub.shape[1] == 0:
            why = ("its supercell does not hold the observed cell: no image of the pattern is periodic in it"
                   if not len(imgs) else "on the observed cell it is a uniform translation only")
            comps.append(PatternComponent(**common, commensurate=False, note=f"cannot contribute: {why}"))
            continue
        rest = sub - basis @ (basis.T @ sub)
        uu, sv, _ = np.linalg.svd(rest, full_matrices=False)
        new = uu[:, sv > _RANK_TOL]
        basis = np.hstack([basis, new])
        c = new @ (new.T @ vec)
        amp = float(np.linalg.norm(c))
        raw.append((_family_label(fam), sub))
        comps.append(PatternComponent(
            **common, commensurate=True, images=sub.shape[1], new_directions=new.shape[1], amplitude_A=amp,
            raw_amplitude_A=float(np.linalg.norm(sub.T @ vec)),
            max_displacement_A=float(np.max(np.linalg.norm(c.reshape(n, 3), axis=1))),
            share=amp**2 / total**2 if total > 0 else 0.0, best_image_share=best))
    resid = vec - basis @ (basis.T @ vec)
    r_amp = float(np.linalg.norm(resid))
    overlap = np.array([[float(np.linalg.svd(a.T @ b, compute_uv=False).max()) for _, b in raw] for _, a in raw]
                       ).reshape(len(raw), len(raw))
    for c in comps:
        if not c.commensurate:
            notes.append(f"{c.generator} q={c.q_label}: {c.note}")
    return Decomposition(
        components=tuple(comps), displacement_A=total, residual_A=r_amp,
        residual_share=r_amp**2 / total**2 if total > 0 else 0.0, overlap=overlap,
        overlap_labels=tuple(lab for lab, _ in raw), strain=strain, notes=tuple(notes))


def bond_table(context, observed: Crystal, mesh) -> tuple[dict, ...]:
    """Per symmetry-distinct bond: count and band-energy shares in the parent and the observed structure.

    Bonds are grouped by their true symmetry orbits — of the parent's space group at λ = 0 and of the observed
    structure's at λ = 1 (bonds following the atoms) — so a row is one orbit of the observed structure inside one
    orbit of the parent. The parent's numbers are averaged over its whole orbit: bonds equivalent in the parent get
    the same share even where the supercell's k-mesh is less symmetric than the parent.
    """
    from screener.screen.generators import follow_bonds
    from screener.structure.symmetry import analyse
    from screener.tb.bond_energy import NONBONDING_PER_EV, bond_energies
    from screener.tb.bonds import BondList, bond_orbits
    from screener.tb.model import build_model

    parent = context.crystal
    symprec = context.settings.symprec_A
    res, orbits = [], []
    for lam in (0.0, 1.0):
        c, shift = _interpolate(parent, observed, lam)
        b = context.bonds
        bonds = BondList(b.i, b.j, follow_bonds(b.i, b.j, b.image, shift))
        res.append(bond_energies(build_model(c, context.params, bonds=bonds), mesh))
        sym = analyse(c, symprec)
        orbits.append(bond_orbits(c, bonds.i, bonds.j, bonds.image, sym.rotations, sym.translations))

    def character(pop):
        return "non-bonding" if abs(pop) < NONBONDING_PER_EV else ("antibonding" if pop > 0 else "bonding")

    b = context.bonds
    groups: dict[tuple[int, int], list[int]] = {}
    for k in range(len(b)):
        groups.setdefault((int(orbits[0][k]), int(orbits[1][k])), []).append(k)
    table = []
    for (o_parent, _), ks in sorted(groups.items(), key=lambda kv: float(np.mean(res[1].bond_length_A[kv[1]]))):
        whole = np.flatnonzero(orbits[0] == o_parent)  # the parent's whole orbit of these bonds
        k0 = ks[0]
        pair = "-".join(sorted((parent.species[b.i[k0]], parent.species[b.j[k0]])))
        pop_parent = float(np.mean(res[0].bond_population_at_EF_per_eV[whole]))
        pop_obs = float(np.mean(res[1].bond_population_at_EF_per_eV[ks]))
        table.append({
            "pair": pair, "count_per_cell": len(ks),
            "length_parent_A": round(float(np.mean(res[0].bond_length_A[whole])), 3),
            "length_observed_A": round(float(np.mean(res[1].bond_length_A[ks])), 3),
            "bond_energy_eV": {"parent": float(np.mean(res[0].bond_energy_eV[whole])),
                               "observed": float(np.mean(res[1].bond_energy_eV[ks]))},
            "bond_character_at_EF": {"parent": character(pop_parent), "observed": character(pop_obs)},
            "bond_population_at_EF_per_eV": {"parent": pop_parent, "observed": pop_obs},
        })
    return tuple(table)


def attribute(delta_E_at_observed: float, min_delta_E: float, optimum_lambda: float, tol: float) -> str:
    """The attribution rule of the module docstring for one closure."""
    if min_delta_E > -tol or optimum_lambda == 0.0:
        return "not band-driven"
    lo, hi = BAND_DRIVEN_RANGE
    if delta_E_at_observed < 0 and lo <= optimum_lambda <= hi and optimum_lambda < PATH_LAMBDA[-1]:
        return "band-driven"
    return "band-assisted"


def parent_in_cell(parent: Crystal, observed: Crystal) -> Crystal:
    """A given parent expressed in the observed cell and atom order (same orientation required)."""
    m = observed.lattice_A @ np.linalg.inv(parent.lattice_A)
    mi = np.rint(m)
    if np.max(np.abs(m - mi)) > 0.2 or round(abs(np.linalg.det(mi))) * parent.n_atoms != observed.n_atoms:
        raise StructureError(
            "the parent's cell is not a sublattice of the observed one in the same orientation "
            f"(observed = M x parent with M = {np.round(m, 3).tolist()}); write both in the same axes")
    sup = parent.supercell(mi.astype(int))
    diff = observed.frac[:, None, :] - sup.frac[None, :, :]
    diff -= np.rint(diff)
    dist = np.linalg.norm(diff @ sup.lattice_A, axis=2)
    dist[np.array(observed.species)[:, None] != np.array(sup.species)[None, :]] = np.inf
    match = np.argmin(dist, axis=1)
    if len(set(match.tolist())) != len(match):
        raise StructureError("could not match the observed atoms one to one onto the parent's sites")
    return Crystal(sup.lattice_A, sup.frac[match], observed.species, observed.labels,
                   min_distance_A=observed.min_distance_A)


def explain(crystal: Crystal, parent: Crystal | None = None, params=None, settings=None,
            max_displacement_A: float | None = None, max_strain: float | None = None,
            soft_modes: bool = False) -> ExplainResult:
    """Parent, decomposition, energy along the path, bond shares and attribution (see module docstring).

    The decomposition on the candidate patterns takes the soft-mode patterns too when ``soft_modes`` is set (a
    stiffness survey of the parent, seconds to minutes)."""
    from screener.bz.kmesh import mesh_from_spacing
    from screener.screen.parent import build_parent
    from screener.screen.settings import ScreenSettings
    from screener.structure import idealise
    from screener.structure.symmetry import analyse, standard_primitive

    settings = settings or ScreenSettings()
    if parent is None:
        search = idealise.find_parents(
            crystal, max_displacement_A or idealise.MAX_DISPLACEMENT_A,
            idealise.MAX_STRAIN if max_strain is None else max_strain, symprec=settings.symprec_A)
        top = search.highest
        observed, parent_cell = search.observed_primitive, top.in_observed_cell
        symbol, number, index = top.space_group_symbol, top.space_group_number, top.index
        chain = tuple((c.space_group_symbol, c.index) for c in search.chain)
    else:
        observed = standard_primitive(crystal, analyse(crystal, settings.symprec_A)).crystal
        parent_cell = parent_in_cell(parent, observed)
        pinfo = analyse(parent_cell, settings.symprec_A)
        oinfo = analyse(observed, settings.symprec_A)
        symbol, number = pinfo.symbol, pinfo.number
        pg = lambda info: len(np.unique(info.rotations.reshape(len(info.rotations), -1), axis=0))  # noqa: E731
        index = int(round(pg(pinfo) / pg(oinfo) * observed.n_atoms / pinfo.primitive_atoms))
        chain = ((symbol, index),)
    context = build_parent(parent_cell, params, settings, standardise=False)
    modes, strain = decompose(parent_cell, observed)
    decomposition = project_on_generator_patterns(parent_cell, observed, soft_modes=soft_modes,
                                                  params=context.params, settings=settings)
    path = energy_along_path(context, observed)
    mesh = mesh_from_spacing(parent_cell, settings.k_step_per_A * settings.refine_factor, context.model.periodic)
    bonds = bond_table(context, observed, mesh)
    tol = settings.stable_tolerance_meV_per_atom
    i1 = path.lambda_.index(1.0)
    members = tuple(attribute(row[i1], min(row), opt, tol)
                    for row, opt in zip(path.member_delta_E_meV_per_atom, path.member_optimum_lambda, strict=True))
    nominal = attribute(path.delta_E_meV_per_atom[i1], min(path.delta_E_meV_per_atom), path.optimum_lambda, tol)
    reasons = [
        f"band energy at the observed structure {path.delta_E_band_meV_per_atom[i1]:+.1f} meV/atom, elastic cost "
        f"{path.delta_E_elastic_meV_per_atom[i1]:+.1f} meV/atom, total {path.delta_E_meV_per_atom[i1]:+.1f} "
        "meV/atom relative to the parent",
        f"the model's optimum along the path lies at λ = {path.optimum_lambda:.2f} of the observed distortion "
        f"(band-driven needs {BAND_DRIVEN_RANGE[0]}–{BAND_DRIVEN_RANGE[1]})",
    ]
    if len(set(members)) > 1:
        reasons.append("the answer depends on the elastic closure's uncertainty: "
                       + ", ".join(f"{lab}: {a}" for lab, a in zip(path.member_labels, members, strict=True)))
    else:
        reasons.append(f"the same answer for every member of the closure's range ({len(members)} members)")
    return ExplainResult(
        parent_symbol=symbol, parent_number=number, index=index, chain=chain, parent_structure=parent_cell,
        observed_structure=observed, modes=modes, strain=strain, path=path, bonds=bonds, attribution=nominal,
        member_attributions=members, reasons=tuple(reasons), decomposition=decomposition,
    )


def bond_curves(result: ExplainResult, params=None, settings=None, n_energies: int = 301):
    """Energy-resolved band-energy shares of the two bonds whose shares differ most at the observed structure.

    Returns (energies in eV, Fermi level in eV, [(label, population per eV) × 2]).
    """
    from screener.bz.kmesh import mesh_from_spacing
    from screener.screen.generators import follow_bonds
    from screener.screen.parent import build_parent
    from screener.screen.settings import ScreenSettings
    from screener.tb.bond_energy import bond_energies
    from screener.tb.bonds import BondList
    from screener.tb.model import build_model

    settings = settings or ScreenSettings()
    context = build_parent(result.parent_structure, params, settings, standardise=False)
    c, shift = _interpolate(context.crystal, result.observed_structure, 1.0)
    b = context.bonds
    model = build_model(c, context.params, bonds=BondList(b.i, b.j, follow_bonds(b.i, b.j, b.image, shift)))
    mesh = mesh_from_spacing(context.crystal, settings.k_step_per_A * settings.refine_factor, model.periodic)
    first = bond_energies(model, mesh)
    lo, hi = int(np.argmin(first.bond_energy_eV)), int(np.argmax(first.bond_energy_eV))
    ev = np.linalg.eigvalsh(model.hamiltonian(np.zeros((1, 3))))
    span = ev.max() - ev.min()
    grid = np.linspace(ev.min() - 0.3 * span, ev.max() + 0.5 * span, n_energies)
    res = bond_energies(model, mesh, energies_eV=grid)
    curves = []
    for k in (lo, hi):
        label = (f"{c.species[b.i[k]]}–{c.species[b.j[k]]} {res.bond_length_A[k]:.3f} Å "
                 f"(share {res.bond_energy_eV[k]:.2f} eV)")
        curves.append((label, res.bond_population_per_eV[:, k]))
    return grid, res.fermi_level_eV, curves
