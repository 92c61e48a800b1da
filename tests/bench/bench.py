"""Headroom beside the reference Python kernel (ipykernel with pint), on one machine in one run.

Driven by tests/bench/run, which builds what is needed, installs both kernelspecs into a
throwaway Jupyter data directory and calls this with the paths of the release binaries. Every
figure is the median of repeated runs. It prints a Markdown table and writes it to
tests/bench/RESULTS.md. It only measures and reports: no figure fails the run.
"""

import argparse
import datetime
import json
import os
import platform
import queue
import re
import secrets
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import dataclass, field
from importlib import metadata
from pathlib import Path

import zmq
from jupyter_client import BlockingKernelClient
from jupyter_client.connect import write_connection_file
from jupyter_client.kernelspec import KernelSpecManager

ROOT = Path(__file__).resolve().parents[2]
BENCH = ROOT / "tests" / "bench"
CELLS = BENCH / "cells"
PYTHON = BENCH / "python"
OUT = BENCH / "out"

HEADROOM_KERNEL = "headroom"
PYTHON_KERNEL = "bench-python"

# A sweep is run at 10⁶ points only when a smaller run says it takes at most this long.
SWEEP_POINTS = 1_000_000
# Round trips alternate between the two kernels in blocks of this many executions.
ROUND_TRIP_BLOCK = 10
SWEEP_BUDGET_S = 120.0
SWEEP_RANGE = "7 V .. 16 V"
# One-line cells each kernel runs to warm up before the round trips are timed.
TRIVIAL_WARMUP = 5
# Cells beside the reference cell in the in-process figure of a large worksheet.
BESIDE_CELLS = 200
# µs of sleep before each run in the in-process figure of an evaluation after a wait.
PAUSE_MICROS = 1000

# Client sockets reconnect every millisecond, so the start-up figure measures the kernel and
# not the client's retry timer (libzmq's default reconnect interval is 100 ms).
CONTEXT = zmq.Context()
CONTEXT.setsockopt(zmq.RECONNECT_IVL, 1)
CONTEXT.setsockopt(zmq.RECONNECT_IVL_MAX, 1)


def log(text):
    print(text, file=sys.stderr, flush=True)


def median(xs):
    return statistics.median(xs) if xs else None


# ---------------------------------------------------------------------------------------------
# Kernels


