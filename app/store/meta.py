"""The project's settings (``meta``) and the counters that hand out fresh ids."""

from __future__ import annotations

from collections.abc import Iterable

from app.store.db import Tx

#: Counter name -> the ``meta`` key a folder project keeps it in.
META_COUNTERS = {"person_ids": "next_person_id", "note_ids": "next_note_id",
              "group_ids": "next_group_id", "region_ids": "next_region_id"}


class MetaGateway:
    """Key/value facts about the project (its id, skeleton, images root, COCO category...)."""

    def __init__(self, tx: Tx):
        self._tx = tx
        #: What this transaction wrote, for the project's copy of its settings.
        self.written: dict[str, str] = {}

    def all(self) -> dict[str, str]:
        return {k: v for k, v in self._tx.rows("SELECT key, value FROM meta")}

    def get(self, key: str, default: str | None = None) -> str | None:
        return self._tx.value("SELECT value FROM meta WHERE key = ?", (key,), default)

    def set(self, key: str, value: str) -> None:
        self._tx.run("INSERT INTO meta (key, value) VALUES (?, ?) ON CONFLICT (key) DO UPDATE "
                     "SET value = excluded.value", (key, str(value)))
        self.written[key] = str(value)

    def set_many(self, values: dict[str, str]) -> None:
        self._tx.run_many("INSERT INTO meta (key, value) VALUES (?, ?) ON CONFLICT (key) DO "
                          "UPDATE SET value = excluded.value",
                          [(k, str(v)) for k, v in values.items()])
        self.written.update({k: str(v) for k, v in values.items()})


class Counters:
    """Fresh ids for people, notes, ignore regions and ledger groups.

    A folder project keeps each counter in ``meta`` (its one writer reads and bumps it inside
    the transaction). A hosted project draws them from sequences, which never make two
    annotators wait on each other; ids a rolled-back transaction drew are skipped, never
    reused. Region ids share the ``regions`` table's own sequence, so imported regions and
    drawn ones never collide.
    """

    def __init__(self, tx: Tx):
        self._tx = tx

    def take(self, name: str, n: int = 1, at_least: int = 1) -> int:
        """Reserve ``n`` consecutive ids (at least ``at_least``); returns the first.

        On a server, consecutive ids for ``n > 1`` need the bulk transaction's exclusive lock
        (:meth:`app.store.db.Database.write`), which keeps every other writer out.
        """
        tx = self._tx
        if tx.hosted:
            seq = self._sequence(name)
            if at_least > 1:
                tx.run("SELECT setval(?, greatest(?, (SELECT last_value FROM "
                       f"{_sequence_table(name)}) + 1), false)", (seq, at_least))
            first = int(tx.value("SELECT nextval(?)", (seq,)))
            if n > 1:
                tx.run("SELECT setval(?, ?)", (seq, first + n - 1))
            return first
        key = META_COUNTERS[name]
        value = max(int(tx.meta.get(key, "1") or 1), at_least)
        if name == "region_ids":
            # Imported regions take their ids from SQLite; edits must never reuse one, even
            # one whose region was deleted (the ledger would then name two regions alike).
            value = max(value, int(tx.value("SELECT max(id) FROM regions", default=0)) + 1)
        tx.meta.set(key, str(value + n))
        return value

    def reserve(self, name: str, ids: Iterable[int]) -> None:
        """Make sure later ids are all above every one of ``ids``."""
        top = max(ids, default=0)
        if self._tx.hosted:
            self._tx.run(f"SELECT setval(?, greatest(?, (SELECT last_value FROM "
                         f"{_sequence_table(name)})))", (self._sequence(name), top))
            return
        key = META_COUNTERS[name]
        if top >= int(self._tx.meta.get(key, "1") or 1):
            self._tx.meta.set(key, str(top + 1))

    def _sequence(self, name: str) -> str:
        if name == "region_ids":
            return str(self._tx.value("SELECT pg_get_serial_sequence('regions', 'id')"))
        return name


def _sequence_table(name: str) -> str:
    return "regions_id_seq" if name == "region_ids" else name
