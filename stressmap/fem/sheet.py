"""Thin elastic sheet: membrane (plane-stress) elasticity on flat triangular facets.

Pure numpy/scipy core: arrays in, arrays out. The sheet rests on a radially rigid foundation, so
the unknowns are the two tangential displacement components of every node in its local
(east, north) frame: the 3D displacement of node i is ``ue_i E_i + un_i N_i``. Degree of freedom
``2 i`` is east, ``2 i + 1`` is north.

Every facet gets its own orthonormal in-plane basis (e1, e2); the nodal 3D displacement vectors
are projected into it and the constant-strain (P1) membrane stiffness
``K_e = A_e (B^T D B)`` with ``D = s_e E t / (1 - nu^2) [[1, nu, 0], [nu, 1, 0], [0, 0, (1 - nu)/2]]``
(``s_e`` the element stiffness factor of its province) is formed for all elements at once and
assembled COO -> CSR. Rigid rotations of the sphere (``u = omega x r``) strain no facet, so a free
sheet has exactly three zero-energy modes; in planar mode (``planar=True``: nodes in the z = 0
plane, frames the global x/y axes) the modes are the two translations and the in-plane rotation.

Conventions: lengths in metres, Young's modulus in Pa, thickness in m, nodal forces in N,
membrane forces in N/m (tension positive *inside this module*, as in continuum mechanics); the
composition layer converts to compression-positive MPa.

Examples
--------
A unit square of two triangles under equal and opposite x-forces on its two right nodes and two
left nodes (a uniform tension of 1 N/m) gives N_xx = 1 N/m:

>>> xyz = np.array([[0., 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]])
>>> tri = np.array([[0, 1, 2], [0, 2, 3]])
>>> sheet = make_sheet(xyz, tri, thickness_m=1.0, young_pa=1.0, poisson=0.25, planar=True)
>>> f = np.zeros((4, 2)); f[[1, 2], 0] = 0.5; f[[0, 3], 0] = -0.5
>>> factor = factorise(sheet)
>>> u = factor.solve(f.reshape(-1))
>>> np.round(nodal_membrane_forces(sheet, u)[0], 12).tolist()
[1.0, 0.0, 0.0]
"""

from __future__ import annotations

import logging
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.sparse.csgraph import reverse_cuthill_mckee

__all__ = [
    "Sheet",
    "SheetFactor",
    "make_sheet",
    "node_frames",
    "assemble_stiffness",
    "rigid_modes",
    "pin_dofs",
    "factorise",
    "element_membrane_forces",
    "element_tensors_3d",
    "nodal_membrane_forces",
    "nodal_areas",
]

log = logging.getLogger(__name__)


def node_frames(xyz, planar: bool = False) -> np.ndarray:
    """Local (east, north) unit vectors at each node, shape (n, 2, 3).

    On the sphere ``xyz`` are positions (any radius); east = z x r normalised, north = r x east.
    At an exact pole east is taken along +y (longitude 0). In planar mode the frames are the
    global x and y axes.

    Examples
    --------
    >>> node_frames(np.array([[1.0, 0.0, 0.0]])).round(12).tolist()
    [[[0.0, 1.0, 0.0], [0.0, 0.0, 1.0]]]
    >>> node_frames(np.zeros((1, 3)), planar=True).tolist()
    [[[1.0, 0.0, 0.0], [0.0, 1.0, 0.0]]]
    """
    xyz = np.asarray(xyz, dtype=float)
    n = xyz.shape[0]
    if planar:
        out = np.zeros((n, 2, 3))
        out[:, 0, 0] = 1.0
        out[:, 1, 1] = 1.0
        return out
    r = xyz / np.linalg.norm(xyz, axis=1, keepdims=True)
    lon = np.arctan2(r[:, 1], r[:, 0])
    east = np.stack([-np.sin(lon), np.cos(lon), np.zeros(n)], axis=1)
    north = np.cross(r, east)
    return np.ascontiguousarray(np.stack([east, north], axis=1))


