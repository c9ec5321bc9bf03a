"""Mutation run over a curated list of mutants (tools/mutants/mutants.toml).

Why a curated list and not a generic mutation tool: a generic tool mutates every operator
of a numerical code base (thousands of mutants, most of them in plotting, messages and
argument checks) and runs the whole suite, with the real MicroPython interpreter and a
real broker, for each: hours on this machine. The curated mutants are the bugs that
matter for this project (physics constants and formulas, the codec's checks, the board's
safety behaviours), each written as (file, exact original snippet, replacement), so a
mutant whose code has moved on is reported "not applicable" instead of breaking the run.

How it runs: the working tree (tracked and untracked, not ignored files) is copied once to
a temporary folder; each mutant is applied there, its listed test files are run with the
project's interpreter (PYTHONPATH pointing at the copy, so the copy's package and
firmware are the ones under test), and the file is restored. A mutant that the listed
tests do not catch is run once more against the whole pytest suite before it is called a
survivor; a failure there counts only if the failing test fails again when rerun alone
(a test that is flaky under load must not score). The unmutated copy must pass the
listed tests first, or the run stops.

Usage::

    python tools/mutants/run.py [--only ID ...] [--list FILE] [--timeout S]
                                [--no-confirm] [--min-score PCT] [--rev REV]

Exit status: 0 when the score (caught / applicable, survivors with an ``accept`` reason
counted as not caught) reaches ``--min-score`` (default 90), 1 when it does not, 2 for
usage errors.
"""

from __future__ import annotations

import argparse
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]
DEFAULT_LIST = Path(__file__).with_name("mutants.toml")


@dataclass(frozen=True)
class Mutant:
    id: str
    file: str
    original: str
    replacement: str
    tests: tuple[str, ...]
    accept: str | None = None
    owner: str | None = None


@dataclass
class Outcome:
    mutant: Mutant
    status: str          # caught | survived | not applicable
    detail: str = ""
    seconds: float = 0.0
    by: list[str] = field(default_factory=list)


def load_mutants(path: Path) -> list[Mutant]:
    data = tomllib.loads(path.read_text())
    out, seen = [], set()
    for i, m in enumerate(data.get("mutant", [])):
        missing = {"id", "file", "original", "replacement", "tests"} - m.keys()
        if missing:
            raise SystemExit(f"{path}: mutant {i + 1}: missing {', '.join(sorted(missing))}")
        if m["id"] in seen:
            raise SystemExit(f"{path}: mutant id {m['id']!r} given twice")
        seen.add(m["id"])
        out.append(Mutant(m["id"], m["file"], m["original"], m["replacement"],
                          tuple(m["tests"]), m.get("accept"), m.get("owner")))
    return out


def project_files(repo: Path) -> list[str]:
    """Tracked and untracked (not ignored) files: the working state, not the last commit."""
    done = subprocess.run(["git", "ls-files", "-z", "--cached", "--others", "--exclude-standard"],
                          cwd=repo, capture_output=True, check=True)
    return [p for p in done.stdout.decode().split("\0") if p and (repo / p).is_file()]


def copy_tree(repo: Path, dest: Path, rev: str | None = None) -> None:
    """The working state of ``repo`` (or the tree of git revision ``rev``) into ``dest``."""
    if rev is not None:
        archive = subprocess.run(["git", "archive", "--format=tar", rev], cwd=repo,
                                 capture_output=True, check=True).stdout
        subprocess.run(["tar", "-x", "-C", str(dest)], input=archive, check=True)
        return
    for rel in project_files(repo):
        target = dest / rel
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy2(repo / rel, target)


def pytest_cmd(tests: list[str]) -> list[str]:
    return [sys.executable, "-m", "pytest", "-x", "-q", "-p", "no:cacheprovider", *tests]


def run_tests(work: Path, tests: list[str], timeout_s: float) -> tuple[bool, str]:
    """(passed, last lines of output); a run past its timeout counts as not passing."""
    env = dict(os.environ, PYTHONPATH=str(work / "host"), PYTHONDONTWRITEBYTECODE="1")
    env.pop("NULLSTEER_FIRMWARE", None)
    try:
        done = subprocess.run(pytest_cmd(tests), cwd=work, env=env, capture_output=True,
                              text=True, timeout=timeout_s, stdin=subprocess.DEVNULL)
    except subprocess.TimeoutExpired:
        return False, f"timed out after {timeout_s:.0f} s"
    lines = (done.stdout + done.stderr).strip().splitlines() or [""]
    failed = [ln for ln in lines if ln.startswith(("FAILED ", "ERROR "))]
    return done.returncode == 0, (failed[0] + " | " if failed else "") + lines[-1]


def check_copy(work: Path) -> None:
    """The copy, not the installed tree, must be what the tests import."""
    env = dict(os.environ, PYTHONPATH=str(work / "host"))
    done = subprocess.run([sys.executable, "-c", "import nullsteer; print(nullsteer.__file__)"],
                          cwd=work, env=env, capture_output=True, text=True, check=True)
    if not done.stdout.strip().startswith(str(work)):
        raise SystemExit(f"the copy is not the package under test: {done.stdout.strip()}")


