"""Claims: a labeller holds candidates for a while so parallel labellers are shown different ones."""

from collections.abc import Sequence
from typing import Optional

from sqlalchemy import bindparam, text

from labelq.store.core import StoreCore
from labelq.store.sql import CLAIM, DROP_EXPIRED_CLAIMS, HELD_BY_OTHERS
from labelq.store.timestamps import utc_after, utc_now


class ClaimsMixin(StoreCore):
    """Claim and release candidates; claims lapse at their expiry time."""

    def claim(self, candidate_ids: Sequence[int], holder: str, seconds: float = 300) -> list[int]:
        """Hold ``candidate_ids`` for ``holder`` for ``seconds``; the ids now held by ``holder``.

        Ids held by someone else whose claim has not expired are left to them; the holder's own
        claims are extended.
        """
        ids = [int(i) for i in candidate_ids]
        if not ids:
            return []
        now = utc_now()
        with self._write() as connection:
            connection.execute(text(DROP_EXPIRED_CLAIMS), {"now": now})
            connection.execute(
                text(CLAIM),
                [{"cid": cid, "holder": holder, "until": utc_after(seconds)} for cid in ids],
            )
            held = connection.execute(
                text(
                    "SELECT candidate_id FROM claims WHERE holder = :holder AND candidate_id IN :ids"
                ).bindparams(bindparam("ids", expanding=True)),
                {"holder": holder, "ids": ids},
            ).scalars()
            held_set = set(held)
        return [cid for cid in ids if cid in held_set]

    def release(self, holder: str, candidate_ids: Optional[Sequence[int]] = None) -> int:
        """Drop ``holder``'s claims on ``candidate_ids`` (all of them if None); the number dropped."""
        with self._write() as connection:
            if candidate_ids is None:
                return connection.execute(
                    text("DELETE FROM claims WHERE holder = :holder"), {"holder": holder}
                ).rowcount
            return connection.execute(
                text("DELETE FROM claims WHERE holder = :holder AND candidate_id IN :ids").bindparams(
                    bindparam("ids", expanding=True)
                ),
                {"holder": holder, "ids": [int(i) for i in candidate_ids]},
            ).rowcount

    def held_by_others(self, holder: Optional[str]) -> tuple[int, Optional[str]]:
        """(how many unexpired claims belong to someone other than ``holder``, the latest expiry
        among them as UTC text, or None)."""
        with self._read() as connection:
            count, until = connection.execute(
                text(HELD_BY_OTHERS),
                {"now": utc_now(), "holder": holder},
            ).one()
        return int(count), until