class Kernel:
    """One kernel process from its kernelspec, with a client connected before it starts."""

    def __init__(self, name, workdir):
        self.name = name
        self.spec = KernelSpecManager().get_kernel_spec(name)
        self.connection_file = Path(workdir) / f"{name}-{secrets.token_hex(4)}.json"
        write_connection_file(
            fname=str(self.connection_file),
            ip="127.0.0.1",
            transport="tcp",
            key=secrets.token_hex(16).encode(),
            kernel_name=name,
        )
        self.client = BlockingKernelClient(context=CONTEXT)
        self.client.load_connection_file(str(self.connection_file))
        self.client.start_channels(shell=True, iopub=True, stdin=False, hb=False, control=True)
        self.proc = None
        self.last_reply_metadata = {}
        self.stderr = open(Path(workdir) / f"{name}.log", "ab")

    def start(self, timeout=60.0):
        """Spawns the kernel and waits for its first kernel_info reply; returns the seconds
        from the spawn to the reply."""
        argv = [a.replace("{connection_file}", str(self.connection_file)) for a in self.spec.argv]
        env = dict(os.environ, **(self.spec.env or {}))
        t0 = time.perf_counter()
        self.proc = subprocess.Popen(
            argv, env=env, stdin=subprocess.DEVNULL, stdout=self.stderr, stderr=self.stderr
        )
        msg_id = self.client.kernel_info()
        self.wait_shell(msg_id, timeout)
        return time.perf_counter() - t0

    def wait_iopub(self, timeout=30.0):
        """Sends kernel_info requests until the status messages of one arrive on iopub. A reply
        on shell does not mean the iopub subscription has reached the kernel yet, and what a
        kernel publishes before that is lost (as jupyter_client's own wait for a kernel
        checks)."""
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            msg_id = self.client.kernel_info()
            self.wait_shell(msg_id, timeout)
            try:
                while True:
                    m = self.client.get_iopub_msg(timeout=0.2)
                    if m["parent_header"].get("msg_id") == msg_id:
                        return
            except queue.Empty:
                continue
        raise TimeoutError(f"{self.name}: iopub not connected within {timeout} s")

    def wait_shell(self, msg_id, timeout):
        deadline = time.monotonic() + timeout
        while True:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError(f"{self.name}: no reply to {msg_id} within {timeout} s")
            msg = self.client.get_shell_msg(timeout=left)
            if msg["parent_header"].get("msg_id") == msg_id:
                return msg

    def execute(self, code, cell_id, timeout=300.0):
        """Runs one cell; returns (seconds from the request to `idle` on iopub, stream text)."""
        c = self.client
        msg = c.session.msg(
            "execute_request",
            {
                "code": code,
                "silent": False,
                "store_history": True,
                "user_expressions": {},
                "allow_stdin": False,
                "stop_on_error": True,
            },
            metadata={"cellId": cell_id},
        )
        msg_id = msg["header"]["msg_id"]
        t0 = time.perf_counter()
        c.shell_channel.send(msg)
        streams, error = [], None
        deadline = time.monotonic() + timeout
        while True:
            m = c.get_iopub_msg(timeout=max(deadline - time.monotonic(), 0.001))
            if m["parent_header"].get("msg_id") != msg_id:
                continue
            kind = m["msg_type"]
            if kind == "stream":
                streams.append(m["content"]["text"])
            elif kind == "error":
                error = f"{m['content']['ename']}: {m['content']['evalue']}"
            elif kind == "status" and m["content"]["execution_state"] == "idle":
                break
        elapsed = time.perf_counter() - t0
        reply = self.wait_shell(msg_id, timeout)
        if error or reply["content"]["status"] != "ok":
            raise RuntimeError(f"{self.name}: cell {cell_id} failed: {error or reply['content']}")
        self.last_reply_metadata = reply.get("metadata") or {}
        return elapsed, "".join(streams)

    def rss_bytes(self):
        """VmRSS of the kernel process (from /proc/PID/status)."""
        status = Path(f"/proc/{self.proc.pid}/status").read_text()
        kb = re.search(r"^VmRSS:\s+(\d+) kB", status, re.M)
        return int(kb.group(1)) * 1024

    def stop(self):
        if self.proc and self.proc.poll() is None:
            try:
                self.client.shutdown()
                self.proc.wait(timeout=10)
            except (subprocess.TimeoutExpired, zmq.ZMQError):
                self.proc.kill()
                self.proc.wait()
        self.client.stop_channels()
        self.stderr.close()


# ---------------------------------------------------------------------------------------------
# Figures


@dataclass
class Row:
    figure: str
    unit: str
    headroom: float | None
    reference: float | None
    reference_name: str
    goal: str
    limit: float  # the ratio headroom/reference must be at most this (or, with `below`, the value)
    note: str = ""
    below: float | None = None  # an absolute bound on the Headroom figure, in `unit`
    extra: list = field(default_factory=list)

    def ratio(self):
        if self.headroom is None or not self.reference:
            return None
        return self.headroom / self.reference

    def met(self):
        r = self.ratio()
        if r is None:
            return None
        ok = r <= self.limit
        if self.below is not None:
            ok = ok and self.headroom < self.below
        return ok


def start_and_memory(workdir, reps):
    """Figures 1 and 6: spawn to first kernel_info reply, and VmRSS one second later."""
    times = {HEADROOM_KERNEL: [], PYTHON_KERNEL: []}
    rss = {HEADROOM_KERNEL: [], PYTHON_KERNEL: []}
    for _ in range(reps):
        for name in (HEADROOM_KERNEL, PYTHON_KERNEL):  # interleaved: both see the same machine
            k = Kernel(name, workdir)
            try:
                times[name].append(k.start())
                time.sleep(1.0)
                rss[name].append(k.rss_bytes())
            finally:
                k.stop()
    return times, rss


