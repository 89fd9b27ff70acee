"""The README's key table and the bundled example inputs stay in step with the code."""

from pathlib import Path

import pytest

from pwsolid.config import load_input, schema_text
from pwsolid.resources import inputs_dir

ROOT = Path(__file__).resolve().parents[2]


def test_readme_key_table_is_current():
    readme = (ROOT / "README.md").read_text()
    start = readme.index("<!-- input-keys:start")
    start = readme.index("\n", start) + 1
    end = readme.index("<!-- input-keys:end -->")
    assert readme[start:end].strip() == schema_text(markdown=True).strip(), \
        "regenerate the table with `pwsolid input-keys --markdown`"


@pytest.mark.parametrize("path", sorted(inputs_dir().glob("*.toml")), ids=lambda p: p.name)
def test_every_example_input_is_valid(path):
    run = load_input(path)
    assert run.title and run.crystal.n_atoms >= 1
