"""Hostile inputs against the command line: every one must be refused (exit 2, a message, no
traceback) quickly and in little memory. Prints, per case, the exit code, wall time and peak memory
of the child process (its maximum resident set size) and the first line of its message.

    python benchmarks/worst_inputs.py

The figures are this machine's; the claim to check is that each refusal ends within a few seconds
and a few hundred MB, whatever the input's size.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

SPEC = "format_version: 1\nname: worst\nlayout: {corridor: {length: 3}}\ncue: {values: 2}\n"


def cases(folder: Path) -> list[tuple[str, list[str], dict[str, str]]]:
    """(name, taskgen arguments, extra environment) of each hostile input."""
    def spec(name: str, text: str) -> str:
        path = folder / name
        path.write_text(text)
        return str(path)

    fifo = folder / "pipe.yaml"
    os.mkfifo(fifo)
    lantern = str(Path(__file__).resolve().parents[1] / "specs" / "lantern-hall.yaml")
    return [
        ("5 MB spec", ["check", spec("big.yaml", SPEC + "description: '" + "x" * 5_000_000 + "'\n")], {}),
        ("FIFO as spec", ["check", str(fifo)], {}),
        ("/dev/zero as spec", ["check", "/dev/zero"], {}),
        ("nesting 100,000 deep", ["check", spec("deep.yaml", SPEC + "description: " + "[" * 100_000 + "]" * 100_000
                                                 + "\n")], {}),
        ("alias bomb", ["check", spec("bomb.yaml", SPEC + "a: &a [1, 1, 1, 1, 1, 1, 1, 1, 1]\n" + "".join(
            f"{c}: &{c} [*{p}, *{p}, *{p}, *{p}, *{p}, *{p}, *{p}, *{p}, *{p}]\n"
            for p, c in zip("abcdefgh", "bcdefghi")))], {}),
        ("integer 10^100", ["check", spec("huge.yaml", SPEC.replace("length: 3", "length: {range: [0, 1"
                                                                     + "0" * 100 + "]}"))], {}),
        ("step limit 900,000", ["check", spec("long.yaml", SPEC + "episode: {max_steps: 900000}\n")], {}),
        ("31×31 field, --paths 100,000", ["check", spec("field.yaml", "format_version: 1\nname: f\nlayout: {field: "
                                                        "{width: 31, height: 31}}\n"), "--paths", "100000"], {}),
        ("corridor of 10^9 cells", ["check", spec("cells.yaml", SPEC.replace("length: 3", "length: 1000000000"))], {}),
        ("batch of 10^7", ["bench", lantern, "--num-envs", "10000000"], {}),
        ("sweep of 10^7 values", ["variants", lantern, "--out", str(folder / "s"), "--sweep",
                                  "layout.corridor.length=0:10000000"], {}),
        ("TASKGEN_MAX_WORK=inf", ["check", lantern], {"TASKGEN_MAX_WORK": "inf"}),
        ("--workers 1000", ["variants", lantern, "--out", str(folder / "w"), "--workers", "1000"], {}),
    ]


def run(args: list[str], extra: dict[str, str]) -> tuple[int, float, float, str]:
    """Exit code, seconds, this child's peak resident memory in MB (os.wait4's rusage) and its last line."""
    with tempfile.TemporaryFile("w+") as log:
        start = time.perf_counter()
        child = subprocess.Popen([sys.executable, "-m", "taskgen.cli", *args], stdout=log, stderr=subprocess.STDOUT,
                                 env={**os.environ, **extra})
        _, status, usage = os.wait4(child.pid, 0)
        seconds = time.perf_counter() - start
        child.returncode = os.waitstatus_to_exitcode(status)
        log.seek(0)
        lines = log.read().strip().splitlines()
    return child.returncode, seconds, usage.ru_maxrss / 1024, lines[-1] if lines else ""   # kB → MB (Linux)


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        print("| input | exit | seconds | peak MB | message |\n|---|---:|---:|---:|---|")
        for name, args, extra in cases(Path(tmp)):
            code, seconds, peak, line = run(args, extra)
            print(f"| {name} | {code} | {seconds:.2f} | {peak:.0f} | {line[:90]} |")


if __name__ == "__main__":
    main()