def round_trips(workdir, reps):
    """Figures 2 and 3 (round trips, and each kernel's compute time): one kernel of each, both
    warmed, measured in alternating blocks so that both see the machine in the same state
    (its speed drifts over a run)."""
    reference_hrw = (CELLS / "reference.hrw").read_text()
    setup_py = (PYTHON / "setup_cell.py").read_text()
    reference_py = (PYTHON / "reference_cell.py").read_text()
    cells = {HEADROOM_KERNEL: reference_hrw, PYTHON_KERNEL: reference_py}
    result = {name: {"trivial": [], "cell": [], "compute": []} for name in cells}
    kernels = {}
    try:
        for name in cells:
            k = Kernel(name, workdir)
            kernels[name] = k
            k.start()
            k.wait_iopub()
            if name == PYTHON_KERNEL:
                k.execute(setup_py, "setup")
            for _ in range(TRIVIAL_WARMUP):
                k.execute("1 + 1", "trivial")
            for _ in range(3):
                k.execute(cells[name], "reference")

        def block(kind, count):
            for name, k in kernels.items():
                r = result[name]
                for _ in range(count):
                    if kind == "trivial":
                        t, _ = k.execute("1 + 1", "trivial")
                        r["trivial"].append(t)
                        continue
                    t, out = k.execute(cells[name], "reference")
                    r["cell"].append(t)
                    m = re.search(r"bench-compute-seconds (\S+)", out)
                    if m:
                        r["compute"].append(float(m.group(1)))
                    # Headroom's evaluation time, from its timer around evaluation (after the
                    # parse, as Python's timer starts after the cell is compiled).
                    hr = k.last_reply_metadata.get("headroom", {})
                    if "evaluation_seconds" in hr:
                        r["compute"].append(float(hr["evaluation_seconds"]))

        for kind in ("trivial", "cell"):
            total = reps[kind]
            size = max(1, min(ROUND_TRIP_BLOCK, total))
            done = 0
            while done < total:
                n = min(size, total - done)
                block(kind, n)
                done += n
    finally:
        for k in kernels.values():
            k.stop()
    return result


def figures_bin(figures, *args, timeout=None):
    out = subprocess.run(
        [figures, *map(str, args)], capture_output=True, text=True, timeout=timeout, check=False
    )
    if out.returncode != 0:
        raise RuntimeError(f"figures {' '.join(map(str, args))}: {out.stderr.strip()}")
    return json.loads(out.stdout)


def sweep_file(chain, points):
    path = OUT / f"{chain}-sweep-{points}.hrw"
    text = (CELLS / f"{chain}.hrw").read_text()
    path.write_text(f"{text}sweep vin over {SWEEP_RANGE} steps {points}: y10\n")
    return path


def headroom_sweep(figures, chain, probe_points):
    """ns per point of a 10⁶-point sweep of `chain`, or an estimate from `probe_points` when the
    full sweep would take longer than the budget. Returns (ns per point, points, note)."""
    probe = figures_bin(figures, "execute", sweep_file(chain, probe_points), 3)
    per_point = probe["median_ns"] / probe_points
    estimate_s = per_point * SWEEP_POINTS / 1e9
    if estimate_s > SWEEP_BUDGET_S:
        note = (
            f"10⁶ points skipped: {probe_points} points took {probe['median_ns'] / 1e6:.0f} ms, "
            f"so 10⁶ would take about {estimate_s:.0f} s; figure from {probe_points} points"
        )
        return per_point, probe_points, note
    reps = max(1, min(5, int(30.0 / max(estimate_s, 1e-3))))
    full = figures_bin(
        figures, "execute", sweep_file(chain, SWEEP_POINTS), reps, timeout=estimate_s * reps * 3 + 60
    )
    return full["median_ns"] / SWEEP_POINTS, SWEEP_POINTS, f"{reps} runs"


def pint_sweep(venv_python, points, reps):
    out = subprocess.run(
        [venv_python, PYTHON / "sweep_chain.py", str(points), str(reps)],
        capture_output=True, text=True, check=True,
    )
    return json.loads(out.stdout)["median_ns"] / points


def largest_notebook():
    """The largest example notebook (bytes on disk) that has a Python twin in
    tests/bench/reference/, and a note when a larger one has none yet."""
    notebooks = sorted((ROOT / "notebooks").glob("*.ipynb"), key=lambda p: p.stat().st_size,
                       reverse=True)
    note = ""
    for nb in notebooks:
        twin = BENCH / "reference" / nb.name
        if twin.exists():
            return nb, twin, note
        note += f"{nb.name} (larger) has no Python twin yet; "
    return None, None, note + "no example notebook with a Python twin"


