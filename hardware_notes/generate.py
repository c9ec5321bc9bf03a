"""Write the wiring diagrams of hardware_notes/generated/ from the designer's own data.

Usage (from the repository root)::

    .venv/bin/python hardware_notes/generate.py           # rewrite the generated files
    .venv/bin/python hardware_notes/generate.py --check   # exit 1 if a file is out of date

For every topology the ladder designer offers (``nullsteer.ladder.topology.TOPOLOGIES``)
the ladder is drawn by the designer's ``wiring_diagram`` from the same network tree that
gives each setting's impedance, so the notes and the code cannot disagree; an
illustrative build (:data:`EXAMPLE_VALUES`) supplies the values. The role relays around the
ladder (reversal, receiver protect, open) are drawn by :func:`reversal_diagram` with the
relay references taken from that tree, and follow the roles of ``firmware/relays.py``.
tests/test_hwnotes_generated.py checks that the committed files equal what this script
produces now.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
OUT = HERE / "generated"

#: The illustrative build drawn for each topology: the designer's best build for a
#: 400-2500 ohm range with 5 ladder relays, E24, 1 % (design_ladder with its default
#: time budget, computed once and written down here so the notes do not depend on the
#: machine's speed). Your own values come from
#: ``nullsteer ladder --config station.toml``; the wiring is the same.
EXAMPLE = {"r_min_ohm": 400.0, "r_max_ohm": 2500.0, "relays": 5, "series": "E24",
           "tolerance_pct": 1.0}
EXAMPLE_VALUES = {
    "series-shorting": (91.0, (120.0, 240.0, 330.0, 390.0, 1200.0), ()),
    "series-shunt": (240.0, (220.0, 330.0, 470.0, 1200.0), (5100.0,)),
    "series-twin-shunt": (510.0, (220.0, 390.0, 1300.0), (8200.0, 3300.0)),
    "series-split-shunt": (82.0, (430.0, 680.0, 1600.0), (6800.0, 2700.0)),
}

PROTECT_REF = "K_PROT"  # the receiver-protect relay (not part of the ladder's tree)


def _role_refs(tree: object) -> dict[str, str]:
    """Relay reference of each role contact in a ladder tree (e.g. reverse -> K_REV)."""
    from nullsteer.ladder.network import iter_contacts
    refs: dict[str, str] = {}
    for contact in iter_contacts(tree):
        refs.setdefault(contact.role.value, contact.relay)
    return refs


def reversal_diagram(rev: str, open_: str) -> str:
    """The role relays around the ladder, for relay references ``rev`` and ``open_``."""
    p = PROTECT_REF
    return "\n".join([
        f"Role relays ({rev}: reversal DPDT, {p}: receiver protect, {open_}: open).",
        "Port A and port B are the two loop corners as the box sees them: usually a",
        "coax from each corner's transformer (centres switched, shields common); or the",
        "corners' own gaps where both corners are at the box (one side of each common).",
        "",
        f"  port A --o COM ({rev} pole 1)        port B --o COM ({rev} pole 2)",
        "            |\\                                   |\\",
        "         NC | \\ NO                            NC | \\ NO",
        "            |  \\                                 |  \\",
        "           RX  TERM                             TERM  RX",
        "",
        f"  {rev} de-energised (NC): fed end A. Port A -> RX, port B -> TERM.",
        f"  {rev} energised    (NO): fed end B. Port B -> RX, port A -> TERM.",
        "  Two SPDT relays, one per port, driven together, do the same",
        "  (board.json: two relays of role reverse).",
        "",
        "  RX ---+--- to the receiver (coax to the shack)",
        "        |",
        f"        o/ {p} NO contact to the common return:",
        "        |  energised = receiver input shorted (break-before-make guard)",
        "       ---",
        "",
        f"  TERM ---o/ {open_} NC contact ---> top of the ladder (drawn above)",
        "           energised = termination open (no rear null)",
        "  bottom of the ladder ---> common return",
        "",
        "  Switching order (firmware): protect on, settle, swap the ends, settle,",
        "  ladder and open relays, settle, protect off.",
    ]) + "\n"


def bit_table(design: object, tree: object) -> str:
    """Which board.json relay drives which ladder contact."""
    from nullsteer.ladder.network import Role, iter_contacts
    rows = [(c.bit, c.relay, "NO" if c.closed_when_set else "NC")
            for c in iter_contacts(tree) if c.role is Role.LADDER]
    lines = ["ladder bit | relay | contact used | board.json relay entry",
             "-----------+-------+--------------+------------------------------"]
    for bit, relay, kind in sorted(rows):
        lines.append(f"{bit:>10} | {relay:<5} | {kind:<12} | role \"ladder\", \"bit\": {bit}")
    return "\n".join(lines) + "\n"


def topology_file(name: str) -> str:
    """The generated text for one topology."""
    from nullsteer.ladder import LadderValues, Parasitics, evaluate, wiring_diagram
    from nullsteer.ladder.topology import TOPOLOGIES
    topo = TOPOLOGIES[name]
    base, chain, shunt = EXAMPLE_VALUES[name]
    design = evaluate(topo, LadderValues(base, chain, shunt), EXAMPLE["r_min_ohm"],
                      EXAMPLE["r_max_ohm"], EXAMPLE["tolerance_pct"], Parasitics(),
                      EXAMPLE["series"])
    tree = topo.tree(design.values)
    refs = _role_refs(tree)
    head = [f"Topology {name}: {topo.summary}.",
            "GENERATED by hardware_notes/generate.py from the designer's topology data;",
            "do not edit. Illustrative build for "
            f"{EXAMPLE['r_min_ohm']:g}-{EXAMPLE['r_max_ohm']:g} ohm, {EXAMPLE['relays']} "
            f"ladder relays, {EXAMPLE['series']}, {EXAMPLE['tolerance_pct']:g} %",
            f"(worst case {design.worst_case_error_pct:.1f} % with tolerance); your values "
            "come from 'nullsteer ladder --config station.toml'.", ""]
    return "\n".join(head) + "\n" + wiring_diagram(design).rstrip("\n") + "\n\n" + \
        bit_table(design, tree) + "\n" + reversal_diagram(refs["reverse"], refs["open"])


def render_all() -> dict[str, str]:
    """File name -> text of every generated file."""
    from nullsteer.ladder.topology import TOPOLOGIES
    files = {f"ladder-{name}.txt": topology_file(name) for name in TOPOLOGIES}
    return files


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="only compare; exit 1 on a difference")
    args = parser.parse_args(argv)
    files = render_all()
    stale = [n for n, text in files.items()
             if not (OUT / n).is_file() or (OUT / n).read_text() != text]
    extra = sorted(p.name for p in OUT.glob("*.txt") if p.name not in files) if OUT.is_dir() else []
    if args.check:
        for n in stale + extra:
            print(f"out of date: hardware_notes/generated/{n}")
        return 1 if stale or extra else 0
    OUT.mkdir(exist_ok=True)
    for n in stale:
        (OUT / n).write_text(files[n])
        print(f"wrote hardware_notes/generated/{n}")
    for n in extra:
        (OUT / n).unlink()
        print(f"removed hardware_notes/generated/{n}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
