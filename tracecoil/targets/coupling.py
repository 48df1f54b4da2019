"""Transmitter-receiver coupling through a conductive target.

A transmitter coil carries the current I_tx (amplitude, A) at angular
frequency omega; a receiver coil is left open. With a conducting plate
near both, the plate's loop currents J (the mesh of
:class:`~tracecoil.targets.conductive.PlateModel`) obey
0 = j omega m_tx I_tx + Z_t J, and the receiver's open-circuit EMF is::

    emf = -j omega M_eff I_tx,
    M_eff = M_tx_rx - j omega m_rx^T Z_t^-1 m_tx,

with M_tx_rx the direct mutual inductance of the two coils
(:func:`tracecoil.physics.inductance.mutual_inductance`) and m_tx, m_rx
their couplings to the plate's loops. For a perfect conductor
(Z_t = j omega L_t) the second term is the real image-current term
-m_rx^T L_t^-1 m_tx; a resistive plate makes M_eff complex, which is the
phase shift of the receiver signal. Z_t is symmetric, so M_eff is the same
with the roles of the two coils swapped (reciprocity).

The EMF is Faraday's -d(lambda)/dt for the receiver's terminal direction
A to B (the sign of M follows both coils' A-to-B directions): for a
current I_tx cos(omega t) the receiver voltage is Re(emf e^{j omega t}),
so ``emf_phase_deg`` is the phase against the transmitter current.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import SpecError
from ..physics.conductors import Conductors, conductors
from .conductive import DEFAULT_MAX_CELLS, Plate, PlateModel, _positive, _side, poses

__all__ = ["ReceiverSignal", "receiver_response", "receiver_signal", "receiver_from_table", "RECEIVER_KEYS"]


@dataclass(frozen=True, eq=False)
class ReceiverSignal:
    """Receiver EMF against target pose.

    Attributes
    ----------
    m_eff_h : ndarray of complex, shape (p,)
        Effective transmitter-to-receiver mutual inductance with the target (H).
    mutual_free_h : float
        M_tx_rx without the target (H).
    emf_v : ndarray of complex, shape (p,)
        Open-circuit EMF phasor, -j omega M_eff I_tx (V, peak).
    tx_current_a, freq_hz : float
    """

    m_eff_h: np.ndarray
    mutual_free_h: float
    emf_v: np.ndarray
    tx_current_a: float
    freq_hz: float

    @property
    def emf_amplitude_v(self) -> np.ndarray:
        """|emf| (V, peak), shape (p,)."""
        return np.abs(self.emf_v)

    @property
    def emf_phase_deg(self) -> np.ndarray:
        """Phase of the EMF against the transmitter current (degrees), shape (p,)."""
        return np.degrees(np.angle(self.emf_v))

    @property
    def free_emf_v(self) -> complex:
        """EMF without the target (V, peak phasor)."""
        return complex(-1j * 2 * math.pi * self.freq_hz * self.mutual_free_h * self.tx_current_a)

    def columns(self) -> dict:
        return {"receiver_emf_v": self.emf_amplitude_v, "receiver_phase_deg": self.emf_phase_deg,
                "receiver_emf_re_v": self.emf_v.real, "receiver_emf_im_v": self.emf_v.imag}


def receiver_response(tx, rx, model: PlateModel, position_mm, rotation_deg=None, *, m_tx=None, x_tx=None,
                      tx_current_a=1.0, distance_m=None, use_grid=None, progress=False) -> ReceiverSignal:
    """Receiver EMF for every pose, with a plate model already factorised.

    Parameters
    ----------
    tx, rx : Coil or Conductors
        Transmitter and receiver (placed).
    model : PlateModel
        The plate at the drive frequency.
    position_mm : ndarray, shape (p, 3)
        Plate poses (see :func:`tracecoil.targets.conductive.poses`).
    rotation_deg : ndarray, shape (p,), optional
    m_tx, x_tx : ndarray, shape (n_loops, p), optional
        The transmitter's coupling and Z_t^-1 m_tx, if already computed.
    tx_current_a : float
        Transmitter current amplitude (A, peak).
    distance_m, use_grid, progress :
        Passed to :meth:`PlateModel.coupling` for the transmitter.

    Returns
    -------
    ReceiverSignal
    """
    from ..physics.inductance import mutual_inductance

    i_tx = float(tx_current_a)
    if not math.isfinite(i_tx):
        raise SpecError(f"tx_current_a must be a finite number (A); got {tx_current_a!r}")
    pos = np.asarray(position_mm, float).reshape(-1, 3)
    if m_tx is None:
        m_tx = model.coupling(tx, pos, rotation_deg, distance_m=distance_m, progress=progress, use_grid=use_grid)
    if x_tx is None:
        x_tx = model.solve(m_tx.astype(complex))
    m_rx = model.coupling(rx, pos, rotation_deg, progress=progress, use_grid=use_grid)
    w = model.omega
    m0 = float(mutual_inductance(tx, rx))
    m_eff = m0 - 1j * w * np.einsum("lp,lp->p", m_rx, x_tx)
    emf = -1j * w * m_eff * i_tx
    return ReceiverSignal(m_eff_h=m_eff, mutual_free_h=m0, emf_v=emf, tx_current_a=i_tx, freq_hz=model.freq_hz)


def receiver_signal(tx, rx, plate: Plate, motion=None, *, freq_hz, tx_current_a=1.0, cell_mm=None,
                    max_cells=DEFAULT_MAX_CELLS, use_grid=None, progress=None) -> ReceiverSignal:
    """Receiver EMF amplitude and phase as a plate moves near two coils.

    Parameters
    ----------
    tx, rx : Coil
        Transmitter and receiver, placed in the same world frame
        (``Coil.placed``).
    plate : Plate
    motion : None, array_like (p, 3) or a motion object
        Plate poses (:func:`tracecoil.targets.conductive.poses`).
    freq_hz : float
        Drive frequency (Hz).
    tx_current_a : float
        Transmitter current amplitude (A, peak).
    cell_mm, max_cells :
        Plate mesh.

    Returns
    -------
    ReceiverSignal

    Examples
    --------
    Two coaxial loops 1 mm apart, an aluminium plate 1 mm over the upper
    one: the plate lowers the coupling and adds a resistive (in-phase)
    part.

    >>> from tracecoil.layout import Coil, Stackup, Step, Trace
    >>> t = np.linspace(0, 2 * np.pi, 65)
    >>> ring = Trace(1, 5 * np.column_stack([np.cos(t), np.sin(t)]), 0.2)
    >>> tx = Coil(Stackup((35.0,), ()), (ring,), (), (), (Step("trace", 0),))
    >>> rx = tx.placed(offset_mm=(0, 0, -1.0))
    >>> sq = [[-8, -8], [8, -8], [8, 8], [-8, 8]]
    >>> s = receiver_signal(tx, rx, Plate(sq, 0.5), [[0, 0, 1.0]], freq_hz=1e5, max_cells=300)
    >>> bool(abs(s.m_eff_h[0]) < s.mutual_free_h), bool(s.m_eff_h[0].imag != 0)
    (True, True)
    """
    if not isinstance(plate, Plate):
        raise SpecError(f"plate must be a Plate; got {type(plate).__name__}")
    cd_tx = tx if isinstance(tx, Conductors) else conductors(tx)
    cd_rx = rx if isinstance(rx, Conductors) else conductors(rx)
    pos, rot, _ = poses(motion, plate)
    side = _side(plate, cd_tx, pos, what="transmitter")
    if _side(plate, cd_rx, pos, what="receiver") != side:
        raise SpecError("the transmitter and the receiver must be on the same side of the plate")
    model = PlateModel(plate, _positive("freq_hz", freq_hz), side=side, cell_mm=cell_mm, max_cells=max_cells)
    show = progress if progress is not None else len(pos) > 50
    return receiver_response(tx, rx, model, pos, rot, tx_current_a=tx_current_a, use_grid=use_grid, progress=show)


RECEIVER_PLACEMENT_KEYS = ("offset_mm", "rotation_deg", "flip", "tx_current_a", "name")


def _receiver_keys():
    from ..design import COIL_KEYS

    return tuple(COIL_KEYS) + RECEIVER_PLACEMENT_KEYS


RECEIVER_KEYS = RECEIVER_PLACEMENT_KEYS  # plus every [coil] key (see receiver_from_table)


def receiver_from_table(table: dict, board=None):
    """The receiver coil a design file's ``[receiver]`` table describes.

    The table has the keys of ``[coil]`` (shape, outer_mm, turns, width_mm,
    gap_mm, layers, ...) and optionally ``offset_mm`` = [x, y, z] (mm),
    ``rotation_deg``, ``flip`` (placement, as ``Coil.placed``),
    ``tx_current_a`` (the transmitter current amplitude, A) and ``name``.
    The receiver is built on the design's board (``[board]``).

    Parameters
    ----------
    table : dict
    board : BoardSpec or dict, optional
        The design's board; default board when None.

    Returns
    -------
    coil : Coil
        The placed receiver.
    options : dict
        {'tx_current_a': ...} when the table gives it.

    Examples
    --------
    >>> rx, opt = receiver_from_table({"shape": "circle", "outer_mm": 10, "turns": 2, "width_mm": 0.2,
    ...                                "gap_mm": 0.2, "offset_mm": [12, 0, 0], "tx_current_a": 0.05})
    >>> round(rx.bounds_mm()[0], 1) > 6, opt
    (True, {'tx_current_a': 0.05})
    """
    from ..design import make_board_spec, make_coil_spec
    from ..errors import unknown_key_message
    from ..generators import build_coil
    from ..units import to_mm

    if not isinstance(table, dict):
        raise SpecError(f"[receiver] must be a table; got {type(table).__name__}")
    keys = _receiver_keys()
    for k in table:
        if k not in keys:
            raise SpecError(unknown_key_message("receiver", k, keys))
    coil_vals = {k: v for k, v in table.items() if k not in RECEIVER_PLACEMENT_KEYS}
    spec = make_coil_spec(coil_vals)
    coil = build_coil(spec, make_board_spec(board), name=str(table.get("name", "receiver")))
    off = table.get("offset_mm", (0.0, 0.0, 0.0))
    try:
        off = tuple(to_mm(v, "receiver.offset_mm") for v in off)
    except (TypeError, ValueError) as e:
        raise SpecError(f"receiver.offset_mm must be [x, y, z] in mm ({e})") from None
    if len(off) != 3:
        raise SpecError(f"receiver.offset_mm must be [x, y, z] in mm; got {table.get('offset_mm')!r}")
    rot = table.get("rotation_deg", 0.0)
    if isinstance(rot, bool) or not isinstance(rot, (int, float)) or not math.isfinite(rot):
        raise SpecError(f"receiver.rotation_deg must be a number (degrees); got {rot!r}")
    flip = table.get("flip", False)
    if not isinstance(flip, bool):
        raise SpecError(f"receiver.flip must be true or false; got {flip!r}")
    opts = {}
    if "tx_current_a" in table:
        opts["tx_current_a"] = _positive("receiver.tx_current_a", table["tx_current_a"])
    return coil.placed(offset_mm=off, rotation_deg=float(rot), flip=flip), opts
