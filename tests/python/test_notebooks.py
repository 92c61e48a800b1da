"""The example notebooks, run by an independent executor and by `headroom run`.

Every notebook in notebooks/ is executed by nbclient against the installed Headroom kernelspec
and by `headroom run`; both must give the same results data (and the stored copy the same
again). What `headroom run` writes must pass nbformat's validator, nbconvert's HTML of it must
show the result tables, and the seal's digests must be what their published definition gives
when recomputed here with independent code (hashlib, the rfc8785 package).
"""

from __future__ import annotations

import hashlib
import html
import shutil
import subprocess
import sys
from pathlib import Path

import nbformat
import pytest
import rfc8785
from jupyter_client.kernelspec import KernelSpecManager
from nbclient import NotebookClient

from conftest import KERNEL_NAME, TIMEOUT

ROOT = Path(__file__).resolve().parents[2]
NOTEBOOKS = sorted((ROOT / "notebooks").glob("*.ipynb"))
RESULTS = "application/vnd.headroom.results+json"


def headroom() -> str:
    """The binary the installed kernelspec starts: the same build runs both ways."""
    return KernelSpecManager().get_kernel_spec(KERNEL_NAME).argv[0]


def results_data(nb) -> list[list[dict]]:
    """Per code cell, the results data of its display_data and execute_result outputs."""
    return [
        [
            o["data"][RESULTS]
            for o in cell.get("outputs", [])
            if o["output_type"] in ("display_data", "execute_result") and RESULTS in o["data"]
        ]
        for cell in nb.cells
        if cell.cell_type == "code"
    ]


def executed_by_nbclient(path: Path):
    nb = nbformat.read(path, as_version=4)
    for cell in nb.cells:
        if cell.cell_type == "code":
            cell.outputs = []
            cell.execution_count = None
    NotebookClient(nb, kernel_name=KERNEL_NAME, timeout=TIMEOUT, allow_errors=False).execute()
    return nb


def run_by_headroom(path: Path, out: Path, *extra: str) -> subprocess.CompletedProcess:
    return subprocess.run(
        [headroom(), "run", str(path), "-o", str(out), *extra],
        capture_output=True,
        text=True,
        timeout=TIMEOUT * 4,
    )


def test_there_are_example_notebooks():
    assert len(NOTEBOOKS) >= 3, NOTEBOOKS


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_nbclient_and_headroom_run_give_the_same_results(path: Path, tmp_path: Path):
    by_client = executed_by_nbclient(path)
    out = tmp_path / path.name
    r = run_by_headroom(path, out)
    assert r.returncode == 0, r.stdout + r.stderr
    by_headroom = nbformat.read(out, as_version=4)
    ours = results_data(by_headroom)
    assert any(ours), "no results data at all"
    assert results_data(by_client) == ours
    # The copy kept in the repository was produced the same way.
    assert results_data(nbformat.read(path, as_version=4)) == ours


def outputs_of(nb) -> list[list[dict]]:
    return [
        [dict(o) for o in cell.outputs] + [{"execution_count": cell.execution_count}]
        for cell in nb.cells
        if cell.cell_type == "code"
    ]


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_headroom_run_writes_exactly_the_outputs_the_kernel_sends(path: Path, tmp_path: Path):
    """Every output, in order, with all its data (charts included), and the execution counts."""
    by_client = executed_by_nbclient(path)
    out = tmp_path / path.name
    r = run_by_headroom(path, out)
    assert r.returncode == 0, r.stdout + r.stderr
    assert outputs_of(by_client) == outputs_of(nbformat.read(out, as_version=4))


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_what_headroom_run_writes_is_valid_nbformat(path: Path, tmp_path: Path):
    out = tmp_path / path.name
    r = run_by_headroom(path, out)
    assert r.returncode == 0, r.stdout + r.stderr
    nb = nbformat.read(out, as_version=4)
    nbformat.validate(nb)
    assert nb.metadata.kernelspec.name == KERNEL_NAME


def test_a_set_run_is_valid_nbformat_and_rewrites_the_given(tmp_path: Path):
    path = ROOT / "notebooks" / "sensor-node-battery.ipynb"
    out = tmp_path / "heavy.ipynb"
    r = run_by_headroom(path, out, "--set", "iload=9mA")
    # 9 mA from 7 A·h with Peukert 1.15 (20-hour rating): 20 h · (7 / (0.00906 · 20))^1.15
    # ≈ 1336 h, half of it usable: about 668 h, under the 720 h the check asks.
    assert r.returncode == 1, r.stdout + r.stderr
    assert "now fails" in r.stdout, r.stdout
    nb = nbformat.read(out, as_version=4)
    nbformat.validate(nb)
    assert nb.metadata.headroom.overrides == {"iload": "9mA"}
    rail = next(c for c in nb.cells if c.get("id") == "rail")
    assert "given iload = 9mA" in rail.source


def test_nbconvert_html_shows_the_result_tables(tmp_path: Path):
    path = ROOT / "notebooks" / "led-indicator-panel.ipynb"
    subprocess.run(
        [sys.executable, "-m", "nbconvert", "--to", "html", "--output-dir", str(tmp_path),
         str(path)],
        check=True,
        capture_output=True,
        timeout=TIMEOUT * 4,
    )
    page = (tmp_path / "led-indicator-panel.html").read_text(encoding="utf-8")
    assert "<table" in page
    stored = nbformat.read(path, as_version=4)
    rows = [v for cell in results_data(stored) for data in cell for v in data["values"]]
    checks = [c for cell in results_data(stored) for data in cell for c in data["checks"]]
    assert rows and checks
    for v in rows:
        assert html.escape(v["name"], quote=False) in page, v["name"]
        number = v["text"].split(" ")[0]
        assert number in page, (v["name"], number)
    for c in checks:
        assert html.escape(c["text"], quote=False) in page, c["text"]


def canonical_sources(nb) -> bytes:
    """The canonical source text as its definition states it: per cell, the cell type, the
    UTF-8 length of the source and the source, each followed by a newline."""
    text = ""
    for cell in nb.cells:
        source = cell.source if isinstance(cell.source, str) else "".join(cell.source)
        text += f"{cell.cell_type}\n{len(source.encode('utf-8'))}\n{source}\n"
    return text.encode("utf-8")


def test_seal_digests_recompute_independently(tmp_path: Path):
    nb_path = tmp_path / "motor.ipynb"
    shutil.copy(ROOT / "notebooks" / "motor-driver-logic.ipynb", nb_path)
    r = subprocess.run(
        [headroom(), "seal", str(nb_path), "--reviewer", "P. Tester"],
        capture_output=True,
        text=True,
        timeout=TIMEOUT * 4,
    )
    assert r.returncode == 0, r.stdout + r.stderr
    nb = nbformat.read(nb_path, as_version=4)
    seal = nb.metadata.headroom.seal
    assert seal.reviewer == "P. Tester"
    assert seal.sources_sha256 == hashlib.sha256(canonical_sources(nb)).hexdigest()
    # The results digest: RFC 8785 canonical JSON of the per-cell results data.
    expected = hashlib.sha256(rfc8785.dumps(results_data(nb))).hexdigest()
    assert seal.results_sha256 == expected
    r = subprocess.run([headroom(), "verify", str(nb_path)], capture_output=True, text=True,
                       timeout=TIMEOUT * 4)
    assert r.returncode == 0, r.stdout + r.stderr
