"""hardware_notes/generated/ equals what hardware_notes/generate.py produces now.

The diagrams are drawn from the ladder designer's own topology data (the network tree
that also gives every setting's impedance), so this test fails as soon as a topology
changes and the notes were not regenerated (run ``.venv/bin/python hardware_notes/generate.py``).
"""

from __future__ import annotations

import importlib.util
from pathlib import Path

from nullsteer.ladder.topology import TOPOLOGIES

GEN = Path(__file__).parents[1] / "hardware_notes" / "generate.py"


def load_generator():
    spec = importlib.util.spec_from_file_location("hwnotes_generate", GEN)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_committed_files_equal_the_generator_output():
    gen = load_generator()
    files = gen.render_all()
    assert sorted(files) == sorted(f"ladder-{name}.txt" for name in TOPOLOGIES)  # every topology
    for name, text in files.items():
        assert (gen.OUT / name).read_text() == text, f"{name} is out of date: run generate.py"
    assert sorted(p.name for p in gen.OUT.glob("*.txt")) == sorted(files)  # nothing stale
    assert gen.main(["--check"]) == 0


def test_every_ladder_relay_and_role_relay_is_drawn():
    gen = load_generator()
    for name, text in gen.render_all().items():
        for ref in ("K_REV", "K_OPEN", "K_PROT"):
            assert ref in text, (name, ref)
        relays = gen.EXAMPLE["relays"]
        for bit in range(relays):
            assert f"bit {bit} = 1" in text and f'"bit": {bit}' in text, (name, bit)
