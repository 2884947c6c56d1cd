"""`drawerfit design` of a two-stage chain request: the ranked chains (docs/search.md,
"Chains")."""

from __future__ import annotations

from drawerfit.console import emit_json, out

__all__ = ["design_chain"]


def design_chain(app, request, request_file: str, *, top: int, as_json: bool,
                 time_limit: float, sheet_dir, spice_file, locate) -> None:
    """Search the chains of ``request`` and print them (table or JSON)."""
    from inventory.errors import InputError
    from optimiser.request import read_toml
    from optimiser.search.chains import check_chain_request, search_chains

    try:
        check_chain_request(request)
    except InputError as exc:
        _, text = read_toml(request_file)
        raise locate(exc, request_file, text) from None
    if sheet_dir is not None or spice_file is not None:
        opt = "--sheet" if sheet_dir is not None else "--spice"
        raise InputError("not written for a chain by `design`: write the chosen "
                         "chain's values into a circuit file and run `drawerfit analyse "
                         f"FILE {opt} ...`", file=request_file, field=opt)
    snapshot = app.store().snapshot()
    result = search_chains(request, snapshot, top=top,
                           time_limit_s=time_limit if time_limit else None)
    if as_json:
        emit_json(result.to_json())
        return
    from drawerfit.render.chains import show_chain_result

    show_chain_result(out, result)
