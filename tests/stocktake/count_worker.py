"""A desk adding scan files to a count, as its own process, for the crash and concurrency tests.

``python count_worker.py DB COUNT MODE FILE...``. Mode ``add``: add each file in turn and
print one JSON line per file (``added``, or ``refused`` with the reason) after its
transaction ends. Mode ``stall``: add the first file, but after its first chunk of scans
is written print ``{"op": "writing"}`` and sleep inside the open transaction, so a test
can kill -9 the process mid-add.
"""

from __future__ import annotations

import json
import sys
import time
from pathlib import Path

from issuer.errors import IssuerError
from issuer.register.counting import count_info
from issuer.register.scanfiles import add_scan_file
from issuer.register.store import open_register
from issuer.stocktake.counts import read_scan_file


def main() -> None:
    database, name, mode, *files = sys.argv[1:]
    register = open_register(database, actor=f"desk-{mode}")
    zone = count_info(register, name).zone
    print(json.dumps({"op": "ready"}), flush=True)
    sys.stdin.readline()  # start together
    for file in files:
        scan_file = read_scan_file(Path(file), zone=zone, scanner=mode)

        def stall(_n: int) -> None:
            if mode == "stall":
                print(json.dumps({"op": "writing"}), flush=True)
                time.sleep(600)

        try:
            info = add_scan_file(register, name, scan_file, progress=stall)
        except IssuerError as exc:
            print(json.dumps({"op": "refused", "file": file, "reason": str(exc)}), flush=True)
            continue
        print(json.dumps({"op": "added", "file": file, "scans": info.scans}), flush=True)
    register.close()


if __name__ == "__main__":
    main()
