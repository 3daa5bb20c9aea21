"""The README's Python example, run as written (the first ```python block of its "## Python"
section) from the repository root with the installed package; then its results are checked:
scipy's brentq (from PyPI) calibrated the diffusivity to the target ice edge, and numpy's
eigenvalues of the model's Jacobian give the equilibrium file's leading eigenvalue."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]


def readme_example() -> str:
    text = (REPO / "README.md").read_text()
    section = text.split("\n## Python\n", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```python\n(.*?)```", section, flags=re.S)
    assert blocks, "README has no ```python block in its Python section"
    return blocks[0]


def test_readme_python_example_runs_as_written(monkeypatch, capsys):
    monkeypatch.chdir(REPO)
    namespace: dict = {"__name__": "__readme__"}
    exec(compile(readme_example(), "README.md (Python section)", "exec"), namespace)
    out = capsys.readouterr().out
    assert "puts the ice edge at 70.0" in out, out
    # brentq stops within xtol = 1e-4 W m-2 K-1 of the root; the ice edge moves about 100
    # degrees per W m-2 K-1 there (51.6 at D = 0.3, 68.6 at 0.5), so 0.05 degrees is ample.
    assert abs(namespace["ice_edge"](namespace["D"]) - 70.0) < 0.05
    rates, ds = namespace["rates"], namespace["ds"]
    lead = float(ds.attrs["leading_eigenvalue"])
    assert lead < 0
    # Two eigen-solvers on the same matrix agree to rounding times its conditioning.
    assert rates.real.max() == pytest.approx(lead, rel=1e-8)
