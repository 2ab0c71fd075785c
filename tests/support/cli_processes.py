"""CLI commands in child interpreters, for the reliability tests: several at once from one start signal,
and one that stalls inside its write transaction (to be killed there)."""

from __future__ import annotations

import json
import subprocess
import sys
import time
from pathlib import Path

#: Child interpreter: load everything, touch READY, wait for GO, then run each argv of COMMANDS through
#: ``workspace.cli.main`` and print one JSON list of {argv, code, out, err, t0, t1}.
DRIVER = r"""
import contextlib, io, json, os, sys, time
go, ready, commands = sys.argv[1], sys.argv[2], json.loads(sys.argv[3])
from workspace.cli import main
import importlib
for name in ("workspace.cli.runs", "workspace.cli.networks", "workspace.cli.params", "workspace.services.runs",
             "workspace.services.params", "workspace.services.networks", "workspace.services.store",
             "workspace.spectral", "workspace.spectral.methods", "workspace.spectral.quality",
             "workspace.io.delimited", "workspace.io.canonical", "networkx", "scipy.sparse.linalg",
             "alembic.command", "rich.console", "rich.table"):
    importlib.import_module(name)  # load everything before the start signal, so the writes overlap
open(ready, "w").close()
while not os.path.exists(go):
    time.sleep(0.005)
results = []
for argv in commands:
    out, err = io.StringIO(), io.StringIO()
    t0 = time.monotonic()  # CLOCK_MONOTONIC: one clock for all processes of the machine
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            code = main(argv)
        except SystemExit as exc:
            code = exc.code
    results.append({"argv": argv, "code": code, "out": out.getvalue(), "err": err.getvalue(),
                    "t0": t0, "t1": time.monotonic()})
print(json.dumps(results))
sys.stdout.flush()
os._exit(0)  # the harness's own exit (pyarrow can abort at interpreter exit; see test_reliability_bad_inputs)
"""

#: Child interpreter: wrap repo.put_encoded (the blob insert) so that its CALL-th call, once its row is written
#: inside the open write transaction, touches MARKER and stalls; then run the CLI with the given argv.
STALL_CHILD = r"""
import sys, time
marker, call, argv = sys.argv[1], int(sys.argv[2]), sys.argv[3:]
from workspace.store import repo
real = repo.put_encoded
count = [0]
def put_encoded(session, enc):
    h = real(session, enc)
    session.flush()
    count[0] += 1
    if count[0] == call:
        open(marker, "w").close()
        time.sleep(600)
    return h
repo.put_encoded = put_encoded
from workspace.cli import main
sys.exit(main(argv))
"""


def run_at_once(jobs: list[list[list[str]]], folder: Path, env: dict, *, ready_s: float = 180,
                finish_s: float = 400) -> list[dict]:
    """One child process per job (a list of CLI argvs run in turn), all started by one signal once
    every child has loaded; returns every command's result (see :data:`DRIVER`). Fails when a child
    dies early or exits non-zero, or after ``ready_s`` seconds of loading / ``finish_s`` of work; the
    children are killed on the way out."""
    go = folder / "go"
    ready = [folder / f"ready{i}" for i in range(len(jobs))]
    procs = [subprocess.Popen([sys.executable, "-c", DRIVER, str(go), str(flag), json.dumps(cmds)],
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
             for cmds, flag in zip(jobs, ready)]
    try:
        deadline = time.monotonic() + ready_s
        while not all(f.exists() for f in ready):
            assert all(p.poll() is None for p in procs), [p.communicate() for p in procs]
            assert time.monotonic() < deadline
            time.sleep(0.02)
        go.touch()
        results = []
        for p in procs:
            out, err = p.communicate(timeout=finish_s)
            assert p.returncode == 0, err
            results.append((json.loads(out), err))
    finally:
        for p in procs:
            if p.poll() is None:
                p.kill()
    return [dict(r, driver_err=err) for rs, err in results for r in rs]


def ctrl_c_as_at_a_terminal() -> None:
    """``preexec_fn`` of a child that a test interrupts with SIGINT, as Ctrl-C at a terminal would:
    SIGINT back to its default action. A shell starting a job in the background (``cmd &`` in a
    script) sets SIGINT to ignored, children inherit that, and Python then installs no
    KeyboardInterrupt handler: the command would rightly ignore the test's Ctrl-C."""
    import signal

    signal.signal(signal.SIGINT, signal.SIG_DFL)