def rerun(venv_bin, headroom, reps):
    """Figure 5: `headroom run NOTEBOOK --set …` against papermill on ipykernel."""
    nb, twin, note = largest_notebook()
    if nb is None:
        return None, None, note
    bench_meta = json.loads(twin.read_text())["metadata"]["bench"]
    set_arg = bench_meta["headroom_set"]
    params = bench_meta["papermill_parameters"]
    hr_cmd = [headroom, "run", nb, "--set", set_arg, "-o", OUT / f"headroom-{nb.name}"]
    pm_cmd = [venv_bin / "papermill", twin, OUT / f"papermill-{twin.name}", "-k", PYTHON_KERNEL,
              "--no-progress-bar", "--log-level", "WARNING"]
    for k, v in params.items():
        pm_cmd += ["-p", k, str(v)]

    def timed(cmd, ok_codes):
        t0 = time.perf_counter()
        p = subprocess.run(cmd, capture_output=True, text=True, check=False)
        dt = time.perf_counter() - t0
        if p.returncode not in ok_codes:
            raise RuntimeError(f"{' '.join(map(str, cmd))} exited {p.returncode}: {p.stderr[-2000:]}")
        return dt

    hr, pm = [], []
    timed(hr_cmd, (0, 1))  # warm the page cache for both, as a rerun on a desk would find it
    timed(pm_cmd, (0,))
    for i in range(max(reps["papermill"], reps["headroom"])):
        if i < reps["headroom"]:
            hr.append(timed(hr_cmd, (0, 1)))  # 1: a check fails under the override; still a run
        if i < reps["papermill"]:
            pm.append(timed(pm_cmd, (0,)))
    note = (f"{note}`headroom run notebooks/{nb.name} --set \"{set_arg}\" -o OUT` against "
            f"`papermill` of tests/bench/reference/{twin.name} with "
            + ", ".join(f"`-p {k} {v}`" for k, v in params.items()))
    return median(hr), median(pm), note


# ---------------------------------------------------------------------------------------------
# The table


def machine():
    cpu = "unknown CPU"
    for line in Path("/proc/cpuinfo").read_text().splitlines():
        if line.startswith("model name"):
            cpu = line.split(":", 1)[1].strip()
            break
    mem = re.search(r"^MemTotal:\s+(\d+) kB", Path("/proc/meminfo").read_text(), re.M)
    gib = int(mem.group(1)) / 1024 / 1024 if mem else float("nan")
    return f"{cpu}, {os.cpu_count()} cores, {gib:.1f} GiB memory, {platform.system()} {platform.release()}"


def revision():
    try:
        rev = subprocess.run(["git", "-C", ROOT, "rev-parse", "--short", "HEAD"],
                             capture_output=True, text=True, check=True).stdout.strip()
        # The results file is this benchmark's own output: a run after a run leaves it
        # changed, which says nothing about the code measured.
        dirty = subprocess.run(["git", "-C", ROOT, "status", "--porcelain", "--untracked-files=no",
                                "--", ".", ":(exclude)tests/bench/RESULTS.md"],
                               capture_output=True, text=True, check=True).stdout.strip()
        return rev + (" with uncommitted changes" if dirty else "")
    except (OSError, subprocess.CalledProcessError):
        return "unknown revision"


def fmt(x, unit):
    if x is None:
        return "—"
    if unit == "s":
        if x < 1e-3:
            return f"{x * 1e6:.0f} µs"
        if x < 1:
            return f"{x * 1e3:.3g} ms"
        return f"{x:.3g} s"
    if unit == "ns/point":
        return f"{x:,.0f} ns/point" if x >= 1000 else f"{x:.3g} ns/point"
    if unit == "MiB":
        return f"{x / 2**20:.1f} MiB"
    return f"{x:.3g} {unit}"


def fmt_ratio(r):
    if r is None:
        return "—"
    if r >= 1:
        return f"{r:.2f}×"
    return f"1/{1 / r:.1f}"