@dataclass(frozen=True)
class Sheet:
    """Geometry and constitutive arrays of one meshed sheet (all elements at once).

    Attributes
    ----------
    xyz : (n, 3) node positions, m.
    triangles : (m, 3) int64, counter-clockwise seen from outside (or from +z in planar mode).
    frames : (n, 2, 3) nodal (east, north) unit vectors.
    basis : (m, 2, 3) element in-plane orthonormal basis (e1, e2).
    area : (m,) element areas, m^2.
    bmat : (m, 3, 6) strain-displacement matrices from nodal (east, north) DOFs to element
        strains (e11, e22, g12) in the element basis.
    dmat : (m, 3, 3) membrane constitutive matrices (N/m per unit strain), including thickness
        and the element stiffness factor.
    thickness_m : float, sheet thickness (stress = membrane force / thickness).
    planar : bool.
    """

    xyz: np.ndarray
    triangles: np.ndarray
    frames: np.ndarray
    basis: np.ndarray
    area: np.ndarray
    bmat: np.ndarray
    dmat: np.ndarray
    thickness_m: float
    planar: bool

    @property
    def n_nodes(self) -> int:
        return int(self.xyz.shape[0])

    @property
    def n_dofs(self) -> int:
        return 2 * self.n_nodes

    @property
    def element_dofs(self) -> np.ndarray:
        """(m, 6) global DOF numbers of each element (e1, n1, e2, n2, e3, n3)."""
        t = self.triangles
        return np.stack([2 * t, 2 * t + 1], axis=2).reshape(-1, 6)


def make_sheet(xyz, triangles, thickness_m, young_pa, poisson, element_stiffness=None,
               planar: bool = False) -> Sheet:
    """Precompute facet bases, areas, strain-displacement and constitutive matrices.

    Parameters
    ----------
    xyz : (n, 3) array_like
        Node positions in metres (on the sphere: radius times unit vectors).
    triangles : (m, 3) array_like of int
        Node indices, counter-clockwise seen from outside.
    thickness_m, young_pa, poisson : float
        Sheet thickness (m), Young's modulus (Pa), Poisson's ratio.
    element_stiffness : (m,) array_like, optional
        Relative stiffness factor per element (default 1).
    planar : bool
        Nodes lie in the z = 0 plane; nodal frames are the global x/y axes.
    """
    xyz = np.ascontiguousarray(xyz, dtype=np.float64)
    tri = np.ascontiguousarray(triangles, dtype=np.int64)
    if tri.ndim != 2 or tri.shape[1] != 3:
        raise ValueError("triangles must have shape (m, 3)")
    m = tri.shape[0]
    frames = node_frames(xyz, planar=planar)
    p0 = xyz[tri[:, 0]]
    d1 = xyz[tri[:, 1]] - p0
    d2 = xyz[tri[:, 2]] - p0
    nrm = np.cross(d1, d2)
    twice_area = np.sqrt(np.einsum("mc,mc->m", nrm, nrm))
    if np.any(twice_area <= 0):
        raise ValueError("degenerate triangle (zero area) in mesh")
    len1 = np.sqrt(np.einsum("mc,mc->m", d1, d1))
    e1 = d1 / len1[:, None]
    e2 = np.cross(nrm, e1) / twice_area[:, None]
    basis = np.stack([e1, e2], axis=1)  # (m, 2, 3)
    # local coordinates: node 0 at the origin, node 1 at (len1, 0), node 2 at (x2, y2)
    x2 = np.einsum("mc,mc->m", d2, e1)
    y2 = twice_area / len1
    inv2a = 1.0 / twice_area
    gx = np.stack([-y2, y2, np.zeros(m)], axis=1) * inv2a[:, None]  # dN_i/dx (m, 3)
    gy = np.stack([x2 - len1, -x2, len1], axis=1) * inv2a[:, None]  # dN_i/dy
    # t[m, node, k, j] = e_k . F_j : nodal frames projected on the facet basis
    t = np.einsum("mkc,majc->makj", basis, frames[tri], optimize=True)
    bmat = np.empty((m, 3, 3, 2))
    bmat[:, 0] = gx[..., None] * t[:, :, 0, :]
    bmat[:, 1] = gy[..., None] * t[:, :, 1, :]
    bmat[:, 2] = gy[..., None] * t[:, :, 0, :] + gx[..., None] * t[:, :, 1, :]
    bmat = bmat.reshape(m, 3, 6)
    area = 0.5 * twice_area
    c = float(young_pa) * float(thickness_m) / (1.0 - float(poisson) ** 2)
    d0 = c * np.array([[1.0, poisson, 0.0], [poisson, 1.0, 0.0], [0.0, 0.0, 0.5 * (1.0 - poisson)]])
    factor = np.ones(m) if element_stiffness is None else np.asarray(element_stiffness, float)
    if factor.shape != (m,) or not np.all(np.isfinite(factor)) or np.any(factor <= 0):
        raise ValueError("element_stiffness must be (m,) positive finite factors")
    dmat = factor[:, None, None] * d0
    return Sheet(xyz=xyz, triangles=tri, frames=frames, basis=np.ascontiguousarray(basis),
                 area=area, bmat=np.ascontiguousarray(bmat), dmat=dmat,
                 thickness_m=float(thickness_m), planar=bool(planar))


