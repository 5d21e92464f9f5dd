"""Sessions: one sitting at the terminal, from start to end."""

from typing import Any

from sqlalchemy import text

from labelq.store.core import StoreCore
from labelq.store.errors import UnknownSessionError
from labelq.store.timestamps import utc_now


class SessionsMixin(StoreCore):
    """Start, end and list sessions."""

    def start_session(self, by: str) -> int:
        """Open a session for ``by``; its id."""
        with self._write() as connection:
            return connection.execute(
                text("INSERT INTO sessions (started_at, by) VALUES (:at, :by) RETURNING id"),
                {"at": utc_now(), "by": by},
            ).scalar_one()

    def end_session(self, session_id: int) -> None:
        """Close session ``session_id`` now; closing it again keeps the first end time."""
        with self._write() as connection:
            updated = connection.execute(
                text("UPDATE sessions SET ended_at = COALESCE(ended_at, :at) WHERE id = :id"),
                {"at": utc_now(), "id": session_id},
            ).rowcount
            if updated == 0:
                raise UnknownSessionError(f"no session with id {session_id}")

    def sessions(self) -> list[dict[str, Any]]:
        """Every session as ``{"id", "started_at", "ended_at", "by"}``, oldest first."""
        with self._read() as connection:
            rows = connection.execute(text("SELECT id, started_at, ended_at, by FROM sessions ORDER BY id"))
            return [dict(row._mapping) for row in rows]