def table(rows):
    lines = [
        "| figure | Headroom | reference | ratio | goal | met? |",
        "|---|---|---|---|---|---|",
    ]
    for r in rows:
        met = r.met()
        lines.append(
            f"| {r.figure} | {fmt(r.headroom, r.unit)} | {fmt(r.reference, r.unit)} "
            f"({r.reference_name}) | {fmt_ratio(r.ratio())} | {r.goal} | "
            f"{'—' if met is None else ('yes' if met else '**no**')} |"
        )
    return "\n".join(lines)


def versions():
    names = ["ipykernel", "jupyter_client", "pyzmq", "pint", "numpy", "papermill"]
    return ", ".join(f"{n} {metadata.version(n)}" for n in names)


def main():
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--headroom", required=True, help="the release headroom binary")
    ap.add_argument("--figures", required=True, help="the release `figures` bench binary")
    ap.add_argument("--quick", action="store_true", help="fewer repetitions (a smoke run)")
    args = ap.parse_args()
    OUT.mkdir(parents=True, exist_ok=True)
    venv_bin = Path(sys.executable).parent
    headroom = Path(args.headroom).resolve()
    figures = str(Path(args.figures).resolve())
    q = args.quick
    reps = {
        "start": 2 if q else 7,
        "trivial": 20 if q else 200,
        "cell": 5 if q else 50,
        "compute": 50 if q else 500,
        "headroom_run": 3 if q else 15,
        "papermill": 1 if q else 5,
        "pint_sweep": 2 if q else 5,
    }
    started = time.monotonic()
    rows = []
    workdir = tempfile.mkdtemp(prefix="headroom-bench-")
    try:
        log("== 1, 6: kernel start and idle memory")
        starts, rss = start_and_memory(workdir, reps["start"])
        log("== 2, 3: execute round trips")
        rt = round_trips(workdir, {"trivial": reps["trivial"], "cell": reps["cell"]})
    finally:
        shutil.rmtree(workdir, ignore_errors=True)
    log("== 3: reference cell, compute in-process (for comparison)")
    hr_inproc = figures_bin(figures, "execute", CELLS / "reference.hrw", reps["compute"])
    # The same cell as one of a large worksheet: a run must not cost much more for the
    # cells it does not change.
    hr_beside = figures_bin(figures, "beside", BESIDE_CELLS, CELLS / "reference.hrw",
                            reps["compute"])
    # And after a pause before each run, as the kernel waits between requests.
    hr_paused = figures_bin(figures, "paused", PAUSE_MICROS, CELLS / "reference.hrw",
                            reps["compute"])
    log("== 4: sweeps")
    nominal_ns, nominal_points, nominal_note = headroom_sweep(figures, "chain", 10_000)
    bands_ns, bands_points, bands_note = headroom_sweep(figures, "chain-bands", 1_000)
    pint_ns = pint_sweep(sys.executable, SWEEP_POINTS, reps["pint_sweep"])
    loop_ns = figures_bin(figures, "loop", SWEEP_POINTS, 11)["median_ns"] / SWEEP_POINTS
    log("== 5: headless notebook rerun")
    hr_run, pm_run, run_note = rerun(
        venv_bin, headroom, {"headroom": reps["headroom_run"], "papermill": reps["papermill"]}
    )

    H, P = HEADROOM_KERNEL, PYTHON_KERNEL
    ipk = "ipykernel"
    rows += [
        Row("1. kernel start → first kernel_info reply", "s", median(starts[H]), median(starts[P]),
            ipk, "≤ 1/20", 1 / 20),
        Row("2. trivial execute round trip (`1 + 1`, request → idle)", "s",
            median(rt[H]["trivial"]), median(rt[P]["trivial"]), ipk, "≤ 1/8", 1 / 8),
        Row("3a. reference cell, round trip", "s", median(rt[H]["cell"]), median(rt[P]["cell"]),
            f"{ipk} + pint", "≤ 1/20", 1 / 20),
        Row("3b. reference cell, compute inside the kernel ¹", "s", median(rt[H]["compute"]),
            median(rt[P]["compute"]), "pint", "≤ 1/50", 1 / 50),
        Row(f"4a. sweep of the ten-definition chain, nominal ({nominal_points:,} points) ²",
            "ns/point", nominal_ns, pint_ns, "pint + NumPy", "< 50 ns/point and ≤ 1/2", 1 / 2,
            below=50.0),
        Row("4b. the same sweep against a hand-written Rust loop", "ns/point", nominal_ns, loop_ns,
            "Rust loop", "≤ 10×", 10.0),
        Row(f"4c. the chain with worst-case bands ({bands_points:,} points) against 4a", "ns/point",
            bands_ns, nominal_ns, "Headroom nominal", "≤ 20×", 20.0),
        Row("5. headless rerun of the largest example notebook ³", "s", hr_run, pm_run,
            "papermill + ipykernel", "≤ 1/50", 1 / 50),
        Row("6. resident memory of an idle kernel (VmRSS) ⁴", "MiB", median(rss[H]), median(rss[P]),
            ipk, "≤ 1/4", 1 / 4),
    ]
    elapsed = time.monotonic() - started
    now = datetime.datetime.now(datetime.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    notes = [
        "Medians of repeated runs: "
        f"{reps['start']} kernel starts each (interleaved), {reps['trivial']} trivial and "
        f"{reps['cell']} reference-cell executions per kernel after warm-up (the two kernels "
        f"alternating in blocks of {ROUND_TRIP_BLOCK}), "
        f"{reps['compute']} in-process evaluations, {reps['headroom_run']} `headroom run` and "
        f"{reps['papermill']} papermill reruns. Ratio = Headroom ÷ reference; smaller is better.",
        "Client: jupyter_client with every socket's reconnect interval at 1 ms, connected "
        "before the kernel is spawned; start-up is timed from the spawn to the reply.",
        "¹ Both inside their kernel, during the reference-cell round trips: Python "
        "`time.perf_counter()` around the cell's own code inside the cell "
        "(tests/bench/python/reference_cell.py), printed; Headroom's timer on its shell "
        "thread, which evaluates the cell, from the parsed cell to its report (`Worksheet::execute_prepared`; the parse "
        "stays outside, as the compiling of the Python cell does), sent in the execute_reply's metadata "
        "(`headroom.evaluation_seconds`). For comparison, the same evaluation in-process in a "
        "tight loop (the `figures` bench binary, worksheet-lang/benches/figures.rs, with the "
        f"kernel's allocator): {fmt(hr_inproc['median_ns'] / 1e9, 's')} on a fresh worksheet "
        "(as in the kernel, whose worksheet holds two cells: the benchmark sends cell ids), "
        f"{fmt(hr_beside['median_ns'] / 1e9, 's')} in one that also holds {BESIDE_CELLS} "
        f"one-line cells, {fmt(hr_paused['median_ns'] / 1e9, 's')} with a "
        f"{PAUSE_MICROS // 1000} ms sleep before each run (see README, \"Speed\").",
        f"² tests/bench/cells/chain.hrw with `sweep vin over {SWEEP_RANGE} steps N: y10`, whole "
        "cell time ÷ N, in-process. pint + NumPy: tests/bench/python/sweep_chain.py, the chain "
        "on arrays. Rust loop: worksheet-lang/benches/shared/chain.rs. "
        f"Nominal: {nominal_note}. Bands (tests/bench/cells/chain-bands.hrw): {bands_note}.",
        f"³ {run_note}. Both timed from spawn to exit; the Headroom run also draws the sweep "
        "chart (SVG and PNG), the Python twin prints its sweep as a table.",
        "⁴ VmRSS from /proc/PID/status one second after the first kernel_info reply.",
    ]
    md = "\n".join([
        "# Benchmark: Headroom beside ipykernel + pint",
        "",
        f"Measured {now} on {machine()}; Headroom {revision()}; "
        f"Python {platform.python_version()} with {versions()}. "
        f"The measurements took {elapsed:.0f} s"
        + (" (a `--quick` run: few repetitions, rough figures)." if q else "."),
        "",
        table(rows),
        "",
        *[f"{n}\n" for n in notes],
    ])
    print(md)
    (BENCH / "RESULTS.md").write_text(md)


if __name__ == "__main__":
    main()
