"""Review rooms: a team reviews one case together, with notes that are never lost.

:mod:`.store` keeps rooms and every version of every note (SQLite); :mod:`.hub`
keeps who is in a room and who steers it, and tells every page of a change.
"""

from .hub import Hub, RoomError, RoomLimits
from .store import Note, Room, RoomStore, SQLiteStore, StoreError, default_store_path, open_store

__all__ = [
    "Hub",
    "RoomError",
    "RoomLimits",
    "Note",
    "Room",
    "RoomStore",
    "SQLiteStore",
    "StoreError",
    "default_store_path",
    "open_store",
]
