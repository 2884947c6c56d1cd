"""`drawerfit design REQUEST.toml`: the best stages buildable from the drawer."""

from __future__ import annotations

import time

import click
from rich.live import Live
from rich.text import Text

from drawerfit.cli import pass_app
from drawerfit.commands.chain_design import design_chain
from drawerfit.console import emit_json, err, out
from drawerfit.sheet.cli import (
    rank_option,
    sheet_for_search,
    sheet_option,
    spice_for_search,
    spice_option,
)

__all__ = ["command", "run_design"]


def _locate(exc, path: str, text: str):
    """Give a request-check error the file and the line of its key."""
    from inventory.errors import InputError, InputErrors
    from optimiser.request import _line_of

    def one(e: InputError) -> InputError:
        line = None
        for key in (e.field, "gain" if e.field == "gain_db" else None):
            if key and line is None:
                line = _line_of(text, key)
        return e.located(file=path, line=line)

    if isinstance(exc, InputErrors):
        return InputErrors([one(e) for e in exc.errors])
    return one(exc)


#: Default time limit of the command's search, in seconds (0: none).
DEFAULT_TIME_LIMIT_S = 120.0


#: A search that runs longer than this shows a live status line on stderr (seconds).
STATUS_AFTER_S = 1.0


class StatusLine:
    """The live status line of a running search on ``console`` (Rich), shown only
    once the search has run ``after_s`` seconds and gone when it ends."""

    def __init__(self, console, after_s: float = STATUS_AFTER_S):
        self.console, self.after_s = console, after_s
        self.t0 = time.perf_counter()
        self.live: Live | None = None

    def update(self, status) -> None:
        """The ``progress`` callback of :func:`optimiser.search.search`."""
        elapsed = time.perf_counter() - self.t0
        if self.live is None:
            if elapsed < self.after_s:
                return
            self.live = Live(console=self.console, transient=True, refresh_per_second=4)
            self.live.start()
        self.live.update(Text(f"searching {elapsed:.0f} s · {status.text()}", style="dim"))

    def stop(self) -> None:
        if self.live is not None:
            self.live.stop()
            self.live = None


def run_design(request, snapshot, *, top: int, progress: bool,
               time_limit_s: float | None = DEFAULT_TIME_LIMIT_S):
    """Run the search (with a live status line on stderr when asked)."""
    from optimiser.search import search

    limit = time_limit_s if time_limit_s else None
    if not progress:
        return search(request, snapshot, top=top, misses=top, time_limit_s=limit)
    line = StatusLine(err)
    try:
        return search(request, snapshot, top=top, misses=top, progress=line.update,
                      time_limit_s=limit)
    finally:
        line.stop()


@click.command(name="design")
@click.argument("request_file", metavar="REQUEST.toml", type=click.Path())
@click.option("--top", "top", type=click.IntRange(1, 100), default=5, show_default=True,
              help="How many ranked designs (or nearest misses) to show.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON instead of tables (shape: docs/json.md).")
@click.option("--time-limit", "time_limit", type=click.FloatRange(0), default=DEFAULT_TIME_LIMIT_S,
              show_default=True, metavar="SECONDS",
              help="Stop the search after this long and say how much of the ranking is "
                   "proven; 0 searches to the end (a chain's proof has a budget of its "
                   "own within the limit, docs/search.md).")
@sheet_option
@spice_option
@rank_option
@pass_app
def command(app, request_file: str, top: int, as_json: bool, time_limit: float = DEFAULT_TIME_LIMIT_S,
            sheet_dir: str | None = None, sheet_rank: int = 1,
            spice_file: str | None = None) -> None:
    """Find the best stages you can build from your drawer for REQUEST.toml.

    Prints the ranked designs with the bin of every part, or, when nothing in
    stock meets the request, the nearest misses and what would unlock it (exit
    code 0: that is an answer).  Targets the file leaves out get the defaults
    the output names (thd_max_pct, ic_min_a; "none" for no limit).
    Request keys and defaults: docs/requests.md; the figures: docs/model.md.
    --sheet and --spice write the design (or chain, or cascode) chosen with --rank
    (default 1).
    """
    from inventory.errors import InputError
    from optimiser.request import load_request, read_toml
    from optimiser.search import check_request

    request = load_request(request_file, chains=True)
    if request.is_pair:
        design_chain(app, request, request_file, top=top, as_json=as_json,
                     time_limit=time_limit, sheet_dir=sheet_dir, spice_file=spice_file,
                     locate=_locate, rank=sheet_rank)
        return
    store = app.store()
    snapshot = store.snapshot()
    try:
        check_request(request, snapshot)
    except InputError as exc:
        _, text = read_toml(request_file)
        raise _locate(exc, request_file, text) from None
    try:
        result = run_design(request, snapshot, top=top, progress=not as_json and err.is_terminal,
                            time_limit_s=time_limit)
    except InputError as exc:                 # e.g. a transistor label not in stock
        _, text = read_toml(request_file)
        raise _locate(exc, request_file, text) from None
    if as_json:
        emit_json(result.to_json())
        if sheet_dir is not None:
            sheet_for_search(sheet_dir, result, sheet_rank, snapshot, quiet=True)
        if spice_file is not None:
            spice_for_search(spice_file, result, sheet_rank, snapshot, quiet=True)
        return
    from drawerfit.render.designs import show_result

    show_result(out, result, cautions_for=_cautions(request, snapshot))
    if sheet_dir is not None:
        sheet_for_search(sheet_dir, result, sheet_rank, snapshot)
    if spice_file is not None:
        spice_for_search(spice_file, result, sheet_rank, snapshot)


def _cautions(request, snapshot):
    def f(design):
        try:
            from optimiser.cautions import cautions
        except ImportError:
            return []
        return [c for c in cautions(design, request, snapshot.transistor(design.transistor))
                if c.level == "caution" or c.kind in ("mains", "verify")]
    return f


#: The demo shows what the search reaches in this time (and says what is proven).
DEMO_TIME_LIMIT_S = 0.0     # 0: to the end, so the demo shows a proven ranking


def show_demo_design(store) -> None:
    """Run the packaged demo request on ``store`` and print the ranked table (for `demo`)."""
    from importlib import resources

    from drawerfit.render.designs import show_result
    from optimiser.request import load_request

    with resources.as_file(resources.files("drawerfit") / "data" / "demo_request.toml") as p:
        request = load_request(p)
    out.print(f"\nDesign request (drawerfit/data/demo_request.toml): a {request.topology} stage, "
              f"{request.supply_v:g} V, gain {request.gain_db:.0f} dB ± {request.gain_tol_db:g} dB, "
              f"f_low ≤ {request.f_low_max_hz:g} Hz, f_high ≥ {request.f_high_min_hz:g} Hz")
    snapshot = store.snapshot()
    result = run_design(request, snapshot, top=3, progress=err.is_terminal,
                        time_limit_s=DEMO_TIME_LIMIT_S)
    show_result(out, result, cautions_for=_cautions(request, snapshot))