def apply(work: Path, m: Mutant) -> str | None:
    """Apply ``m`` in the copy; returns the original text, or None if not applicable."""
    path = work / m.file
    if not path.is_file():
        return None
    text = path.read_text()
    if text.count(m.original) != 1:
        return None
    path.write_text(text.replace(m.original, m.replacement))
    return text


def run_one(work: Path, m: Mutant, timeout_s: float, confirm: bool) -> Outcome:
    path = work / m.file
    if not path.is_file():
        return Outcome(m, "not applicable", f"{m.file} does not exist")
    n = path.read_text().count(m.original)
    if n != 1:
        return Outcome(m, "not applicable",
                       "snippet not found" if n == 0 else f"snippet found {n} times")
    original = apply(work, m)
    assert original is not None
    t0 = time.monotonic()
    try:
        tests = [t for t in m.tests if (work / t).exists()]
        if tests:
            passed, tail = run_tests(work, tests, timeout_s)
            if not passed:
                return Outcome(m, "caught", tail, time.monotonic() - t0, tests)
        if confirm:
            passed, tail = run_tests(work, ["tests"], timeout_s * 4)
            if not passed:
                # a catch by a test the mutant was not aimed at must repeat: rerun the
                # failing test alone, so a test that is flaky under load scores nothing
                node = tail[len("FAILED "):].split(" ")[0] if tail.startswith("FAILED ") else ""
                again, tail2 = run_tests(work, [node], timeout_s) if node else (False, tail)
                if not again:
                    return Outcome(m, "caught", tail2, time.monotonic() - t0, ["whole suite"])
                tail = f"flaky catch not repeated: {node}"
        return Outcome(m, "survived", tail if tests or confirm else "no tests listed",
                       time.monotonic() - t0)
    finally:
        path.write_text(original)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="Mutation run over the curated mutant list.")
    ap.add_argument("--list", type=Path, default=DEFAULT_LIST, help="mutant list (TOML)")
    ap.add_argument("--only", nargs="+", metavar="ID", help="run only these mutants")
    ap.add_argument("--timeout", type=float, default=300.0,
                    help="seconds per test run of one mutant (the whole-suite run gets 4x)")
    ap.add_argument("--no-confirm", action="store_true",
                    help="do not rerun survivors against the whole suite")
    ap.add_argument("--min-score", type=float, default=90.0, help="required score, percent")
    ap.add_argument("--rev", help="mutate the tree of this git revision instead of the "
                                  "working tree (a before/after score)")
    args = ap.parse_args(argv)
    mutants = load_mutants(args.list)
    if args.only:
        unknown = set(args.only) - {m.id for m in mutants}
        if unknown:
            print(f"mutants: unknown id {', '.join(sorted(unknown))}", file=sys.stderr)
            return 2
        mutants = [m for m in mutants if m.id in args.only]
    # a stopped run still removes its copy (SIGTERM runs the finally below)
    signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))
    work = Path(tempfile.mkdtemp(prefix="nullsteer-mutants-"))
    started = time.monotonic()
    try:
        copy_tree(REPO, work, args.rev)
        check_copy(work)
        baseline = sorted({t for m in mutants for t in m.tests if (work / t).exists()})
        print(f"baseline: {len(baseline)} test files on the unmutated copy ...", flush=True)
        ok, tail = run_tests(work, baseline, args.timeout * 4)
        if not ok:
            print(f"baseline fails, no mutation score: {tail}", file=sys.stderr)
            return 1
        outcomes = []
        for i, m in enumerate(mutants, 1):
            print(f"[{i:2d}/{len(mutants)}] {m.id:36s} ", end="", flush=True)
            o = run_one(work, m, args.timeout, not args.no_confirm)
            outcomes.append(o)
            print(f"{o.status:15s} {o.seconds:6.1f} s  {o.detail[:160]}", flush=True)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return report(outcomes, args.min_score, time.monotonic() - started)


def report(outcomes: list[Outcome], min_score: float, seconds: float) -> int:
    applicable = [o for o in outcomes if o.status != "not applicable"]
    caught = [o for o in applicable if o.status == "caught"]
    survived = [o for o in applicable if o.status == "survived"]
    score = 100.0 * len(caught) / len(applicable) if applicable else 0.0
    print()
    print(f"mutation score: {len(caught)}/{len(applicable)} caught = {score:.1f} % "
          f"({len(outcomes) - len(applicable)} not applicable, {seconds / 60:.1f} min)")
    for o in survived:
        why = (f"accepted: {o.mutant.accept}" if o.mutant.accept
               else f"to be caught by: {o.mutant.owner}" if o.mutant.owner
               else "NOT JUSTIFIED")
        print(f"  survived {o.mutant.id} ({o.mutant.file}): {why}")
    for o in outcomes:
        if o.status == "not applicable":
            print(f"  not applicable {o.mutant.id} ({o.mutant.file}): {o.detail}")
    unjustified = [o for o in survived if not (o.mutant.accept or o.mutant.owner)]
    if score < min_score or unjustified:
        print(f"mutants: below {min_score:g} % or a survivor without a reason")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
