"""Loop transfer matrices at complex frequencies: the plant from its modal sum, the controller
from its state space block by block.

The closed-loop poles of a modal plant G(s) (n modes, m_in inputs, m_out outputs) under the
negative feedback ``u = −K(s) y`` of a controller with state matrix A_c are the roots of

    f(s) = p(s) · det(sI − A_c) · det(I + K(s) G(s)),   p(s) = Π_i (s² + 2ζ_iω_i s + ω_i²),

which is det(sI − A_cl) up to the constant det(I + D_c D) (the Schur complement of the
closed-loop state matrix; Zhou, Doyle & Glover, *Robust and Optimal Control*, 1996, the
closed-loop characteristic polynomial, from memory). Root finders need f'/f at many points;
this module supplies its pieces at a cost of O(n·m_in·m_out) per point for the plant — the
modal sum, never a solve with the 2n-state matrix — and, for the controller, a forward
substitution over the strongly connected blocks of A_c (delay sections, roll-offs, filters
and a model-based core are each small blocks of a block-triangular matrix).

Points are processed in chunks so that no array holds more than :data:`CHUNK_BYTES`.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

__all__ = [
    "CHUNK_BYTES",
    "ControllerResponse",
    "ModalChannels",
]

#: largest array (bytes) a response evaluation holds at once: points are taken in chunks
CHUNK_BYTES = 64 * 2**20

Matrices = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


@dataclass(frozen=True)
class ModalChannels:
    """A plant's modes seen from given inputs and outputs, for responses at complex s.

    G(s) = Σ_i c_i b_iᵀ s^{o} / (s² + 2ζ_iω_i s + ω_i²) + D, with o the derivative order of
    each output (0 displacement-like, 1 velocity, 2 acceleration), as in
    :meth:`dampctl.model.plant.ModalPlant.frf`.

    Parameters
    ----------
    omegas : ndarray, shape (n,)
        Natural frequencies (rad/s).
    dampings : ndarray, shape (n,)
        Damping ratios.
    b : ndarray, shape (n, m_in)
        Modal input rows (per unit input).
    c : ndarray, shape (m_out, n)
        Modal output rows.
    orders : ndarray of int, shape (m_out,)
        Derivative order of each output.
    D : ndarray, shape (m_out, m_in)
        Constant term (sensor feedthrough and residual-flexibility correction; the modal sum
        holds the acceleration direct term).
    """

    omegas: np.ndarray
    dampings: np.ndarray
    b: np.ndarray
    c: np.ndarray
    orders: np.ndarray
    D: np.ndarray

    def __post_init__(self) -> None:
        w = np.asarray(self.omegas, dtype=float).ravel()
        z = np.asarray(self.dampings, dtype=float).ravel()
        b = np.asarray(self.b, dtype=float)
        c = np.asarray(self.c, dtype=float)
        orders = np.asarray(self.orders, dtype=int).ravel()
        D = np.asarray(self.D, dtype=float)
        n = w.size
        if z.shape != (n,) or b.ndim != 2 or b.shape[0] != n or c.ndim != 2 or c.shape[1] != n:
            raise ValueError("modal channels: inconsistent mode counts")
        if orders.shape != (c.shape[0],) or D.shape != (c.shape[0], b.shape[1]):
            raise ValueError("modal channels: orders or D do not match the outputs and inputs")
        for name, value in (("omegas", w), ("dampings", z), ("b", b), ("c", c), ("D", D)):
            value.setflags(write=False)
            object.__setattr__(self, name, value)
        orders.setflags(write=False)
        object.__setattr__(self, "orders", orders)

    @classmethod
    def from_plant(
        cls,
        plant,
        inputs: Sequence[str],
        outputs: Sequence[str],
        *,
        omegas: np.ndarray | None = None,
    ) -> ModalChannels:
        """The channels of a plant between named inputs and outputs.

        Parameters
        ----------
        plant : ModalPlant
            The plant.
        inputs, outputs : sequence of str
            Actuators (or disturbances) and sensors (or performance outputs).
        omegas : ndarray, optional
            Natural frequencies (rad/s) replacing the plant's (frequency drift: shapes,
            damping ratios and the constant term are kept, as in
            :func:`dampctl.analysis.robustness.drifted_plant_matrices`).

        Returns
        -------
        ModalChannels
        """
        inputs, outputs = list(inputs), list(outputs)
        b = (
            np.column_stack([plant.input_row(name) for name in inputs])
            if inputs
            else np.zeros((plant.n_modes, 0))
        )
        rows = [plant.output_row(name) for name in outputs]
        c = np.array([r for r, _ in rows]).reshape(len(outputs), plant.n_modes)
        orders = np.array([o for _, o in rows], dtype=int)
        _A, _B, _C, D = plant.statespace_matrices(inputs, outputs)
        D = D - (orders == 2)[:, None] * (c @ b)  # the modal sum holds the direct term
        w = plant.omegas if omegas is None else np.asarray(omegas, dtype=float)
        return cls(w, plant.dampings, b, c, orders, D)

    @property
    def n_modes(self) -> int:
        """Number of modes n."""
        return self.omegas.size

    @property
    def poles(self) -> np.ndarray:
        """Open-loop pole of each mode in the upper half plane, −ζω + jω√(1−ζ²) (rad/s)."""
        w, z = self.omegas, self.dampings
        return -z * w + 1j * w * np.sqrt(1.0 - z * z)

    @property
    def seen(self) -> np.ndarray:
        """True for modes with a nonzero term c_i b_iᵀ (the others keep their open-loop poles
        in any closed loop: uncontrollable or unobservable from these channels)."""
        return np.any(self.c != 0.0, axis=0) & np.any(self.b != 0.0, axis=1)

    def residues(self, modes=None) -> np.ndarray:
        """c_i ⊗ b_i of each mode, shape (n, m_out·m_in).

        Parameters
        ----------
        modes : array_like of int, optional
            Mode indices (0-based); default all.

        Returns
        -------
        ndarray
        """
        sel = slice(None) if modes is None else np.asarray(modes, dtype=int)
        c, b = self.c[:, sel], self.b[sel, :]
        return (c.T[:, :, None] * b[:, None, :]).reshape(c.shape[1], -1)

    def response(
        self, s: np.ndarray, *, derivative: bool = False, log_poles: bool = False, modes=None
    ):
        """G(s) (and G'(s), and Σ_i d/ds ln(s² + 2ζ_iω_i s + ω_i²)) at complex points.

        Parameters
        ----------
        s : array_like of complex, shape (P,)
            Points (rad/s).
        derivative : bool, optional
            Also return dG/ds.
        log_poles : bool, optional
            Also return p'(s)/p(s) over the modes (the open-loop part of f'/f).
        modes : array_like of int, optional
            Sum over these modes only (0-based); default every mode. The constant term D is
            always included.

        Returns
        -------
        G : ndarray of complex, shape (P, m_out, m_in)
        dG : ndarray of complex, shape (P, m_out, m_in)
            Only with ``derivative``.
        dlogp : ndarray of complex, shape (P,)
            Only with ``log_poles``.
        """
        s = np.atleast_1d(np.asarray(s, dtype=complex)).ravel()
        sel = np.arange(self.n_modes) if modes is None else np.asarray(modes, dtype=int)
        w, z = self.omegas[sel], self.dampings[sel]
        R = self.residues(sel)  # (n_sel, m_out·m_in), real
        m_out, m_in = self.D.shape
        P, n = s.size, sel.size
        G = np.empty((P, m_out * m_in), dtype=complex)
        dG = np.empty_like(G) if derivative else None
        dlog = np.empty(P, dtype=complex) if log_poles else None
        step = max(1, int(CHUNK_BYTES // (16 * 4 * max(n, 1))))
        two_zw, w2 = 2.0 * z * w, w * w
        for lo in range(0, P, step):
            part = s[lo : lo + step]
            den = part[:, None] * (part[:, None] + two_zw[None, :]) + w2[None, :]
            h = 1.0 / den
            G[lo : lo + step] = _times_real(h, R)
            if derivative or log_poles:
                slope = 2.0 * part[:, None] + two_zw[None, :]  # d(den)/ds
                if log_poles:
                    dlog[lo : lo + step] = np.sum(slope * h, axis=1)
                if derivative:
                    dG[lo : lo + step] = _times_real(-slope * h * h, R)
        G = G.reshape(P, m_out, m_in)
        if derivative:
            dG = dG.reshape(P, m_out, m_in)
        orders = self.orders
        if np.any(orders):
            power = s[:, None] ** orders[None, :]  # (P, m_out)
            if derivative:
                dpower = np.where(
                    orders[None, :] > 0, orders[None, :] * s[:, None] ** np.maximum(orders - 1, 0),
                    0.0,
                )  # fmt: skip
                dG = dpower[:, :, None] * G + power[:, :, None] * dG
            G = power[:, :, None] * G
        G = G + self.D[None, :, :]
        out = [G]
        if derivative:
            out.append(dG)
        if log_poles:
            out.append(dlog)
        return out[0] if len(out) == 1 else tuple(out)


def _times_real(h: np.ndarray, R: np.ndarray) -> np.ndarray:
    """h @ R for complex h and real R as two real products (half the work of a complex one)."""
    return (h.real @ R) + 1j * (h.imag @ R)


# ---------------------------------------------------------------------- controller
class ControllerResponse:
    """K(s), K'(s) and tr((sI − A)⁻¹) of a state-space controller at many complex points.

    A is split into its uncoupled parts (one per channel for a decentralized controller). A
    small part is solved point by point ((sI − A_k)⁻¹ B_k in one batched LAPACK call). A
    large part (a model-based core with its delay sections and roll-offs) is permuted to
    block lower-triangular form whose diagonal blocks are its strongly connected components,
    each depending only on earlier ones, and solved block by block; a block is diagonalized
    once when its eigenvectors are well conditioned (a core, a Padé section, a roll-off),
    so a cascade of identical delay sections (defective as a whole) is a chain of small
    diagonalizable blocks. tr((sI − A)⁻¹) = Σ 1/(s − μ_i) over A's eigenvalues μ_i: a
    symmetric function of them, so it stays accurate where repeated eigenvalues are not.

    Parameters
    ----------
    matrices : tuple of ndarray
        (A, B, C, D) with ``K(s) = C (sI − A)⁻¹ B + D``.
    """

    #: parts up to this many states are solved point by point
    DIRECT_SIZE = 40

    def __init__(self, matrices: Matrices):
        A, B, C, D = (np.asarray(m, dtype=float) for m in matrices)
        self.A, self.B, self.C, self.D = A, B, C, D
        self.n_states = A.shape[0]
        self._parts = []  # (states, kind, data)
        for states in _components(A):
            Akk = A[np.ix_(states, states)]
            if states.size <= self.DIRECT_SIZE:
                self._parts.append((states, "direct", Akk))
            else:
                self._parts.append((states, "blocks", _BlockChain(Akk)))
        self.poles = (
            np.concatenate([np.linalg.eigvals(A[np.ix_(st, st)]) for st, _k, _d in self._parts])
            if self.n_states
            else np.zeros(0, dtype=complex)
        )

    @property
    def state_space(self) -> Matrices:
        """(A, B, C, D)."""
        return self.A, self.B, self.C, self.D

    def _solve(self, s: np.ndarray, rhs: np.ndarray) -> np.ndarray:
        """(sI − A)⁻¹ rhs for rhs of shape (P, n_states, q)."""
        out = np.empty(rhs.shape, dtype=complex)
        for states, kind, data in self._parts:
            r = rhs[:, states, :]
            if kind == "direct":
                eye = np.eye(states.size)
                out[:, states, :] = np.linalg.solve(s[:, None, None] * eye - data, r)
            else:
                out[:, states, :] = data.solve(s, r)
        return out

    def response(self, s: np.ndarray, *, derivative: bool = False, log_poles: bool = False):
        """K(s) (and K'(s), and tr((sI − A)⁻¹) = d/ds ln det(sI − A)) at complex points.

        Parameters
        ----------
        s : array_like of complex, shape (P,)
            Points (rad/s).
        derivative : bool, optional
            Also return dK/ds.
        log_poles : bool, optional
            Also return tr((sI − A)⁻¹).

        Returns
        -------
        K : ndarray of complex, shape (P, p, q)
        dK : ndarray of complex, shape (P, p, q)
            Only with ``derivative``.
        trace : ndarray of complex, shape (P,)
            Only with ``log_poles``.
        """
        s = np.atleast_1d(np.asarray(s, dtype=complex)).ravel()
        P = s.size
        p, q = self.D.shape
        if self.n_states == 0:
            K = np.broadcast_to(self.D.astype(complex), (P, p, q)).copy()
            dK = np.zeros_like(K)
        else:
            x = self._solve(s, np.broadcast_to(self.B.astype(complex), (P, *self.B.shape)))
            K = self.C[None] @ x + self.D[None]
            dK = -(self.C[None] @ self._solve(s, x)) if derivative else None
        out = [K]
        if derivative:
            out.append(dK)
        if log_poles:
            with np.errstate(all="ignore"):
                out.append(np.sum(1.0 / (s[:, None] - self.poles[None, :]), axis=1))
        return out[0] if len(out) == 1 else tuple(out)


class _BlockChain:
    """(sI − A)⁻¹ r by forward substitution over A's strongly connected components."""

    def __init__(self, A: np.ndarray):
        self.blocks = _triangular_blocks(A)
        self.parts = []
        for k, states in enumerate(self.blocks):
            Akk = A[np.ix_(states, states)]
            earlier = np.concatenate(self.blocks[:k]) if k else np.zeros(0, dtype=int)
            coupling = A[np.ix_(states, earlier)] if earlier.size else None
            if coupling is not None and not np.any(coupling):
                coupling = None
            eig = None
            mu, V = np.linalg.eig(Akk)
            if np.linalg.cond(V) < 1e8:
                eig = (mu, V, np.linalg.inv(V))
            self.parts.append((states, earlier, coupling, Akk, eig))

    def solve(self, s: np.ndarray, rhs: np.ndarray) -> np.ndarray:
        out = np.empty(rhs.shape, dtype=complex)
        for states, earlier, coupling, Akk, eig in self.parts:
            r = rhs[:, states, :]
            if coupling is not None:
                r = r + coupling[None] @ out[:, earlier, :]
            if eig is not None:
                mu, V, Vinv = eig
                y = (Vinv[None] @ r) / (s[:, None] - mu[None, :])[:, :, None]
                out[:, states, :] = V[None] @ y
            else:
                eye = np.eye(states.size)
                out[:, states, :] = np.linalg.solve(s[:, None, None] * eye - Akk, r)
        return out


def _components(A: np.ndarray) -> list[np.ndarray]:
    """Groups of states that are coupled through A in either direction."""
    from scipy.sparse import csr_matrix
    from scipy.sparse.csgraph import connected_components

    n = A.shape[0]
    if n == 0:
        return []
    _count, labels = connected_components(csr_matrix((A != 0) | (A.T != 0)), directed=False)
    return [np.flatnonzero(labels == k) for k in range(labels.max() + 1)]


def _triangular_blocks(A: np.ndarray) -> list[np.ndarray]:
    """Strongly connected components of A's graph (i depends on j when A[i, j] != 0), in an
    order where each depends only on earlier ones (Tarjan's algorithm lists a component after
    every component it depends on)."""
    n = A.shape[0]
    if n == 0:
        return []
    depends = [np.flatnonzero(A[i]).tolist() for i in range(n)]
    index = [-1] * n
    low = [0] * n
    on_stack = [False] * n
    stack: list[int] = []
    blocks: list[np.ndarray] = []
    counter = 0
    for root in range(n):
        if index[root] >= 0:
            continue
        work = [(root, 0)]  # iterative Tarjan: (node, next neighbour position)
        while work:
            v, pos = work.pop()
            if pos == 0:
                index[v] = low[v] = counter
                counter += 1
                stack.append(v)
                on_stack[v] = True
            recurse = False
            neighbours = depends[v]
            while pos < len(neighbours):
                w = neighbours[pos]
                pos += 1
                if index[w] < 0:
                    work.append((v, pos))
                    work.append((w, 0))
                    recurse = True
                    break
                if on_stack[w]:
                    low[v] = min(low[v], index[w])
            if recurse:
                continue
            if low[v] == index[v]:
                members = []
                while True:
                    w = stack.pop()
                    on_stack[w] = False
                    members.append(w)
                    if w == v:
                        break
                blocks.append(np.array(sorted(members), dtype=int))
            if work:
                parent = work[-1][0]
                low[parent] = min(low[parent], low[v])
    return blocks
