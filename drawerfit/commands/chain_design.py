"""`drawerfit design` of a two-stage chain request: the ranked chains (docs/search.md,
"Chains"), and with --sheet / --spice the build sheet and SPICE deck of the chain
chosen with --rank."""

from __future__ import annotations

from drawerfit.console import emit_json, out

__all__ = ["design_chain"]


def design_chain(app, request, request_file: str, *, top: int, as_json: bool,
                 time_limit: float, sheet_dir, spice_file, locate, rank: int = 1) -> None:
    """Search the chains of ``request``, print them (table or JSON), then write the
    sheet and the deck of the chain ranked ``rank`` when asked."""
    from inventory.errors import InputError
    from optimiser.request import read_toml
    from optimiser.search.chains import check_chain_request, search_chains

    try:
        check_chain_request(request)
    except InputError as exc:
        _, text = read_toml(request_file)
        raise locate(exc, request_file, text) from None
    snapshot = app.store().snapshot()
    result = search_chains(request, snapshot, top=top,
                           time_limit_s=time_limit if time_limit else None)
    if as_json:
        emit_json(result.to_json())
    else:
        from drawerfit.render.chains import show_chain_result

        show_chain_result(out, result)
        _show_first_cautions(result, snapshot)
    if sheet_dir is None and spice_file is None:
        return
    from drawerfit.sheet.cli import sheet_for_chain, spice_for_chain

    if sheet_dir is not None:
        sheet_for_chain(sheet_dir, result, rank, snapshot, quiet=as_json)
    if spice_file is not None:
        spice_for_chain(spice_file, result, rank, snapshot, quiet=as_json)


def _show_first_cautions(result, snapshot) -> None:
    """The usual cautions of the design ranked first (capacitor voltage and polarity,
    dissipation, the bench note), as ``analyse`` prints them, and the assumed targets."""
    from drawerfit.render.analysis import show_cautions
    from drawerfit.render.designs import assumed_line
    from optimiser.chain_circuit import chain_circuit
    from optimiser.pair_evaluate import evaluate_pair
    from optimiser.pair_report import pair_cautions

    if result.designs:
        design = result.designs[0]
        circuit = chain_circuit(design, result.request, snapshot)
        ev = evaluate_pair(circuit.request, circuit.batch(), circuit.transistors,
                           circuit.ratings, large_signal=False)
        out.print(f"#{design.rank} cautions:")
        show_cautions(pair_cautions(ev, 0, circuit))
    line = assumed_line(result.request)
    if line:
        out.print(line, markup=False, highlight=False)
