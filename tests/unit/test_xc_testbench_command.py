"""The ``pwsolid xc-testbench`` command end to end, through pwsolid.cli.main."""

import json
from pathlib import Path

from pwsolid.cli import main
from pwsolid.errors import EXIT_INVALID_INPUT, EXIT_OK

REPO = Path(__file__).resolve().parents[2]
EXAMPLE = REPO / "inputs" / "functionals" / "brightfilm-trial-correlation.py"


def test_built_in_and_user_file(tmp_path, capsys):
    # Plots cost a few seconds each on a loaded machine: one functional is plotted.
    out_dir = tmp_path / "bench"
    code = main(["xc-testbench", "lda-wigner", "--user-file", str(EXAMPLE), "--no-plots",
                 "--compare", "lda-pw92,lda-vwn", "--output-dir", str(out_dir)])
    assert code == EXIT_OK          # Wigner fails two conditions: still a report, exit 0
    text = capsys.readouterr().out
    assert "Uniform-gas testbench: lda-wigner" in text
    assert "Uniform-gas testbench: brightfilm-trial" in text
    assert "FAIL  high-density-logarithm" in text and "PASS  lieb-oxford-bound" in text
    assert "vs lda-pw92" in text and "Ceperley" in text
    code = main(["xc-testbench", "--user-file", str(EXAMPLE), "--output-dir", str(out_dir)])
    assert code == EXIT_OK
    assert (out_dir / "lda-wigner-uniform-gas.json").is_file()
    for suffix in (".json", ".png", ".svg"):
        assert (out_dir / f"brightfilm-trial-uniform-gas{suffix}").stat().st_size > 1000
    png = (out_dir / "brightfilm-trial-uniform-gas.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    assert (out_dir / "brightfilm-trial-uniform-gas.svg").read_text().lstrip().startswith("<?xml")
    doc = json.loads((out_dir / "lda-wigner-uniform-gas.json").read_text())
    assert doc["schema"] == "pwsolid.xc-testbench/1"
    assert doc["references"] == ["lda-pw92", "lda-vwn"]
    assert set(doc["failed_conditions"]) == {"polarisation-weakens-correlation",
                                             "high-density-logarithm"}
    doc = json.loads((out_dir / "brightfilm-trial-uniform-gas.json").read_text())
    assert doc["functional"]["origin"] == f"file:{EXAMPLE.resolve()}"


def test_default_functional_file_prefix_and_no_plots(tmp_path, capsys):
    code = main(["xc-testbench", "--output-dir", str(tmp_path), "--no-plots", "--rs", "2,4"])
    assert code == EXIT_OK
    assert "Uniform-gas testbench: lda-pz81" in capsys.readouterr().out
    assert sorted(p.name for p in tmp_path.iterdir()) == ["lda-pz81-uniform-gas.json"]
    doc = json.loads((tmp_path / "lda-pz81-uniform-gas.json").read_text())
    assert 4.0 in doc["table"]["rs_bohr"]            # the printed rs join the table
    code = main(["xc-testbench", f"file:{EXAMPLE}", "--compare", "", "--no-plots",
                 "--output-dir", str(tmp_path)])
    assert code == EXIT_OK
    doc = json.loads((tmp_path / "brightfilm-trial-uniform-gas.json").read_text())
    assert doc["references"] == [] and doc["correlation_differences_mHa"] == {}


def test_bad_input_exits_with_code_3(tmp_path, capsys):
    assert main(["xc-testbench", "lda-nonsense", "--output-dir", str(tmp_path)]) \
        == EXIT_INVALID_INPUT
    assert "lda-pw92" in capsys.readouterr().err       # the valid names are listed
    assert main(["xc-testbench", "--compare", "lda-nope", "--output-dir", str(tmp_path)]) \
        == EXIT_INVALID_INPUT
    assert main(["xc-testbench", "--rs", "1,x", "--output-dir", str(tmp_path)]) \
        == EXIT_INVALID_INPUT
    assert main(["xc-testbench", "--rs", "-1", "--output-dir", str(tmp_path)]) \
        == EXIT_INVALID_INPUT
    bad = tmp_path / "positive.py"
    bad.write_text("def energy_per_electron(a, b):\n    return 0.2 + 0 * a\n")
    assert main(["xc-testbench", "--user-file", str(bad), "--output-dir", str(tmp_path)]) \
        == EXIT_INVALID_INPUT
    assert str(bad) in capsys.readouterr().err
    assert not list(tmp_path.glob("*.json"))
