"""The README's Python examples run as written (from the project's root folder)."""
import os
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
BLOCKS = re.findall(r"```python\n(.*?)```", (ROOT / "README.md").read_text(), flags=re.S)


def test_readme_has_python_examples():
    assert len(BLOCKS) >= 2


@pytest.mark.parametrize("code", BLOCKS, ids=[f"block{i}" for i in range(len(BLOCKS))])
def test_readme_block_runs(code, capsys):
    cwd = os.getcwd()
    os.chdir(ROOT)
    try:
        exec(compile(code, "README.md", "exec"), {})
    finally:
        os.chdir(cwd)


def test_readme_shows_what_derive_prints():
    """The sample output in the README matches what the command prints today."""
    from symgain.design import derive
    from symgain.model.toml_file import load_model
    from symgain.emit.terminal import format_design

    text = format_design(derive(load_model(ROOT / "examples" / "greenhouse_cart.toml")))
    readme = (ROOT / "README.md").read_text()
    for line in ("K[F, p] = 2*m*w^2", "K[F, v] = -c + 3*m*w"):
        assert line in text and line in readme
