"""Energies and their exact gradients with respect to a circuit's named angles.

:func:`energy_and_gradient` returns ``E = <0|C† H C|0>`` and ``dE/dθ`` for
every name ``θ`` of the circuit (:meth:`tnsim.Circuit.parameters`), by the
parameter-shift rule (Mitarai, Negoro, Kitagawa, Fujii, Phys. Rev. A 98,
032309, 2018; Schuld, Bergholm, Gogolin, Izaac, Killoran, Phys. Rev. A 99,
032331, 2019): each use of a name -- each gate angle that depends on it -- is
shifted separately, and the chain rule through the affine angle expression
(``d(2*gamma + 0.1)/d gamma = 2``) adds the uses up.  Controlled rotations get
the four-term rule; the rules of every gate are in :mod:`tnsim.circuits.shifts`.

Every shifted evaluation touches only the light cones that contain the
shifted gate, and the cones that are equal up to renaming qubits are shared
(:class:`tnsim.queries.landscape.EnergyLandscape`).  For many evaluations of
one circuit (an optimization), build the landscape once and call its methods.
"""

from __future__ import annotations

from tnsim.circuits.circuit import Circuit
from tnsim.execution.options import DTypeLike, MemoryLimit
from tnsim.queries.landscape import EnergyLandscape

__all__ = ["energy_and_gradient"]


def energy_and_gradient(
    circuit: Circuit,
    observable,
    values,
    *,
    dtype: DTypeLike | None = None,
    memory_limit: MemoryLimit | None = None,
) -> tuple[float, dict[str, float]]:
    """Return ``<0|C† H C|0>`` at ``values`` and its gradient with respect to each name.

    Parameters
    ----------
    circuit : Circuit
        A circuit with named angles.
    observable : str or mapping or Observable
        The Pauli sum ``H``, e.g. ``"0.5 Z0 Z1 - 1.2 X3 + 0.7"``.
    values : mapping of str to float, or sequence of float
        A value for every name (a sequence follows the order of ``circuit.parameters()``).
    dtype : numpy dtype, optional
        Contraction dtype (default: the enclosing ``run_options`` block's, else complex128).
    memory_limit : int or str, optional
        Bytes (or text such as ``"4GiB"``) for live intermediates of one contraction.

    Returns
    -------
    energy : float
    gradient : dict of str to float
        ``dE/dθ`` for every name, in the order of ``circuit.parameters()``.

    Raises
    ------
    InputError
        A missing or unknown name, or a named angle on a gate that has no
        parameter-shift rule.

    Examples
    --------
    >>> from tnsim import Circuit
    >>> c = Circuit(1).rx("2*t", 0)   # <Z> = cos 2t, d/dt = -2 sin 2t
    >>> e, g = energy_and_gradient(c, "Z0", {"t": 0.4})
    >>> round(e, 12), round(g["t"], 12)
    (0.696706709347, -1.434712181799)
    """
    landscape = EnergyLandscape(circuit, observable, dtype=dtype, memory_limit=memory_limit)
    landscape.check_gradient_rules()
    energy, grad = landscape.energy_and_gradient(values)
    return energy, {name: float(g) for name, g in zip(landscape.names, grad)}
