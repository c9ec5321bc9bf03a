"""Relay/resistor networks as data: a series-parallel tree of resistors and relay contacts.

One tree describes one ladder build. The same tree gives

* the impedance of every setting at every frequency (:func:`network_impedance_ohm`),
  including the relay parasitics: a closed contact is ``contact_ohm`` in series, an
  open contact is ``open_capacitance_f`` across its terminals (common practice /
  data-sheet range: 50-100 mOhm, 0.1-2 pF);
* the text wiring diagram (:func:`render_tree`).

A setting is an integer bit mask: bit ``i`` drives ladder relay ``i``. Contacts of the
role relays (open, reversal) are not in the mask; they are closed in every ladder
setting, and the open relay's contact opens in open mode.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import Enum

import numpy as np


class Role(str, Enum):
    """What drives a relay contact."""

    LADDER = "ladder"    # a bit of the setting mask
    OPEN = "open"        # open-termination relay
    REVERSE = "reverse"  # reversal relay pole in the termination path


@dataclass(frozen=True)
class Parasitics:
    """Relay contact parasitics.

    Parameters
    ----------
    contact_ohm : float
        Resistance of a closed contact, ohms.
    open_capacitance_f : float
        Capacitance across an open contact, farads.
    """

    contact_ohm: float = 0.1
    open_capacitance_f: float = 1.0e-12


IDEAL = Parasitics(0.0, 0.0)


@dataclass(frozen=True)
class Resistor:
    """A resistor ``ref`` of ``value_ohm`` (nominal)."""

    ref: str
    value_ohm: float
    note: str = ""


@dataclass(frozen=True)
class Contact:
    """One relay contact.

    Parameters
    ----------
    relay : str
        Relay reference, e.g. ``"K3"``.
    role : Role
        What drives it.
    bit : int
        Mask bit for ``Role.LADDER`` contacts (ignored otherwise).
    closed_when_set : bool
        For ladder contacts: True if the contact is closed when the bit is 1
        (normally-open contact), False for a normally-closed contact.
    note : str
        Free text for the diagram.
    """

    relay: str
    role: Role
    bit: int = -1
    closed_when_set: bool = True
    note: str = ""


@dataclass(frozen=True)
class Series:
    parts: tuple["Node", ...]


@dataclass(frozen=True)
class Parallel:
    branches: tuple["Node", ...]


Node = Resistor | Contact | Series | Parallel

_INF = complex(np.inf, 0.0)


def _contact_closed(c: Contact, masks: np.ndarray, open_mode: bool) -> np.ndarray:
    if c.role is Role.LADDER:
        bit_set = ((masks >> c.bit) & 1).astype(bool)
        return bit_set if c.closed_when_set else ~bit_set
    if c.role is Role.OPEN:
        return np.full(masks.shape, not open_mode)
    return np.ones(masks.shape, dtype=bool)


def _parallel(zs: list[np.ndarray]) -> np.ndarray:
    with np.errstate(divide="ignore", invalid="ignore"):
        y = sum(np.where(np.isinf(z), 0.0, 1.0 / np.where(z == 0, 1.0, z)) for z in zs)
        any_short = np.logical_or.reduce([z == 0 for z in zs])
        z = np.where(y == 0, _INF, 1.0 / np.where(y == 0, 1.0, y))
    return np.where(any_short, 0.0 + 0.0j, z)


def _eval(node: Node, masks: np.ndarray, omega: np.ndarray, par: Parasitics,
          r_scale: float, open_mode: bool) -> np.ndarray:
    shape = (masks.size, omega.size)
    if isinstance(node, Resistor):
        return np.full(shape, node.value_ohm * r_scale, dtype=complex)
    if isinstance(node, Contact):
        closed = _contact_closed(node, masks, open_mode)[:, None]
        with np.errstate(divide="ignore"):
            y_open = 1j * omega[None, :] * par.open_capacitance_f
            z_open = np.where(y_open == 0, _INF, 1.0 / np.where(y_open == 0, 1.0, y_open))
        return np.where(closed, complex(par.contact_ohm), np.broadcast_to(z_open, shape))
    if isinstance(node, Series):
        total = np.zeros(shape, dtype=complex)
        for p in node.parts:
            total = total + _eval(p, masks, omega, par, r_scale, open_mode)
        return total
    return _parallel([_eval(b, masks, omega, par, r_scale, open_mode) for b in node.branches])


def iter_contacts(node: Node):
    """Every relay contact of a ladder tree, in drawing order."""
    if isinstance(node, Contact):
        yield node
    elif isinstance(node, Series):
        for part in node.parts:
            yield from iter_contacts(part)
    elif isinstance(node, Parallel):
        for branch in node.branches:
            yield from iter_contacts(branch)


def network_impedance_ohm(tree: Node, masks: np.ndarray | list[int], freq_hz: np.ndarray | float,
                          parasitics: Parasitics = IDEAL, r_scale: float = 1.0,
                          open_mode: bool = False) -> np.ndarray:
    """Impedance of the network for each mask and frequency.

    Parameters
    ----------
    tree : Node
        The network.
    masks : array of int, shape (M,)
        Settings (bit masks).
    freq_hz : float or array, shape (F,)
        Frequencies, hertz (0 gives the DC value).
    parasitics : Parasitics
        Relay contact parasitics.
    r_scale : float
        Factor applied to every resistor (1 ± tolerance for worst-case builds).
    open_mode : bool
        True: the open relay is energised (open mode).

    Returns
    -------
    ndarray of complex, shape (M, F)
        Impedance, ohms; an open circuit at DC is ``inf``.
    """
    m = np.atleast_1d(np.asarray(masks, dtype=np.int64))
    omega = 2.0 * np.pi * np.atleast_1d(np.asarray(freq_hz, dtype=float))
    return _eval(tree, m, omega, parasitics, r_scale, open_mode)


def format_ohm(r_ohm: float) -> str:
    """``4.7 Ω``, ``1.2 kΩ``, ``2.2 MΩ`` (up to 4 significant figures)."""
    for scale, unit in ((1e6, "MΩ"), (1e3, "kΩ")):
        if abs(r_ohm) >= scale:
            return f"{r_ohm / scale:.4g} {unit}"
    return f"{r_ohm:.4g} Ω"


def _label(node: Resistor | Contact) -> str:
    if isinstance(node, Resistor):
        text = f"{node.ref} {format_ohm(node.value_ohm)}"
    elif node.role is Role.LADDER:
        kind = "NO" if node.closed_when_set else "NC"
        state = "closed" if node.closed_when_set else "open"
        text = f"{node.relay} {kind} contact, {state} when bit {node.bit} = 1"
    else:
        text = f"{node.relay} contact ({node.role.value})"
    return f"{text}; {node.note}" if node.note else text


def _pad(block: list[str], width: int) -> list[str]:
    return [line.ljust(width) for line in block]


def render_tree(node: Node) -> list[str]:
    """ASCII drawing of ``node``; the signal runs down column 0 from top to bottom."""
    if isinstance(node, (Resistor, Contact)):
        return ["|", _label(node) if isinstance(node, Resistor) else "o/ " + _label(node), "|"]
    if isinstance(node, Series):
        out: list[str] = []
        for p in node.parts:
            block = render_tree(p)
            out.extend(block if not out else block[1:])  # share the joining wire
        return out
    blocks = [render_tree(b) for b in node.branches]
    height = max(len(b) for b in blocks)
    blocks = [b + ["|"] * (height - len(b)) for b in blocks]
    widths = [max(len(s) for s in b) + 3 for b in blocks]
    offsets = [sum(widths[:i]) for i in range(len(blocks))]
    bus_len = offsets[-1] + 1
    bus = "".join("+" if x in offsets else "-" for x in range(bus_len))
    rows = ["".join(_pad([b[r]], w)[0] for b, w in zip(blocks, widths)).rstrip()
            for r in range(height)]
    return ["|", bus] + rows + [bus, "|"]
