"""Writer process for the crash-safety test: appends indexed forms until it is killed.

Usage: python store_crash_writer.py STORE START BATCH [COUNT [COMPACT_EVERY]]

Writes forms START, START+1, ... in transactions of BATCH forms, printing ``ready`` once the
store is open so the test kills it while it is writing, not while Python starts.  With
COMPACT_EVERY > 0 the store is compacted (rewritten and renamed into place) after every
COMPACT_EVERY transactions, so kills also land inside compactions.
"""

from __future__ import annotations

import os
import sys


def main() -> None:
    parent = os.getppid()
    from maasscomp.store import Store
    from tests.store.store_form_factory import indexed_form

    path, start, batch = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
    count = int(sys.argv[4]) if len(sys.argv) > 4 else 10**9
    compact_every = int(sys.argv[5]) if len(sys.argv) > 5 else 0
    n_txn = 0
    with Store.open(path, "a", create=True) as st:
        print("ready", flush=True)
        i = start
        while i < start + count:
            if os.getppid() != parent:
                # the test that started us is gone (interrupted run): stop instead of writing forever
                return
            chunk = [indexed_form(j) for j in range(i, i + batch)]
            with st.transaction():
                keys = st.add_forms(chunk)
                st.mark_task_done(f"task{i}", keys, run_id="crash")
            # attachments (and replacing one, which appends a new blob) are killed too
            if i % 2 == 0:
                st.put_attachment(keys[0], "scan", {"i": i})
                st.put_attachment(keys[0], "scan", {"i": i, "again": True})
            i += batch
            n_txn += 1
            if compact_every and n_txn % compact_every == 0:
                assert st.compact()


if __name__ == "__main__":
    main()
