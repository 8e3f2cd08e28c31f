"""Reading a streamed NDJSON batch answer, one result at a time."""

from __future__ import annotations

import json
from collections.abc import Mapping
from typing import Any

from curvewise_client.errors import ProtocolError
from curvewise_client.results import BatchItem, build, freeze
from curvewise_client.transport import Response


class BatchStream:
    """The results of a streamed batch, one :class:`BatchItem` per series as it arrives.

    Iterate it once. ``summary`` (the counts) is set when the final summary
    line has been read; ``close()`` (or a ``with`` block) drops the connection early.
    """

    def __init__(self, response: Response) -> None:
        self._response = response
        self._lines = response.iter_lines()
        self.summary: Mapping[str, Any] | None = None

    def __iter__(self) -> BatchStream:
        return self

    def __next__(self) -> BatchItem:
        for line in self._lines:
            try:
                data = json.loads(line)
            except ValueError as exc:
                raise ProtocolError(f"/v1/batch sent a line that is not JSON: {line[:200]!r}"
                                    ) from exc
            if isinstance(data, dict) and "summary" in data and "status" not in data:
                self.summary = freeze(data["summary"])
                continue
            return build(BatchItem, data)
        raise StopIteration

    def close(self) -> None:
        """Stop reading and release the connection."""
        self._response.close()

    def __enter__(self) -> BatchStream:
        return self

    def __exit__(self, *exc_info: Any) -> None:
        self.close()
