"""SQL storage of brayscope: results, raw readings, quarantine and events.

:class:`Store` is the whole API; :mod:`daemon.storage.schema` holds the table definitions
(matching the Alembic migrations in ``daemon/migrations``).
"""

from daemon.storage.store import (
    MAX_QUARANTINE_PAYLOAD,
    QuarantineLike,
    ReadingLike,
    ResultRow,
    Store,
    UnitLike,
    quarantine_key,
    redact_url,
    refused_data,
    storable_datetime,
)

__all__ = [
    "MAX_QUARANTINE_PAYLOAD",
    "QuarantineLike",
    "ReadingLike",
    "ResultRow",
    "Store",
    "UnitLike",
    "quarantine_key",
    "redact_url",
    "refused_data",
    "storable_datetime",
]
