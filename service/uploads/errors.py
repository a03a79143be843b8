"""Row-numbered errors of an upload, collected and raised once (all rows or none)."""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray
from pydantic import ValidationError

from service.api.errors import Conflict, DomainError, Invalid

MAX_ROW_ERRORS = 1000  # errors listed in one answer; the count says how many there were


class UnsupportedMediaType(DomainError):
    """The upload is neither CSV nor JSON (415)."""

    status, title, kind = 415, "Unsupported media type", "unsupported-media-type"


class RowErrors:
    """Collects errors per row; raise_if_any() raises one problem listing them all."""

    def __init__(self, cap: int = MAX_ROW_ERRORS) -> None:
        self.cap = cap
        self.items: list[dict[str, Any]] = []
        self.count = 0
        self.bad_rows: set[int] = set()
        self._conflicts = 0

    def add(self, row: int, field: str | None, message: str, *, conflict: bool = False) -> None:
        """Record that a row's field is bad (conflict=True: clashes with stored data)."""
        self.count += 1
        self.bad_rows.add(row)
        if conflict:
            self._conflicts += 1
        if len(self.items) < self.cap:
            self.items.append({"row": row, "field": field, "in": "body", "message": message})

    def add_mask(
        self,
        numbers: NDArray[np.int64],
        mask: NDArray[np.bool_],
        field: str | None,
        message: str,
        *,
        conflict: bool = False,
    ) -> None:
        """One error per row where mask is true (numbers: the rows' numbers in the file)."""
        for row in numbers[np.asarray(mask, dtype=bool)].tolist():
            self.add(int(row), field, message, conflict=conflict)

    def add_validation(self, exc: ValidationError, row: int, prefix: str | None = None) -> None:
        """Record every error of a pydantic ValidationError raised for one row."""
        for err in exc.errors():
            loc = [str(p) for p in err.get("loc", ())]
            field = ".".join(loc) if loc else prefix
            self.add(row, field, str(err.get("msg", "invalid")))

    def __bool__(self) -> bool:
        return self.count > 0

    def __len__(self) -> int:
        return self.count

    def raise_if_any(self, what: str = "upload") -> None:
        """Raise Invalid (422), or Conflict (409) when every error is a clash; nothing saved."""
        if not self.count:
            return
        self.items.sort(key=lambda e: (e["row"], str(e["field"])))
        rows = len(self.bad_rows)
        detail = f"The {what} has {self.count} error(s) in {rows} row(s); nothing was saved." + (
            f" The first {self.cap} are listed." if self.count > self.cap else ""
        )
        cls = Conflict if self._conflicts == self.count else Invalid
        raise cls(detail, errors=self.items, error_count=self.count, bad_rows=rows)
