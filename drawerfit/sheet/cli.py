"""What the commands call for ``--sheet DIR``: write the sheet, then say what was written.

The cautions and the list of files go to stdout, or to stderr when ``--json``
owns stdout.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING

import click

if TYPE_CHECKING:
    from drawerfit.sheet import WrittenSheet
from inventory.errors import InputError

__all__ = ["sheet_option", "sheet_for_design", "sheet_for_build", "sheet_for_pair", "spice_option",
           "spice_for_design", "spice_for_search", "write_spice", "spice_for_pair",
           "sheet_for_chain", "spice_for_chain"]

sheet_option = click.option(
    "--sheet", "sheet_dir", type=click.Path(file_okay=False), default=None, metavar="DIR",
    help="Also write the build sheet here: sheet.html (printable), schematic.svg, "
         "stage.cir, response.png/.svg, drift.png, parts.csv (two transistors: also "
         "waveform.png).")


def sheet_for_design(directory, design, request, transistor, *, evaluation=None,
                     yield_result=None, quiet: bool = False,
                     cautions_shown: bool = False) -> WrittenSheet:
    """Write the sheet for one design and print the cautions and the files.

    ``quiet``: print to stderr (``--json`` owns stdout).  ``cautions_shown``:
    the command's own view has just printed this design's cautions.
    """
    # the sheet (plots, schematic, the engine) loads only when a sheet is asked for,
    # so that the command line starts quickly
    from drawerfit.console import err, out
    from drawerfit.sheet import echo_sheet, write_sheet

    written = write_sheet(directory, design, request, transistor, evaluation=evaluation,
                          yield_result=yield_result)
    title = "Build sheet" + (f" for design #{design.rank}" if design.rank else "") + " written:"
    echo_sheet(written, err if quiet else out, show_cautions=quiet or not cautions_shown,
               title=title)
    return written


def sheet_for_build(directory, build: dict, parts: list, request_file: str | None = None,
                    *, quiet: bool = False) -> WrittenSheet:
    """The sheet of a stored build (``builds show ID --sheet DIR``)."""
    from drawerfit.sheet.stored import design_from_json, request_from_json, transistor_named

    design_json = build.get("design") or {}
    design = None if isinstance(design_json.get("transistors"), list) else \
        design_from_json(design_json, parts)
    if request_file is not None:
        from optimiser.request import load_request

        request = load_request(request_file)
    elif isinstance(design_json.get("request"), dict):
        request = request_from_json(design_json["request"])
    elif build.get("request") and Path(str(build["request"])).is_file():
        from optimiser.request import load_request

        request = load_request(str(build["request"]))
    else:
        raise InputError(f"build {build.get('id')}: the request {build.get('request')!r} is "
                         "not stored with the build and no such file is here; give it with "
                         "--request FILE", field="--sheet")
    if isinstance(design_json.get("transistors"), list):
        return _chain_sheet_for_build(directory, design_json, request, build, parts,
                                      quiet=quiet)
    if request.topology != design.topology:
        raise InputError(f"the request is for a {request.topology} stage but build "
                         f"{build.get('id')} is {design.topology}", field="--request")
    request = _with_copies(request, int(build.get("copies", request.builds) or 1))
    transistor = transistor_named(design.transistor, parts)
    return sheet_for_design(directory, design, request, transistor, quiet=quiet)


def _chain_sheet_for_build(directory, design_json: dict, request, build: dict, parts: list,
                           *, quiet: bool = False) -> WrittenSheet:
    """The sheet of a stored chain line (a plan's chain build), drawn as ``design
    CHAIN.toml --sheet`` draws it, from the rows the store holds now."""
    from drawerfit.sheet.stored import chain_from_json
    from inventory.parts import Capacitor, Resistor, StockSnapshot, Transistor
    from optimiser.chain_circuit import chain_circuit

    design = chain_from_json(design_json, parts)
    if request.topology != design.topology:
        what = (design.topology if isinstance(design.topology, str)
                else "the chain " + " → ".join(design.topology))
        got = (request.topology if isinstance(request.topology, str)
               else " → ".join(request.topology))
        raise InputError(f"the request is for {got} but build {build.get('id')} is {what}",
                         field="--request")
    request = replace(_with_copies(request, int(build.get("copies", 1) or 1)),
                      coupling=design.coupling)
    snapshot = StockSnapshot(tuple(p for p in parts if isinstance(p, Resistor)),
                             tuple(p for p in parts if isinstance(p, Capacitor)),
                             tuple(p for p in parts if isinstance(p, Transistor)))
    return _write_chain_sheet(directory, design, chain_circuit(design, request, snapshot),
                              quiet=quiet, title="Build sheet written:")


def _with_copies(request, copies: int):
    from dataclasses import replace

    return replace(request, builds=copies)


def design_with_circuit_parts(design, circuit):
    """The design with each role's piece carrying the circuit file's tolerance and ratings.

    ``analyse`` designs come without stock pieces; the sheet takes tolerances
    (for the spread of the DC voltages), ratings and dielectrics (for the
    cautions) and bin locations from the circuit file's stock references.
    """
    from dataclasses import replace

    from optimiser.design import Piece
    from optimiser.stage import RESISTOR_ROLES

    parts = {}
    for role, pick in design.parts.items():
        kind = "resistor" if role in RESISTOR_ROLES else "capacitor"
        stock = circuit.stock_parts.get(role)
        if kind == "resistor":
            rating = getattr(stock, "power_w", None)
            diel = None
        else:
            rating = getattr(stock, "voltage_v", None)
            diel = getattr(stock, "dielectric", None)
        piece = Piece(pick.value, 1, circuit.stock_ids.get(role),
                      getattr(stock, "location", "") or "", kind,
                      circuit.tolerances.get(role), rating, diel)
        parts[role] = replace(pick, pieces=(piece,)) if not pick.pieces else pick
    return replace(design, parts=parts)


def sheet_for_circuit(directory, design, evaluation, circuit, yield_result=None, *,
                      quiet: bool = False) -> WrittenSheet:
    """The sheet of an analysed circuit (``analyse FILE --sheet DIR``).

    The analysis view prints the cautions itself; they are repeated only on
    stderr with ``--json``.
    """
    return sheet_for_design(directory, design_with_circuit_parts(design, circuit),
                            circuit.request, circuit.transistor, evaluation=evaluation,
                            yield_result=yield_result, quiet=quiet, cautions_shown=True)


def sheet_for_pair(directory, ev, i: int, circuit, *, picks=None, yield_result=None,
                   notes=None, quiet: bool = False, cautions_shown: bool = True,
                   title: str = "Build sheet written:", rank: int | None = None) -> WrittenSheet:
    """The sheet of a two-transistor circuit (circuit ``i`` of the evaluation ``ev``),
    then the cautions (unless ``cautions_shown``; always on stderr with ``quiet``) and
    the files written.  ``picks``: the pieces of each role (default: the circuit's)."""
    from drawerfit.console import err, out
    from drawerfit.sheet import echo_sheet
    from drawerfit.sheet.pair_writer import write_pair_sheet

    written = write_pair_sheet(directory, ev, i, circuit, picks=picks,
                               yield_result=yield_result, notes=notes, rank=rank)
    echo_sheet(written, err if quiet else out, show_cautions=quiet or not cautions_shown,
               title=title)
    return written


def spice_for_pair(path, circuit, *, quiet: bool = False,
                   title: str = "SPICE netlist") -> Path:
    """Write a two-transistor circuit's SPICE deck to ``path`` and say so (on stderr
    when ``--json`` owns stdout); a path that cannot be written: InputError, exit 2."""
    from drawerfit.console import err, out
    from optimiser.spice_netlist import pair_spice_netlist

    path = Path(path)
    try:
        path.write_text(pair_spice_netlist(circuit, circuit.transistors), encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write {path}: {exc.strerror or exc}", field="--spice") from None
    (err if quiet else out).print(f"{title} written: {path}", markup=False, highlight=False,
                                  soft_wrap=True)
    return path


def _chosen_chain(result, rank: int, snapshot, option: str, what: str):
    """The chain ranked ``rank`` as a circuit with given values, or None (said on
    stderr) when no chain meets the request."""
    from drawerfit.console import err
    from optimiser.chain_circuit import chain_circuit

    if not result.designs:
        noun = "cascode" if result.request.topology == "cascode" else "chain"
        err.print(f"{option}: no {noun} meets the request, so no {what} was written.")
        return None
    design = _ranked(list(result.designs), rank)
    return design, chain_circuit(design, result.request, snapshot)


def sheet_for_chain(directory, result, rank: int, snapshot, *, quiet: bool = False):
    """``design CHAIN.toml --sheet DIR``: the sheet of the chain ranked ``rank``, written
    as ``analyse`` writes a two-transistor circuit's (the bins are the search's pieces).

    Returns the WrittenSheet, or None when no chain meets the request.
    """
    chosen = _chosen_chain(result, rank, snapshot, "--sheet", "build sheet")
    if chosen is None:
        return None
    design, circuit = chosen
    return _write_chain_sheet(directory, design, circuit, quiet=quiet,
                              title=f"Build sheet for {_noun(design)} #{design.rank} written:")


def _write_chain_sheet(directory, design, circuit, *, quiet: bool, title: str):
    """A chain's sheet: the circuit evaluated whole, the + side of each polarised
    capacitor from it, the yield when the request asks."""
    from optimiser.pair_evaluate import evaluate_pair

    ev = evaluate_pair(circuit.request, circuit.batch(), circuit.transistors, circuit.ratings)
    plus = ev.extra.get("plus", {})
    picks = {role: replace(pick, plus=str(plus[role][0])) if role in plus else pick
             for role, pick in design.parts.items()}
    yres = None
    if circuit.request.wants_yield:
        from optimiser.yield_ import monte_carlo_pair

        yres = monte_carlo_pair(circuit.request, circuit.form, circuit.values,
                                circuit.transistors, circuit.tolerances,
                                samples=circuit.request.samples, seed=circuit.request.seed)
    # the ranked chains' view shows no cautions: the sheet's are printed
    return sheet_for_pair(directory, ev, 0, circuit, picks=picks, yield_result=yres,
                          quiet=quiet, cautions_shown=False, rank=design.rank, title=title)


def spice_for_chain(path, result, rank: int, snapshot, *, quiet: bool = False):
    """``design CHAIN.toml --spice FILE``: the deck of the chain ranked ``rank`` (the one
    ``--sheet`` draws).  Returns the path, or None when no chain meets the request."""
    chosen = _chosen_chain(result, rank, snapshot, "--spice", "netlist")
    if chosen is None:
        return None
    design, circuit = chosen
    return spice_for_pair(path, circuit, quiet=quiet,
                          title=f"SPICE netlist of {_noun(design)} #{design.rank}")


def _noun(design) -> str:
    return "cascode" if design.topology == "cascode" else "chain"


rank_option = click.option(
    "--rank", "sheet_rank", type=click.IntRange(1, 100), default=1, show_default=True,
    help="Which ranked design --sheet draws and --spice writes.")


def sheet_for_search(directory, result, rank: int, snapshot, *, quiet: bool = False):
    """The sheet of the design ranked ``rank`` in a search result (``design --sheet``).

    Returns the WrittenSheet, or None when no design meets the request (nothing is
    drawn then; a line on stderr says so).
    """
    chosen = _chosen(result, snapshot, rank, "--sheet", "build sheet")
    if chosen is None:
        return None
    design, transistor = chosen
    # The ranked view prints the cautions of design #1 itself.
    return sheet_for_design(directory, design, result.request, transistor, quiet=quiet,
                            cautions_shown=design is result.designs[0])


def _checked_spice_path(ctx, param, value):
    """``--spice FILE``: refused (one line, exit 2) before any work when it cannot be written."""
    if value is None:
        return None
    path = Path(value)
    if not value.strip():
        raise InputError("no file name given", field="--spice")
    if path.is_dir():
        raise InputError(f"{value} is a folder; give a file name such as stage.cir",
                         field="--spice")
    parent = path.parent if str(path.parent) else Path(".")
    if not parent.is_dir():
        raise InputError(f"cannot write {value}: the folder {parent} does not exist",
                         field="--spice")
    return value


spice_option = click.option(
    "--spice", "spice_file", default=None, metavar="FILE", callback=_checked_spice_path,
    help="Also write the stage as a plain SPICE netlist (title, the device's .model line, "
         "supply, source, every part by role, load, .op and .ac) to FILE; replaced if it "
         "exists.")


def write_spice(path, design, request, transistor) -> Path:
    """Write ``design``'s SPICE netlist to ``path`` (bad path: InputError, exit 2)."""
    from optimiser.spice_netlist import spice_netlist

    text = spice_netlist(design, request, transistor)
    path = Path(path)
    try:
        path.write_text(text, encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot write {path}: {exc.strerror or exc}", field="--spice") from None
    return path


def spice_for_design(path, design, request, transistor, *, quiet: bool = False) -> Path:
    """Write the netlist and say so (on stderr when ``--json`` owns stdout)."""
    from drawerfit.console import err, out

    written = write_spice(path, design, request, transistor)
    title = "SPICE netlist" + (f" of design #{design.rank}" if design.rank else "")
    (err if quiet else out).print(f"{title} written: {written}", markup=False, highlight=False,
                                  soft_wrap=True)
    return written


def spice_for_search(path, result, rank: int, snapshot, *, quiet: bool = False):
    """``design --spice FILE``: the netlist of the design ranked ``rank`` (the one
    ``--sheet`` draws; rank 1 unless ``--rank`` says otherwise).

    Returns the path, or None when no design meets the request (a line on stderr).
    """
    chosen = _chosen(result, snapshot, rank, "--spice", "netlist")
    if chosen is None:
        return None
    design, transistor = chosen
    return spice_for_design(path, design, result.request, transistor, quiet=quiet)


def _chosen(result, snapshot, rank: int, option: str, what: str):
    """(design ranked ``rank``, its transistor) for ``option``, or None (said on stderr)
    when no design meets the request."""
    from drawerfit.console import err

    designs = list(result.designs)
    if not designs:
        err.print(f"{option}: no design meets the request, so no {what} was written.")
        return None
    design = _ranked(designs, rank)
    transistor = snapshot.transistor(design.transistor)
    if transistor is None:
        raise InputError(f"transistor {design.transistor!r} is not in stock", field=option)
    return design, transistor


def _ranked(designs, rank: int):
    if rank > len(designs):
        raise InputError(f"there {'is' if len(designs) == 1 else 'are'} only {len(designs)} "
                         f"design{'s' if len(designs) != 1 else ''}; choose a rank from 1 to "
                         f"{len(designs)} (or raise --top)", field="--rank")
    return next((d for d in designs if d.rank == rank), designs[rank - 1])
