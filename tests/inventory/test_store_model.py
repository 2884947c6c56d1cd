"""Random sequences of stock operations against a plain-Python model of the counts.

Hypothesis draws adjustments, undos, build commits and build undos; after every
step the store's quantities must equal the model's (a row whose adding was undone
and that holds no pieces is not listed), a refused step must change nothing, and at the end the store's own check (qty == sum of movements, none
negative) must pass.
"""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from inventory.errors import InputError, StockShortage
from inventory.parts import Resistor
from inventory.store import open_store

N_ITEMS = 4

op = st.one_of(
    st.tuples(st.just("adjust"), st.integers(0, N_ITEMS - 1), st.integers(-6, 6)),
    st.tuples(st.just("undo"), st.integers(0, 30)),
    st.tuples(st.just("build"), st.dictionaries(st.integers(0, N_ITEMS - 1),
                                                st.integers(1, 5), min_size=1, max_size=3)),
    st.tuples(st.just("undo_build"), st.integers(0, 10)),
)


@settings(max_examples=15, deadline=None, database=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(start=st.lists(st.integers(0, 8), min_size=N_ITEMS, max_size=N_ITEMS),
       ops=st.lists(op, max_size=14))
def test_store_follows_the_model(tmp_path_factory, start, ops):
    store = open_store(str(tmp_path_factory.mktemp("model") / "s.sqlite"))
    try:
        ids = [store.add_item(Resistor(value=100.0 * (k + 1), qty=q)) for k, q in
               enumerate(start)]
        model = dict(zip(ids, start, strict=True))
        # batch id -> (net change per item, kind, undone?)
        batches = {b["batch"]: ({m["item_id"]: m["change"] for m in b["movements"]},
                                b["kind"], False) for b in store.history()}
        builds: list[tuple[int, int]] = []           # (build id, its batch id)
        creator = dict(zip(ids, sorted(batches), strict=True))   # one add batch per row

        def apply_undo(batch_id: int) -> None:
            net, kind, undone = batches[batch_id]
            new = store.undo(batch_id)
            for i, c in net.items():
                model[i] -= c
            batches[batch_id] = (net, kind, True)
            batches[new] = ({i: -c for i, c in net.items()}, "undo", False)

        for step in ops:
            before = dict(model)
            if step[0] == "adjust":
                _, k, d = step
                i = ids[k]
                if d == 0:
                    continue
                if model[i] + d < 0:
                    try:
                        store.adjust(i, d, "t")
                        raise AssertionError("overdraw accepted")
                    except StockShortage:
                        pass
                else:
                    b = store.adjust(i, d, "t")
                    model[i] += d
                    batches[b] = ({i: d}, "adjust", False)
            elif step[0] == "undo":
                known = sorted(batches)
                batch_id = known[step[1] % len(known)]
                net, kind, undone = batches[batch_id]
                if undone or kind == "undo":
                    try:
                        store.undo(batch_id)
                        raise AssertionError("second undo accepted")
                    except StockShortage:
                        raise
                    except InputError:
                        pass
                elif any(model[i] - c < 0 for i, c in net.items()):
                    try:
                        store.undo(batch_id)
                        raise AssertionError("undo into negative accepted")
                    except StockShortage:
                        pass
                else:
                    apply_undo(batch_id)
            elif step[0] == "build":
                pieces = {ids[k]: q for k, q in step[1].items()}
                if any(model[i] < q for i, q in pieces.items()):
                    try:
                        store.commit_builds([{"request": "m", "copies": 1, "design": {},
                                              "pieces": pieces}])
                        raise AssertionError("shortage accepted")
                    except StockShortage:
                        pass
                else:
                    bid = store.commit_builds([{"request": "m", "copies": 1, "design": {},
                                                  "pieces": pieces}])
                    batch_id = store.build(bid)["batch"]
                    for i, q in pieces.items():
                        model[i] -= q
                    batches[batch_id] = ({i: -q for i, q in pieces.items()}, "build", False)
                    builds.append((bid, batch_id))
            else:
                if not builds:
                    continue
                bid, batch_id = builds[step[1] % len(builds)]
                if batches[batch_id][2]:
                    try:
                        store.undo_build(bid)
                        raise AssertionError("second build undo accepted")
                    except InputError:
                        pass
                else:
                    net, kind, _ = batches[batch_id]
                    new = store.undo_build(bid)
                    for i, c in net.items():
                        model[i] -= c
                    batches[batch_id] = (net, kind, True)
                    batches[new] = ({i: -c for i, c in net.items()}, "undo", False)
            got = {p.id: p.qty for p in store.parts()}
            listed = {i: q for i, q in model.items() if q or not batches[creator[i]][2]}
            assert got == listed, (step, before, model, got)
            assert min(got.values()) >= 0
        assert store.check() == []
    finally:
        store.close()
