"""``pwsolid vibrational-thermodynamics PHONON_RESULT``: F, S, C_V against T (layer 6).

Reads a saved phonon result (JSON, schema ``pwsolid.phonons/...``), takes its
density of states and writes, into the output directory (default: beside the
phonon result):

* ``<stem>.thermal.json``: zero-point energy, free and internal energy, entropy and
  heat capacity against temperature (schema ``pwsolid.vibrational-thermodynamics/1``);
* ``<stem>.thermal.csv``: the same table, one row per temperature;
* ``<stem>.thermal.png`` and ``.svg``: C_V and S, and F and U, against T.

Exit codes: 0, or 4 when the spectrum has imaginary modes (left out of the sums).
"""

from __future__ import annotations

import json
from pathlib import Path

from ..errors import EXIT_NOT_CONVERGED, EXIT_OK, InputError
from ..safe_files import atomic_write_bytes
from .common import check_output_dir, check_output_file, save_figures, write_or_keep

__all__ = ["register", "run", "add_temperature_options", "temperatures_of"]


def add_temperature_options(p) -> None:
    """--highest-temperature and --temperature-step (kelvin)."""
    p.add_argument("--highest-temperature", metavar="KELVIN", default=None,
                   help="temperatures run from 0 K to this (default 1000)")
    p.add_argument("--temperature-step", metavar="KELVIN", default=None,
                   help="step of the temperatures (default 5)")


def temperatures_of(args, highest=None, step=None):
    """The temperature grid (K) from the options, else ``highest``/``step``, else defaults."""
    from ..thermodynamics import (DEFAULT_HIGHEST_TEMPERATURE, DEFAULT_TEMPERATURE_STEP,
                                  temperature_grid)

    values = []
    for option, given, fallback in (
            ("--highest-temperature", args.highest_temperature,
             highest if highest is not None else DEFAULT_HIGHEST_TEMPERATURE),
            ("--temperature-step", args.temperature_step,
             step if step is not None else DEFAULT_TEMPERATURE_STEP)):
        if given is None:
            values.append(float(fallback))
            continue
        try:
            values.append(float(str(given).strip().removesuffix("K").strip()))
        except ValueError:
            raise InputError("must be a temperature in kelvin, e.g. 800", key=option,
                             value=given) from None
    return temperature_grid(*values, key="--highest-temperature / --temperature-step")


def register(subparsers) -> None:
    p = subparsers.add_parser(
        "vibrational-thermodynamics",
        help="zero-point energy, free energy, entropy and heat capacity from phonons",
        description="Read a phonon result (JSON) and compute the harmonic zero-point energy, "
                    "Helmholtz free energy, internal energy, entropy and heat capacity at "
                    "constant volume from its density of states, from 0 K upwards.",
        epilog="Writes <stem>.thermal.json, <stem>.thermal.csv and <stem>.thermal.png/.svg. "
               "Exit code 4 when the spectrum has imaginary modes.")
    p.add_argument("phonon_result", help="phonon result document (JSON)")
    add_temperature_options(p)
    p.add_argument("--output-dir", metavar="DIR", default=None,
                   help="where to write (default: beside the phonon result)")
    p.set_defaults(handler=run)


def _read(path: Path) -> dict:
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise InputError("phonon result not found", source=str(path)) from None
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(f"cannot read the phonon result ({exc})", source=str(path)) from None
    except json.JSONDecodeError as exc:
        raise InputError(f"is not JSON ({exc.msg}, line {exc.lineno})", source=str(path)) from None


def run(args) -> int:
    from ..plots.thermal import VibrationalThermodynamicsPlot
    from ..results import write_json
    from ..workflows.phonon_thermodynamics import (spectrum_of_phonon_document,
                                                        vibrational_thermodynamics)

    path = Path(args.phonon_result)
    temperatures = temperatures_of(args)
    out = check_output_dir(Path(args.output_dir) if args.output_dir else path.absolute().parent)
    stem = path.name.removesuffix(".json").removesuffix(".phonons")
    json_path = check_output_file(out / f"{stem}.thermal.json", "--output-dir")
    doc = _read(path)
    spectrum, n_atoms, what = spectrum_of_phonon_document(doc, str(path))
    result = vibrational_thermodynamics(spectrum, temperatures, n_atoms=n_atoms,
                                        spectrum_from=what)
    print("\n".join(result.summary_lines()))
    if getattr(args, "writes_files", True):
        document = {**result.as_document(), "phonon_result": str(path)}
        json_path = write_or_keep(json_path, lambda p: write_json(p, document),
                                  "vibrational thermodynamics")
        csv_path = write_or_keep(out / f"{stem}.thermal.csv",
                                 lambda p: atomic_write_bytes(p, result.to_csv().encode()), "table")
        figures = save_figures(VibrationalThermodynamicsPlot.from_result(result), out / f"{stem}.thermal")
        print(f"Written: {json_path}, {csv_path}"
              + "".join(f", {f}" for f in figures))
    return EXIT_OK if result.converged else EXIT_NOT_CONVERGED
