"""The notebooks run top to bottom on sample_runs/ (executed with nbclient, cwd notebooks/).

Notebook 04 plans a test for the demo model (tunnelred.plan_test) and reduces nothing.

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
    "04_plan_a_test.ipynb",
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
def test_first_code_cell_holds_the_parameters(name):
    # The papermill convention: the cell tagged "parameters" holds what a user changes; here
    # the campaign and output folders, and no other cell names the demo campaign.
    book = nbformat.read(NOTEBOOKS / name, as_version=4)
    code = [c for c in book.cells if c.cell_type == "code"]
    assert "parameters" in code[0].metadata.get("tags", [])
    namespace: dict = {}
    exec(code[0].source, namespace)  # plain assignments only
    assert namespace["CAMPAIGN"] == "../sample_runs" and namespace["OUT"] is None
    assert not [c for c in book.cells[1:] if "sample_runs" in c.source and c is not code[0]
                and c.cell_type == "code"]  # fmt: skip


def _execute(book) -> None:
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
    assert not errors, errors


@pytest.mark.parametrize("name", NAMES[1:])
def test_runs_on_another_campaign_through_its_parameters(name, reduced, tmp_path):
    # The small synthetic campaign of conftest (other speeds, spin ratios and faults), set in
    # the parameters cell as a user would.
    _kernel_resolves()
    campaign_dir, _ = reduced
    book = nbformat.read(NOTEBOOKS / name, as_version=4)
    cell = next(c for c in book.cells if "parameters" in c.metadata.get("tags", []))
    cell.source = f"CAMPAIGN = {str(campaign_dir)!r}\nOUT = {str(tmp_path / 'out')!r}"
    _execute(book)
    # Notebook 04 plans a test (no reduction): its plan is what it writes.
    written = "plan/plan.csv" if name.startswith("04") else "results.nc"
    assert (tmp_path / "out" / written).exists()


@pytest.mark.parametrize("name", NAMES)
def test_runs_top_to_bottom(name):
    _kernel_resolves()
    book = nbformat.read(NOTEBOOKS / name, as_version=4)
    _execute(book)
    # Every notebook ends by showing something: a figure or a table.
    last = [c for c in book.cells if c.cell_type == "code"][-1]
    assert last.outputs