def assemble_stiffness(sheet: Sheet) -> sp.csr_matrix:
    """Global stiffness matrix (2n, 2n) CSR, N/m per m of displacement.

    All element matrices ``A_e B^T D B`` are formed at once (batched matmul) and summed as
    2 x 2 node blocks: the node-pair pattern (9 per element) is sorted once, the blocks are
    summed by ``reduceat`` and the block matrix is expanded to CSR.
    """
    m = sheet.triangles.shape[0]
    n = sheet.n_nodes
    db = np.matmul(sheet.dmat, sheet.bmat)  # (m, 3, 6)
    ke = np.matmul(sheet.bmat.transpose(0, 2, 1), db)  # (m, 6, 6)
    ke *= sheet.area[:, None, None]
    # (m, a, i, b, j) -> node-pair blocks (m, a, b, i, j)
    blocks = ke.reshape(m, 3, 2, 3, 2).transpose(0, 1, 3, 2, 4).reshape(m * 9, 4)
    tri = sheet.triangles
    keys = (tri[:, :, None] * n + tri[:, None, :]).reshape(-1)
    order = np.argsort(keys, kind="stable")  # radix sort of integer keys
    sorted_keys = keys[order]
    starts = np.flatnonzero(np.concatenate([[True], sorted_keys[1:] != sorted_keys[:-1]]))
    uniq = sorted_keys[starts]
    summed = np.add.reduceat(blocks[order], starts, axis=0)
    rows = uniq // n
    indptr = np.concatenate([[0], np.cumsum(np.bincount(rows, minlength=n))])
    k = sp.bsr_matrix((summed.reshape(-1, 2, 2), uniq % n, indptr), shape=(2 * n, 2 * n))
    return k.tocsr()


def rigid_modes(sheet: Sheet) -> np.ndarray:
    """Zero-energy modes of the free sheet as DOF vectors, shape (2n, 3).

    Sphere: nodal (east, north) components of ``omega_k x r`` for omega along x, y, z (r in m).
    Planar: x-translation, y-translation, rotation about z through the origin.
    """
    xyz, fr = sheet.xyz, sheet.frames
    if sheet.planar:
        vec = np.zeros((3, xyz.shape[0], 3))
        vec[0, :, 0] = 1.0
        vec[1, :, 1] = 1.0
        vec[2, :, 0] = -xyz[:, 1]
        vec[2, :, 1] = xyz[:, 0]
    else:
        axes = np.eye(3)
        vec = np.cross(axes[:, None, :], xyz[None, :, :])  # (3, n, 3)
    comp = np.einsum("knc,njc->knj", vec, fr)  # (3, n, 2)
    return comp.reshape(3, -1).T.copy()


