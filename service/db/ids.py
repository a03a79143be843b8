"""The range of record ids: every id column is an INTEGER, 32-bit signed on PostgreSQL."""

from __future__ import annotations

# SQLite cannot bind an integer past 2**63 - 1; PostgreSQL refuses one past 2**31 - 1 in an
# INTEGER column. `service.api.ids` bounds ids in requests by the same number.
MAX_ID = 2**31 - 1
