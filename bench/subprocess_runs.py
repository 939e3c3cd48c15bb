"""Timing commands as fresh subprocesses, interleaved, for the start-up benchmarks (cli_start, print_document)."""

from __future__ import annotations

import statistics
import subprocess
import sys
import time
from typing import Optional
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PYTHON = sys.executable
DOTLEDGER = [PYTHON, "-c", "from service.console import main; main()"]  # what the `dotledger` script runs


def timed(command: list[str], env: dict) -> float:
    """Wall time of one run of ``command`` (from the checkout); fails on a non-zero exit, showing its output's end."""
    started = time.perf_counter()
    done = subprocess.run(command, env=env, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.STDOUT)
    elapsed = time.perf_counter() - started
    if done.returncode != 0:
        tail = done.stdout.decode("utf-8", "replace")[-4000:]
        raise RuntimeError(f"{' '.join(command)} exited with status {done.returncode}; its last output:\n{tail}")
    return elapsed


def interleaved_medians(runs: dict[str, list[str]], env: Optional[dict], repeats: int, *, warm: bool = True,
                        envs: Optional[dict[str, dict]] = None) -> dict[str, float]:
    """Run each command once to warm the caches (unless not ``warm``), then ``repeats`` rounds of all of them in
    turn (so that a change in the machine's load hits all alike); the median wall time of each, printed and
    returned. ``env`` is the environment of every command, unless ``envs`` gives one per name."""
    def env_of(name: str) -> dict:
        return envs[name] if envs is not None else env

    if warm:
        for name, command in runs.items():
            timed(command, env_of(name))
    times: dict[str, list[float]] = {name: [] for name in runs}
    for _ in range(repeats):
        for name, command in runs.items():
            times[name].append(timed(command, env_of(name)))
    medians = {name: statistics.median(values) for name, values in times.items()}
    width = max(len(name) for name in runs)
    for name, median in medians.items():
        print(f"{name:<{width}}  median {median * 1000:7.0f} ms over {repeats} runs")
    return medians