def pin_dofs(sheet: Sheet, modes=None) -> np.ndarray:
    """Three DOFs whose fixing removes the rigid modes of a free sheet.

    Both DOFs of the node nearest the centroid, and the DOF of the node farthest from it that
    the remaining mode moves most.
    """
    z = rigid_modes(sheet) if modes is None else modes
    xyz = sheet.xyz
    centre = xyz.mean(axis=0)
    a = int(np.argmin(np.linalg.norm(xyz - centre, axis=1)))
    b = int(np.argmax(np.linalg.norm(xyz - xyz[a], axis=1)))
    za = z[[2 * a, 2 * a + 1]]  # (2, 3)
    _, _, vt = np.linalg.svd(za)
    remaining = vt[-1]  # mode combination with zero motion at node a
    motion_b = z[[2 * b, 2 * b + 1]] @ remaining
    return np.array([2 * a, 2 * a + 1, 2 * b + int(np.argmax(np.abs(motion_b)))], dtype=np.int64)


class SheetFactor:
    """A factorised sheet: solves K u = f for any number of right-hand sides.

    Constrained DOFs (fixed edges, or the three pins of a free sheet) are eliminated with zero
    displacement. For a free sheet (``remove_rigid=True``) the least-squares rigid mode is then
    subtracted from every solution, so displacements are relative to the mean rigid motion. The
    loads of a free sheet must be balanced (orthogonal to the rigid modes) for the pins to carry
    no reaction; :mod:`stressmap.fem.loads` provides the torque closure that guarantees it.
    """

    def __init__(self, n_dofs, free, solver, method, modes=None):
        self.n_dofs = int(n_dofs)
        self.free = free
        self._solve = solver
        self.method = method
        self._modes = modes
        if modes is not None:
            self._modes_pinv = np.linalg.pinv(modes)

    def solve(self, rhs) -> np.ndarray:
        """Displacements (2n,) or (2n, k) for nodal loads ``rhs`` of the same shape (N, m)."""
        rhs = np.asarray(rhs, dtype=float)
        vector = rhs.ndim == 1
        f = rhs.reshape(self.n_dofs, -1)
        u = np.zeros_like(f)
        if f.shape[1]:
            u[self.free] = self._solve(np.ascontiguousarray(f[self.free]))
        if self._modes is not None:
            u -= self._modes @ (self._modes_pinv @ u)
        return u[:, 0] if vector else u


def _splu_solver(kff):
    """SuperLU in symmetric mode (diagonal pivots, minimum-degree ordering of A^T + A) after a
    reverse Cuthill-McKee pre-permutation. The pre-permutation makes the minimum-degree ordering
    independent of the mesher's node numbering: on some numberings SuperLU's ordering alone ran
    for minutes where it needs a second."""

    kff = kff.tocsr()
    perm = reverse_cuthill_mckee(kff, symmetric_mode=True)
    kp = kff[perm][:, perm].tocsc()
    lu = spla.splu(kp, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0,
                   options={"SymmetricMode": True})

    def solve(b):
        out = np.empty_like(b)
        out[perm] = lu.solve(np.ascontiguousarray(b[perm]))
        return out
    return solve


def factorise(sheet: Sheet, stiffness=None, fixed_dofs=None, method: str = "splu") -> SheetFactor:
    """Factorise the sheet stiffness once for many load cases.

    Parameters
    ----------
    sheet : Sheet
    stiffness : sparse matrix, optional
        From :func:`assemble_stiffness` (assembled here when omitted).
    fixed_dofs : array_like of int, optional
        DOFs held at zero displacement (Dirichlet, e.g. nodes on fixed edges). When empty, the
        sheet is free: three pins remove the rigid modes and solutions are returned with their
        rigid part removed.
    method : "splu"
        SuperLU in symmetric mode with a minimum-degree ordering of A^T + A (DEVELOPERS.md says
        why).
    """
    k = assemble_stiffness(sheet) if stiffness is None else stiffness
    fixed = np.unique(np.asarray([] if fixed_dofs is None else fixed_dofs, dtype=np.int64))
    modes = None
    if fixed.size == 0:
        modes = rigid_modes(sheet)
        fixed = pin_dofs(sheet, modes)
    mask = np.ones(sheet.n_dofs, dtype=bool)
    mask[fixed] = False
    free = np.flatnonzero(mask)
    kff = k[free][:, free]
    if method != "splu":
        raise ValueError(f"unknown factorisation method {method!r}")
    solver = _splu_solver(kff)
    return SheetFactor(sheet.n_dofs, free, solver, method, modes)


