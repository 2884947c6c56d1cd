"""How store_0001.sqlite was made (run once, when 0001 was the newest revision).

Kept for the record: once later revisions exist, running this again would make
a store at the newest revision, not at 0001.  The committed file is the test
fixture; do not regenerate it.

    python tests/inventory/data/make_store_0001.py
"""

from pathlib import Path

from inventory.store import open_store

HERE = Path(__file__).parent
CSV = """kind,value,qty,tolerance,power,voltage,dielectric,location,min_qty,hfe_min,hfe_max,ft,cob
resistor,4k7,20,5%,0.25W,,,A1,5,,,,
resistor,10k,12,1%,,,,A2,,,,,
capacitor,100n,30,10%,,50V,x7r,B1,,,,,
capacitor,10u,8,,,25V,electrolytic,B2,,,,,
npn,OLD-N1,6,,,,,C1,,100,300,200M,5p
"""

if __name__ == "__main__":
    target = HERE / "store_0001.sqlite"
    target.unlink(missing_ok=True)
    src = HERE / "store_0001.csv"
    src.write_text(CSV, encoding="utf-8")
    store = open_store(str(target))
    store.import_csv(src)
    store.adjust(1, -4, "used on the bench")
    store.commit_builds([{"request": "old.toml", "copies": 2, "design": {"note": "made at 0001"},
                          "pieces": {1: 4, 3: 2, 5: 2}}])
    store.close()
    src.unlink()
    print(target, target.stat().st_size)  # noqa: T201 (a maintainer script)
