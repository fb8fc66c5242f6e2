"""The notebooks run top to bottom on sample_runs/ (executed with nbclient, cwd notebooks/).

Each notebook reduces the 84-run demo campaign once (the second and third share a cache under the
system's temporary directory), so a notebook takes 5-20 s: the tests are marked slow.
"""

from __future__ import annotations

from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")
kernelspec = pytest.importorskip("jupyter_client.kernelspec")

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOKS = ROOT / "notebooks"
NAMES = (
    "01_reduce_step_by_step.ipynb",
    "02_compare_runs_and_configurations.ipynb",
    "03_investigate_a_flagged_run.ipynb",
)

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(
        not (ROOT / "sample_runs" / "campaign.toml").is_file(),
        reason="sample_runs/ holds no demo campaign (write it with tunnelred.demo)",
    ),
]


def _kernel_resolves() -> None:
    try:
        kernelspec.KernelSpecManager().get_kernel_spec("python3")
    except kernelspec.NoSuchKernel:
        pytest.fail(
            "no 'python3' Jupyter kernel; install one with: "
            "python -m ipykernel install --sys-prefix"
        )


@pytest.mark.parametrize("name", NAMES)
def test_committed_without_outputs(name):
    book = nbformat.read(NOTEBOOKS / name, as_version=4)
    nbformat.validate(book)
    for cell in book.cells:
        if cell.cell_type == "code":
            assert cell.outputs == [] and cell.execution_count is None


@pytest.mark.parametrize("name", NAMES)
def test_runs_top_to_bottom(name):
    _kernel_resolves()
    book = nbformat.read(NOTEBOOKS / name, as_version=4)
    client = nbclient.NotebookClient(
        book,
        timeout=600,
        kernel_name="python3",
        resources={"metadata": {"path": str(NOTEBOOKS)}},
    )
    client.execute()
    errors = [
        output
        for cell in book.cells
        if cell.cell_type == "code"
        for output in cell.outputs
        if output.output_type == "error"
    ]
    assert not errors
    # Every notebook ends by showing something: a figure or a table.
    last = [c for c in book.cells if c.cell_type == "code"][-1]
    assert last.outputs