def element_membrane_forces(sheet: Sheet, u) -> np.ndarray:
    """Element membrane forces (N11, N22, N12) in each element basis, N/m, tension positive.

    ``u`` is (2n,) or (2n, k); the result is (m, 3) or (k, m, 3).
    """
    u = np.asarray(u, dtype=float)
    vector = u.ndim == 1
    uu = u.reshape(sheet.n_dofs, -1)
    ue = uu[sheet.element_dofs]  # (m, 6, k)
    strain = np.einsum("mij,mjk->kmi", sheet.bmat, ue, optimize=True)
    forces = np.einsum("mij,kmj->kmi", sheet.dmat, strain, optimize=True)
    return forces[0] if vector else forces


def element_tensors_3d(sheet: Sheet, forces) -> np.ndarray:
    """Element membrane tensors as 3D tangent tensors, the 6 components
    (xx, yy, zz, xy, xz, yz), shape (..., m, 6)."""
    e1, e2 = sheet.basis[:, 0], sheet.basis[:, 1]
    n11, n22, n12 = forces[..., 0], forces[..., 1], forces[..., 2]
    pairs = ((0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2))
    out = [n11 * (e1[:, a] * e1[:, b]) + n22 * (e2[:, a] * e2[:, b])
           + n12 * (e1[:, a] * e2[:, b] + e2[:, a] * e1[:, b]) for a, b in pairs]
    return np.stack(out, axis=-1)


def nodal_areas(sheet: Sheet) -> np.ndarray:
    """Lumped nodal areas (one third of each adjacent element), m^2, shape (n,)."""
    out = np.zeros(sheet.n_nodes)
    np.add.at(out, sheet.triangles.reshape(-1), np.repeat(sheet.area / 3.0, 3))
    return out


def _averaging_matrix(sheet: Sheet) -> sp.csr_matrix:
    m = sheet.triangles.shape[0]
    rows = sheet.triangles.reshape(-1)
    cols = np.repeat(np.arange(m), 3)
    w = np.repeat(sheet.area, 3)
    a = sp.csr_matrix((w, (rows, cols)), shape=(sheet.n_nodes, m))
    total = np.asarray(a.sum(axis=1)).ravel()
    return sp.diags(1.0 / np.where(total > 0, total, 1.0)) @ a


def nodal_membrane_forces(sheet: Sheet, u) -> np.ndarray:
    """Smoothed nodal membrane forces (N_ee, N_nn, N_en) in the nodal (east, north) frames.

    N/m, tension positive; area-weighted average of the adjacent element tensors, taken as 3D
    tangent tensors so that element and nodal frames stay consistent. ``u`` (2n,) -> (n, 3);
    (2n, k) -> (k, n, 3).
    """
    u = np.asarray(u, dtype=float)
    vector = u.ndim == 1
    forces = element_membrane_forces(sheet, u.reshape(sheet.n_dofs, -1))  # (k, m, 3)
    t6 = element_tensors_3d(sheet, forces)  # (k, m, 6)
    avg = _averaging_matrix(sheet)
    k = t6.shape[0]
    nod = (avg @ t6.transpose(1, 0, 2).reshape(t6.shape[1], -1)).reshape(sheet.n_nodes, k, 6)
    s = np.empty((sheet.n_nodes, k, 3, 3))
    idx = ((0, 0), (1, 1), (2, 2), (0, 1), (0, 2), (1, 2))
    for c, (a, b) in enumerate(idx):  # six tensor components, not a loop over elements
        s[:, :, a, b] = nod[:, :, c]
        s[:, :, b, a] = nod[:, :, c]
    e, n = sheet.frames[:, 0], sheet.frames[:, 1]
    see = np.einsum("na,nkab,nb->kn", e, s, e)
    snn = np.einsum("na,nkab,nb->kn", n, s, n)
    sen = np.einsum("na,nkab,nb->kn", e, s, n)
    out = np.stack([see, snn, sen], axis=-1)
    return out[0] if vector else out
